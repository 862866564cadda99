"""The planning units: ids, polygons (repaired), the project CRS, population points."""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import shapely

from .cells import number_values, text_values
from .checks import (
    check_ids,
    check_overlaps,
    check_polygons,
    degree_like,
)
from .reading import (
    Reading,
    crs_name,
    source_columns,
    source_layer,
)
from .report import where_units

__all__ = ["read_units"]


def _utm_for(geoms: gpd.GeoSeries):
    """The UTM zone (WGS 84) of the data's centre, via pyproj's query_utm_crs_info."""
    return geoms.estimate_utm_crs()


def _metric(crs) -> bool:
    """A projected CRS whose first axis is in metres."""
    if crs is None or not crs.is_projected:
        return False
    axes = crs.axis_info
    return bool(axes) and axes[0].unit_name in ("metre", "meter")



def read_units(st: Reading) -> None:
    src = st.settings.sources["units"]
    file = src.path
    frame = source_layer(st, "units")
    if frame is None:
        return
    n = len(frame)
    rows = np.array([f"feature {k + 1}" for k in range(n)], dtype=object)
    st.labels = rows
    if n == 0:
        st.report.error(file, "[units]", "the units layer has no features",
                        "point [units] at the planning-unit polygons")
        return
    cols = source_columns(st, "units", frame, ["id"], file) or {}
    ids_ok = False
    if "id" in cols:
        ids, missing = text_values(frame[cols["id"]])
        ids_ok = check_ids(st.report, file, ids, missing, "unit", cols["id"],
                           raw=frame[cols["id"]])
        st.labels = np.where(missing, rows, ids)
        st.unit_ids = ids
    geoms, geoms_ok = check_polygons(st.report, file, frame.geometry.to_numpy(), st.labels)
    frame = gpd.GeoDataFrame(frame.drop(columns=frame.geometry.name), geometry=geoms,
                             crs=frame.crs)
    source_crs = st.source_crs = frame.crs
    if source_crs is None:
        st.report.error(file, "[units]", "the units layer has no coordinate reference system "
                        "(CRS)", "assign the layer's CRS in a GIS (e.g. 'Assign projection') "
                        "and export it again")
    elif _degrees_as_projected(st, frame, file, geoms_ok):
        geoms_ok = False
    else:
        frame, geoms_ok = _project_units(st, frame, file, geoms_ok)
    st.unit_frame = frame
    usable = ~(shapely.is_missing(frame.geometry.to_numpy())
               | shapely.is_empty(frame.geometry.to_numpy()))
    if usable.any():  # overlaps among the units that have a polygon
        check_overlaps(st.report, file, frame.geometry.to_numpy()[usable], st.labels[usable])
    st.units_ok = ids_ok and geoms_ok and usable.all()
    points = _unit_points(st, frame, source_crs, file, usable)
    st.units = gpd.GeoDataFrame(
        {"unit_id": st.unit_ids if st.unit_ids is not None else st.labels,
         "point": gpd.GeoSeries(points, crs=frame.crs)},
        geometry=frame.geometry.to_numpy(), crs=frame.crs,
    ).reset_index(drop=True)


def _degrees_as_projected(st: Reading, frame, file, geoms_ok) -> bool:
    """Longitude/latitude values under a projected CRS's label (reported); True if so.

    Told by extent and area together: every coordinate within ±180/±90 and planning
    units whose median area is under one square unit of the CRS (1 m2 in a metre CRS),
    which no real planning unit is.
    """
    crs = frame.crs
    if crs.is_geographic or not len(frame) or not geoms_ok:
        return False
    area = np.median(frame.geometry.area.to_numpy())
    if not (degree_like(frame.total_bounds) and area < 1.0):
        return False
    x0, y0, x1, y1 = frame.total_bounds
    unit = crs.axis_info[0].unit_name if crs.axis_info else "unit"
    st.report.error(file, "[units]", f"the layer says its CRS is {crs_name(crs)}, in "
                    f"{unit}s, but its coordinates (x {x0:.4f} to {x1:.4f}, y {y0:.4f} to "
                    f"{y1:.4f}) look like longitude/latitude degrees: the units would measure "
                    f"{area:.2g} square {unit}s each and travel would be near 0 km",
                    "assign the CRS the coordinates are really in (for degrees: EPSG:4326, "
                    "WGS 84) with 'Assign projection' or 'Set CRS' in a GIS, not 'Reproject', "
                    "and export again; the tool projects degrees to metres itself")
    return True


def _project_units(st: Reading, frame, file, ok):
    crs = frame.crs
    if crs.is_geographic:
        x0, y0, x1, y1 = frame.total_bounds
        if not (-180 <= x0 <= x1 <= 180 and -90 <= y0 <= y1 <= 90):
            st.report.error(file, "[units]", f"the layer says its CRS is {crs.to_string()} "
                            f"(longitude/latitude) but its coordinates ({x0:.0f}, {y0:.0f}) "
                            "are not degrees", "assign the CRS the coordinates are really in, "
                            "then export again")
            return frame, False
    if _metric(crs):
        st.crs = crs
        return frame, ok
    try:
        target = _utm_for(frame.geometry)
    except Exception as err:  # pyproj finds no UTM zone (bad bounds)
        st.report.error(file, "[units]", f"no local projection found for the data ({err})",
                        "reproject the layers to a projected CRS in metres")
        return frame, False
    kind = "geographic (longitude/latitude)" if crs.is_geographic else "not in metres"
    st.report.warning(file, "[units]",
                      f"the CRS {crs.to_string()} ({crs.name}) is {kind}; the project is "
                      f"reprojected to {target.to_string()} ({target.name}), the UTM zone of "
                      "the data's centre, so that distances and areas are in metres",
                      "to use another projection, reproject the layers to a projected CRS in "
                      "metres before loading")
    st.crs = target
    return frame.to_crs(target), ok


def _unit_points(st: Reading, frame, source_crs, file, usable) -> np.ndarray:
    """Population-weighted points from the point columns, else centroids."""
    cen = np.empty(len(frame), dtype=object)
    cen[:] = shapely.Point()
    cen[usable] = shapely.centroid(frame.geometry.to_numpy()[usable])
    src = st.settings.sources["units"]
    if not src.columns.get("point_x"):
        return cen
    cols = source_columns(st, "units", frame, ["point_x", "point_y"], file)
    if cols is None:
        return cen
    xy = []
    for role in ("point_x", "point_y"):
        num, missing, bad = number_values(frame[cols[role]])
        wrong = missing | bad
        if wrong.any():
            st.report.error(file, f"column {cols[role]}, {where_units(st.labels[wrong])}",
                            "point coordinate is missing or not a number",
                            f"enter the coordinate in {cols[role]}, or leave point_x and "
                            "point_y empty in [units] to use centroids", st.labels[wrong])
        xy.append(num)
    pts = gpd.GeoSeries(gpd.points_from_xy(*xy), crs=source_crs)
    if source_crs is not None and st.crs is not None and source_crs != st.crs:
        pts = pts.to_crs(st.crs)
    pts = pts.to_numpy()
    good = np.isfinite(xy[0]) & np.isfinite(xy[1]) & usable
    outside = good.copy()
    outside[good] = ~shapely.covers(frame.geometry.to_numpy()[good], pts[good])
    if outside.any():
        st.report.warning(file, where_units(st.labels[outside]),
                          "the population-weighted point lies outside its unit",
                          "check point_x / point_y (and that they share the layer's CRS)",
                          st.labels[outside])
    return np.where(good, pts, cen)
