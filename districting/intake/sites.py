"""School sites: ids, levels, statuses, capacity, utilization bands, the unit of each."""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import shapely

from .. import rules
from .cells import cell_text, number_values, text_values
from .checks import (
    check_ids,
    units_of_points,
)
from .reading import (
    Reading,
    in_degrees,
    source_columns,
    source_layer,
    to_project_crs,
)
from .report import ids_text, where_units
from .schema import MAX_SHARE

__all__ = ["read_sites"]



def read_sites(st: Reading) -> None:
    before = len(st.report.errors)
    _read_sites(st)
    if len(st.report.errors) > before:  # which level is unsure is not worth tracing
        st.doubtful.update((level, None) for level in st.settings.levels)


def _read_sites(st: Reading) -> None:
    s, src = st.settings, st.settings.sources["sites"]
    file = src.path
    frame = source_layer(st, "sites")
    if frame is None:
        return
    if len(frame) == 0:
        st.report.error(file, "[sites]", "the sites layer has no features",
                        "point [sites] at the layer of school sites (one point per school), "
                        "or add the schools to it")
        return
    optional = [r for r in ("name", "min_util", "max_util") if not src.columns.get(r)]
    cols = source_columns(st, "sites", frame, ["id", "name", "level", "capacity", "status",
                                         "min_util", "max_util"], file, optional)
    if cols is None:
        return
    frame = frame.reset_index(drop=True)
    misplaced = in_degrees(st, frame, "sites", file)
    frame = to_project_crs(st, frame, "sites", file)
    n = len(frame)
    rows = np.array([f"feature {k + 1}" for k in range(n)], dtype=object)
    ids, missing = text_values(frame[cols["id"]])
    check_ids(st.report, file, ids, missing, "site", cols["id"], raw=frame[cols["id"]])
    labels = np.where(missing, rows, ids)

    level, no_level = text_values(frame[cols["level"]])
    level = np.char.lower(level.astype(str)).astype(object)
    if no_level.any():
        st.report.error(file, where_units(labels[no_level], "site"), "the site has no level",
                        f"enter one of {', '.join(s.levels)} in {cols['level']}",
                        labels[no_level])
    other = ~no_level & ~np.isin(level, s.levels)
    if other.any():
        st.report.warning(file, where_units(labels[other], "site"),
                          f"level {cell_text(level, other)} is not one of the project's "
                          f"levels ({', '.join(s.levels)}); the site is left out",
                          "correct the level, or add it to [project] levels", labels[other])
    status, no_status = text_values(frame[cols["status"]])
    status = np.char.lower(status.astype(str)).astype(object)
    unknown = ~np.isin(status, rules.SITE_STATUSES)
    if unknown.any():
        st.report.error(file, f"column {cols['status']}, {where_units(labels[unknown], 'site')}",
                        f"unknown status {cell_text(frame[cols['status']], unknown)}",
                        f"use one of {', '.join(rules.SITE_STATUSES)}", labels[unknown])
    serving = rules.takes_students(status)
    capacity = _capacity(st, frame[cols["capacity"]], cols["capacity"], labels, serving,
                              file)
    utils = {}
    for role in ("min_util", "max_util"):
        utils[role] = np.full(n, np.nan)
        if role in cols:
            utils[role] = _share(st, frame[cols[role]], cols[role], labels, file)
    lo = rules.site_band(utils["min_util"], s.solve.min_utilization)
    hi = rules.site_band(utils["max_util"], s.solve.max_utilization)
    own = ~(np.isnan(utils["min_util"]) & np.isnan(utils["max_util"]))
    flipped = (lo > hi) & (own | (s.solve.min_utilization <= s.solve.max_utilization))
    if flipped.any():
        st.report.error(file, where_units(labels[flipped], "site"),
                        "the site's minimum utilization is above its maximum",
                        "lower min_util or raise max_util (blank = the [solve] default)",
                        labels[flipped])
    points = _site_points(st, frame, labels, file)
    keep = ~other
    st.sites = gpd.GeoDataFrame(
        {"site_id": labels, "name": frame[cols["name"]].astype(str).str.strip().to_numpy()
         if "name" in cols else labels, "level": level, "capacity": capacity,
         "status": status, "min_util": utils["min_util"], "max_util": utils["max_util"],
         "unit_index": np.full(n, -1) if misplaced else _site_units(st, points, labels,
                                                                         file)},
        geometry=points, crs=st.crs,
    )[keep].reset_index(drop=True)
    _shared_units(st, file)


def _capacity(st: Reading, values, column, labels, serving, file) -> np.ndarray:
    num, missing, bad = number_values(values)
    zero = serving & ~missing & ~bad & (num <= 0)
    for mask, what in (
        (serving & missing, "capacity is missing for an open, new or candidate site"),
        (bad, f"capacity is not a number ({cell_text(values, bad)})"),
        (zero, f"capacity is zero or negative ({cell_text(values, zero)}) for an open, "
               "new or candidate site"),
        (~serving & (np.nan_to_num(num) < 0), "capacity is negative"),
    ):
        if mask.any():
            st.report.error(file, f"column {column}, {where_units(labels[mask], 'site')}",
                            what, f"enter the site's capacity (students, above 0) in {column}"
                            ", or mark the site closed", labels[mask])
    return np.where(np.isfinite(num) & (num > 0), num, 0.0)


def _share(st: Reading, values, column, labels, file) -> np.ndarray:
    num, _missing, bad = number_values(values)
    wrong = bad | (np.nan_to_num(num) < 0) | (np.nan_to_num(num) > MAX_SHARE)
    if wrong.any():
        st.report.error(file, f"column {column}, {where_units(labels[wrong], 'site')}",
                        f"utilization must be a share of capacity from 0 to {MAX_SHARE:g} "
                        f"({cell_text(values, wrong)})",
                        f"enter e.g. 0.9 for 90% in {column}, or leave it blank for the "
                        "[solve] default", labels[wrong])
    return np.where(wrong, np.nan, num)


def _site_points(st: Reading, frame, labels, file) -> np.ndarray:
    geoms = frame.geometry.to_numpy()
    empty = shapely.is_missing(geoms) | shapely.is_empty(geoms)
    if empty.any():
        st.report.error(file, where_units(labels[empty], "site"), "the site has no location",
                        "place the site's point at the school", labels[empty])
    other = ~empty & (shapely.get_type_id(geoms) != 0)
    if other.any():
        st.report.warning(file, where_units(labels[other], "site"),
                          "the site is not a point; a point inside its shape is used",
                          "store sites as points to choose the location yourself",
                          labels[other])
        geoms = geoms.copy()
        geoms[other] = shapely.point_on_surface(geoms[other])
    return geoms


def _site_units(st: Reading, points, labels, file) -> np.ndarray:
    if st.units is None or st.crs is None:
        return np.full(len(points), -1, dtype=np.int64)
    unit_geoms = st.units.geometry.to_numpy()
    usable = ~(shapely.is_missing(points) | shapely.is_empty(points))
    index = np.full(len(points), -1, dtype=np.int64)
    index[usable] = units_of_points(unit_geoms, points[usable])
    outside = usable & (index < 0)
    if outside.any():
        far = shapely.STRtree(unit_geoms).query_nearest(points[outside], return_distance=True)
        dist = far[1]
        st.report.error(file, where_units(labels[outside], "site"),
                        f"the site lies outside every planning unit (by "
                        f"{ids_text([f'{d:,.0f} m' for d in dist], 4)})",
                        "move the site's point into the unit it stands in, or add that unit "
                        "to the units layer", labels[outside])
    return index


def _shared_units(st: Reading, file) -> None:
    """Two sites of one level that are both open in the same unit cannot both hold it."""
    sites = st.sites
    forced = sites[rules.open_in_plan(sites["status"]) & (sites["unit_index"] >= 0)]
    dup = forced[forced.duplicated(["level", "unit_index"], keep=False)]
    if len(dup):
        labels = dup["site_id"].tolist()
        units = st.labels[dup["unit_index"].unique()]
        st.report.error(file, where_units(labels, "site"),
                        f"these sites of one level stand in the same planning unit "
                        f"({ids_text(units)}); each open site's zone must hold its own unit",
                        "split the unit so each site has its own, or mark one site closed",
                        labels)
