"""Reading a project's sources: every layer and table, checked, assembled into Inputs.

:func:`districting.project.validate_project` parses the project file and hands the
:class:`~districting.project.Settings` to :class:`Intake`, which reads the units, counts,
sites, today's zones, barriers, bridges, manual links and travel matrix in that order,
runs the checks of :mod:`districting.validate` on each, and assembles
:class:`~districting.project.Inputs` when no error was found. Reads only: nothing is
written.
"""

from __future__ import annotations

from collections.abc import Sequence
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely

from .adjacency import Adjacency
from .io import ReadError, read_layer, read_table
from .project import SITE_STATUSES, Inputs, Settings, Source
from .schema import MAX_SHARE
from .validate import (
    cell_text,
    check_counts,
    check_graph,
    check_ids,
    check_overlaps,
    check_polygons,
    columns_text,
    degree_like,
    find_column,
    ids_text,
    number_values,
    text_values,
    units_of_points,
    usable_capacity,
    where_units,
)

__all__ = ["Intake", "SERVING", "positions"]

#: Statuses whose sites can take students in the plan year.
SERVING = ("open", "new", "candidate")


def positions(keys: Sequence, wanted) -> np.ndarray:
    """Index in ``keys`` (first occurrence) of each of ``wanted``; -1 where absent."""
    keys = pd.Index(pd.Series(list(keys), dtype=object))
    wanted = np.asarray(wanted, dtype=object)
    if not len(keys):
        return np.full(len(wanted), -1, dtype=np.int64)
    first = np.flatnonzero(~keys.duplicated())
    pos = keys[first].get_indexer(pd.Series(wanted, dtype=object))
    return np.where(pos >= 0, first[np.maximum(pos, 0)], -1).astype(np.int64)


def _a(word: str) -> str:
    return f"{'an' if word[:1].lower() in 'aeiou' else 'a'} {word}"


def _utm_for(geoms: gpd.GeoSeries):
    """The UTM zone (WGS 84) of the data's centre, via pyproj's query_utm_crs_info."""
    return geoms.estimate_utm_crs()


def _id_fix(word: str, wanted: str, ids) -> str:
    """"correct the unit id", naming the id that differs from ``wanted`` only in case."""
    same = sorted({str(i) for i in ids if str(i).casefold() == wanted.casefold()})
    if len(same) == 1:
        return (f"correct the {word} id: ids are exact, upper/lower case included (did you "
                f"mean {same[0]}?)")
    return f"correct the {word} id"


def _crs_name(crs) -> str:
    return f"{crs.to_string()} ({crs.name})"


def _metric(crs) -> bool:
    """A projected CRS whose first axis is in metres."""
    if crs is None or not crs.is_projected:
        return False
    axes = crs.axis_info
    return bool(axes) and axes[0].unit_name in ("metre", "meter")


class Intake:
    """Reads every source of one project, runs the checks, and assembles :class:`Inputs`.

    Steps run in order and each one goes as far as the data allow, so one pass reports
    every problem: a later step that needs an earlier one's result (sites need the units'
    polygons) skips only the checks it cannot make.
    """

    def __init__(self, settings: Settings, report):
        self.s, self.r = settings, report
        self._layers: dict[tuple, gpd.GeoDataFrame | None] = {}
        self._failed: set[Path] = set()
        self.crs = None  # the project's CRS (the units', or its UTM zone)
        self.source_crs = None  # the units layer's own CRS
        self.unit_frame: gpd.GeoDataFrame | None = None  # attributes, rows = units
        self.units: gpd.GeoDataFrame | None = None  # unit_id, geometry, point
        self.unit_ids: np.ndarray | None = None
        self.labels = np.zeros(0, dtype=object)  # unit id, or "feature k" without one
        self.units_ok = False  # ids unique and every polygon usable
        self.counts: dict[str, np.ndarray] = {}
        self.sites: gpd.GeoDataFrame | None = None
        self.current: dict[str, np.ndarray] = {}
        self.barriers = gpd.GeoSeries([], crs=None)
        self.bridges = gpd.GeoSeries([], crs=None)
        self.links: pd.DataFrame | None = None
        self.adjacency = None
        self.travel: np.ndarray | None = None
        #: (level, year) or (level, None): figures with an error already reported; the
        #: capacity balance skips them rather than report a consequence as a new problem
        self.doubtful: set[tuple[str, int | None]] = set()

    # -- reading
    def layer(self, key: str) -> gpd.GeoDataFrame | None:
        src = self.s.sources[key]
        cache = (src.path, src.layer)
        if cache in self._layers:
            return self._layers[cache]
        frame = None
        if src.path not in self._failed:
            try:
                frame = read_layer(src.path, src.layer, what=key)
            except ReadError as err:
                where = f"layer {src.layer}" if src.layer and err.kind == "layer" else ""
                self.r.error(err.path, where, f"[{key}] source: {err.problem}", err.fix,
                             err.layers)
                if err.kind in ("missing", "unreadable"):
                    self._failed.add(src.path)
        self._layers[cache] = frame
        return frame

    def table(self, path: Path, what: str) -> pd.DataFrame | None:
        if path in self._failed:
            return None
        try:
            return read_table(path, what)
        except ReadError as err:
            self.r.error(err.path, "", err.problem, err.fix)
            self._failed.add(path)
            return None

    def columns(self, key: str, frame, roles: Sequence[str], file: Path,
                optional: Sequence[str] = ()) -> dict[str, str] | None:
        """Actual column names for ``roles`` of [key]; one error listing every missing one."""
        src = self.s.sources[key]
        found, missing = {}, []
        for role in roles:
            want = src.columns.get(role, "")
            if not want:
                if role not in optional:
                    missing.append(f"{role} (not set)")
                continue
            col = find_column(frame.columns, want)
            if col is None:
                missing.append(f"{want!r} ({role})")
            else:
                found[role] = col
        if missing:
            self.r.error(file, f"[{key}] columns", f"column{'s' if len(missing) > 1 else ''} "
                         f"{', '.join(missing)} not found (columns: {columns_text(frame.columns)})",
                         f"rename the column in the data, or set the [{key}] key to one of the "
                         "columns listed")
            return None
        return found

    def to_target(self, frame: gpd.GeoDataFrame, key: str, file: Path):
        """``frame`` in the project's CRS; reports a layer with no CRS, warns on another CRS.

        A layer in the units' own CRS is reprojected with them without a word; one in
        another CRS is reprojected too (coordinates are exact either way), with a warning
        naming both, since a mismatch is often a layer exported from the wrong project.
        """
        if frame.crs is None:
            self.r.error(file, f"[{key}]", f"the {key} layer has no coordinate reference "
                         "system (CRS)", "assign the layer's CRS in a GIS (e.g. 'Assign "
                         "projection') and export it again")
            return frame
        if self.crs is None or frame.crs == self.crs:
            return frame
        if self.source_crs is not None and frame.crs != self.source_crs:
            self.r.warning(file, f"[{key}]", f"the {key} layer is in {_crs_name(frame.crs)} "
                           f"but the units are in {_crs_name(self.source_crs)}; the {key} are "
                           "reprojected to the units' CRS",
                           "nothing to do if both CRSs are right; export the layer in the "
                           "units' CRS to silence this")
        return frame.to_crs(self.crs)

    # -- units
    def read_units(self) -> None:
        src = self.s.sources["units"]
        file = src.path
        frame = self.layer("units")
        if frame is None:
            return
        n = len(frame)
        rows = np.array([f"feature {k + 1}" for k in range(n)], dtype=object)
        self.labels = rows
        if n == 0:
            self.r.error(file, "[units]", "the units layer has no features",
                         "point [units] at the planning-unit polygons")
            return
        cols = self.columns("units", frame, ["id"], file) or {}
        ids_ok = False
        if "id" in cols:
            ids, missing = text_values(frame[cols["id"]])
            ids_ok = check_ids(self.r, file, ids, missing, "unit", cols["id"],
                               raw=frame[cols["id"]])
            self.labels = np.where(missing, rows, ids)
            self.unit_ids = ids
        geoms, geoms_ok = check_polygons(self.r, file, frame.geometry.to_numpy(), self.labels)
        frame = gpd.GeoDataFrame(frame.drop(columns=frame.geometry.name), geometry=geoms,
                                 crs=frame.crs)
        source_crs = self.source_crs = frame.crs
        if source_crs is None:
            self.r.error(file, "[units]", "the units layer has no coordinate reference system "
                         "(CRS)", "assign the layer's CRS in a GIS (e.g. 'Assign projection') "
                         "and export it again")
        elif self._degrees_as_projected(frame, file, geoms_ok):
            geoms_ok = False
        else:
            frame, geoms_ok = self._project_units(frame, file, geoms_ok)
        self.unit_frame = frame
        usable = ~(shapely.is_missing(frame.geometry.to_numpy())
                   | shapely.is_empty(frame.geometry.to_numpy()))
        if usable.any():  # overlaps among the units that have a polygon
            check_overlaps(self.r, file, frame.geometry.to_numpy()[usable], self.labels[usable])
        self.units_ok = ids_ok and geoms_ok and usable.all()
        points = self._unit_points(frame, source_crs, file, usable)
        self.units = gpd.GeoDataFrame(
            {"unit_id": self.unit_ids if self.unit_ids is not None else self.labels,
             "point": gpd.GeoSeries(points, crs=frame.crs)},
            geometry=frame.geometry.to_numpy(), crs=frame.crs,
        ).reset_index(drop=True)

    def _degrees_as_projected(self, frame, file, geoms_ok) -> bool:
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
        self.r.error(file, "[units]", f"the layer says its CRS is {_crs_name(crs)}, in "
                     f"{unit}s, but its coordinates (x {x0:.4f} to {x1:.4f}, y {y0:.4f} to "
                     f"{y1:.4f}) look like longitude/latitude degrees: the units would measure "
                     f"{area:.2g} square {unit}s each and travel would be near 0 km",
                     "assign the CRS the coordinates are really in (for degrees: EPSG:4326, "
                     "WGS 84) with 'Assign projection' or 'Set CRS' in a GIS, not 'Reproject', "
                     "and export again; the tool projects degrees to metres itself")
        return True

    def _project_units(self, frame, file, ok):
        crs = frame.crs
        if crs.is_geographic:
            x0, y0, x1, y1 = frame.total_bounds
            if not (-180 <= x0 <= x1 <= 180 and -90 <= y0 <= y1 <= 90):
                self.r.error(file, "[units]", f"the layer says its CRS is {crs.to_string()} "
                             f"(longitude/latitude) but its coordinates ({x0:.0f}, {y0:.0f}) "
                             "are not degrees", "assign the CRS the coordinates are really in, "
                             "then export again")
                return frame, False
        if _metric(crs):
            self.crs = crs
            return frame, ok
        try:
            target = _utm_for(frame.geometry)
        except Exception as err:  # pyproj finds no UTM zone (bad bounds)
            self.r.error(file, "[units]", f"no local projection found for the data ({err})",
                         "reproject the layers to a projected CRS in metres")
            return frame, False
        kind = "geographic (longitude/latitude)" if crs.is_geographic else "not in metres"
        self.r.warning(file, "[units]",
                       f"the CRS {crs.to_string()} ({crs.name}) is {kind}; the project is "
                       f"reprojected to {target.to_string()} ({target.name}), the UTM zone of "
                       "the data's centre, so that distances and areas are in metres",
                       "to use another projection, reproject the layers to a projected CRS in "
                       "metres before loading")
        self.crs = target
        return frame.to_crs(target), ok

    def _unit_points(self, frame, source_crs, file, usable) -> np.ndarray:
        """Population-weighted points from the point columns, else centroids."""
        cen = np.empty(len(frame), dtype=object)
        cen[:] = shapely.Point()
        cen[usable] = shapely.centroid(frame.geometry.to_numpy()[usable])
        src = self.s.sources["units"]
        if not src.columns.get("point_x"):
            return cen
        cols = self.columns("units", frame, ["point_x", "point_y"], file)
        if cols is None:
            return cen
        xy = []
        for role in ("point_x", "point_y"):
            num, missing, bad = number_values(frame[cols[role]])
            wrong = missing | bad
            if wrong.any():
                self.r.error(file, f"column {cols[role]}, {where_units(self.labels[wrong])}",
                             "point coordinate is missing or not a number",
                             f"enter the coordinate in {cols[role]}, or leave point_x and "
                             "point_y empty in [units] to use centroids", self.labels[wrong])
            xy.append(num)
        pts = gpd.GeoSeries(gpd.points_from_xy(*xy), crs=source_crs)
        if source_crs is not None and self.crs is not None and source_crs != self.crs:
            pts = pts.to_crs(self.crs)
        pts = pts.to_numpy()
        good = np.isfinite(xy[0]) & np.isfinite(xy[1]) & usable
        outside = good.copy()
        outside[good] = ~shapely.covers(frame.geometry.to_numpy()[good], pts[good])
        if outside.any():
            self.r.warning(file, where_units(self.labels[outside]),
                           "the population-weighted point lies outside its unit",
                           "check point_x / point_y (and that they share the layer's CRS)",
                           self.labels[outside])
        return np.where(good, pts, cen)

    # -- counts
    def read_counts(self) -> None:
        s = self.s
        template = s.sources["units"].columns["counts"]
        src = s.sources.get("counts")
        if src is not None:
            table = self.table(src.path, "counts")
            if table is None:
                return
            file = src.path
            values, labels, present = self._join_csv(table, src, file)
        else:
            if self.unit_frame is None:
                return
            table, file = self.unit_frame, s.sources["units"].path
            values, labels = table, self.labels
            present = np.ones(len(table), bool)
        n = len(labels)
        for level in s.levels:
            arr = np.zeros((len(s.all_years), n))
            absent = []
            for t, year in enumerate(s.all_years):
                try:
                    name = template.format(level=level, year=year)
                except (KeyError, IndexError, ValueError):
                    return  # the template itself is reported with the project file
                col = find_column(table.columns, name)
                if col is None:
                    absent.append((year, name))
                    self.doubtful.add((level, year))
                    continue
                cells = values[col].to_numpy(dtype=object)
                before = len(self.r.errors)
                arr[t, present] = check_counts(self.r, file, cells[present], labels[present],
                                               col)
                if len(self.r.errors) > before:
                    self.doubtful.add((level, year))
            if absent:
                yrs = ", ".join(str(y) for y, _ in absent)
                names = ", ".join(c for _, c in absent)
                self.r.error(file, f"column{'s' if len(absent) > 1 else ''} {names}",
                             f"no {level} student counts for year{'s' if len(absent) > 1 else ''}"
                             f" {yrs}: the [units] counts template {template!r} names column"
                             f"{'s' if len(absent) > 1 else ''} {names}, which the data lack",
                             "add the column(s), correct the counts template, or remove the "
                             f"year from [project] years (columns: {columns_text(table.columns)})",
                             [c for _, c in absent])
            self.counts[level] = arr

    def _join_csv(self, table: pd.DataFrame, src: Source, file: Path):
        """Rows of the counts CSV in unit order: (frame, labels, which units have a row)."""
        id_col = find_column(table.columns, src.columns["id"])
        units = self.unit_ids if self.unit_ids is not None else None
        if id_col is None:
            self.r.error(file, "[counts] id", f"column {src.columns['id']!r} not found "
                         f"(columns: {columns_text(table.columns)})",
                         "set [counts] id to the column holding the unit ids")
            empty = np.zeros(0, dtype=object)
            return table.iloc[:0], empty, np.zeros(0, bool)
        ids, missing = text_values(table[id_col])
        check_ids(self.r, file, ids, missing, "row", id_col, row_word="row",
                  raw=table[id_col])
        if units is None:  # no units to join to: check the CSV on its own
            keep = ~missing
            return table[keep].reset_index(drop=True), ids[keep], np.ones(keep.sum(), bool)
        first = ~pd.Series(ids).duplicated().to_numpy() & ~missing
        index = pd.Index(ids[first])
        pos = index.get_indexer(units)
        present = pos >= 0
        extra = ~index.isin(units)
        if extra.any():
            self.r.warning(file, where_units(list(index[extra])),
                           "rows for units that are not in the units layer are ignored",
                           "correct the unit ids, or add the units", list(index[extra]))
        if (~present).any():
            lacking = self.labels[~present]
            self.r.error(file, where_units(lacking), "the counts CSV has no row for the unit",
                         f"add a row per unit (id in column {id_col}), with 0 where there "
                         "are no students", lacking)
        rows = table[first].reset_index(drop=True)
        joined = rows.iloc[np.where(present, pos, 0)].reset_index(drop=True)
        return joined, self.labels, present

    # -- sites
    def read_sites(self) -> None:
        before = len(self.r.errors)
        self._read_sites()
        if len(self.r.errors) > before:  # which level is unsure is not worth tracing
            self.doubtful.update((level, None) for level in self.s.levels)

    def _read_sites(self) -> None:
        s, src = self.s, self.s.sources["sites"]
        file = src.path
        frame = self.layer("sites")
        if frame is None:
            return
        if len(frame) == 0:
            self.r.error(file, "[sites]", "the sites layer has no features",
                         "point [sites] at the layer of school sites (one point per school), "
                         "or add the schools to it")
            return
        optional = [r for r in ("name", "min_util", "max_util") if not src.columns.get(r)]
        cols = self.columns("sites", frame, ["id", "name", "level", "capacity", "status",
                                             "min_util", "max_util"], file, optional)
        if cols is None:
            return
        frame = frame.reset_index(drop=True)
        misplaced = self._in_degrees(frame, "sites", file)
        frame = self.to_target(frame, "sites", file)
        n = len(frame)
        rows = np.array([f"feature {k + 1}" for k in range(n)], dtype=object)
        ids, missing = text_values(frame[cols["id"]])
        check_ids(self.r, file, ids, missing, "site", cols["id"], raw=frame[cols["id"]])
        labels = np.where(missing, rows, ids)

        level, no_level = text_values(frame[cols["level"]])
        level = np.char.lower(level.astype(str)).astype(object)
        if no_level.any():
            self.r.error(file, where_units(labels[no_level], "site"), "the site has no level",
                         f"enter one of {', '.join(s.levels)} in {cols['level']}",
                         labels[no_level])
        other = ~no_level & ~np.isin(level, s.levels)
        if other.any():
            self.r.warning(file, where_units(labels[other], "site"),
                           f"level {cell_text(level, other)} is not one of the project's "
                           f"levels ({', '.join(s.levels)}); the site is left out",
                           "correct the level, or add it to [project] levels", labels[other])
        status, no_status = text_values(frame[cols["status"]])
        status = np.char.lower(status.astype(str)).astype(object)
        unknown = ~np.isin(status, SITE_STATUSES)
        if unknown.any():
            self.r.error(file, f"column {cols['status']}, {where_units(labels[unknown], 'site')}",
                         f"unknown status {cell_text(frame[cols['status']], unknown)}",
                         f"use one of {', '.join(SITE_STATUSES)}", labels[unknown])
        serving = np.isin(status, SERVING)
        capacity = self._capacity(frame[cols["capacity"]], cols["capacity"], labels, serving,
                                  file)
        utils = {}
        for role in ("min_util", "max_util"):
            utils[role] = np.full(n, np.nan)
            if role in cols:
                utils[role] = self._share(frame[cols[role]], cols[role], labels, file)
        lo = np.where(np.isnan(utils["min_util"]), s.solve.min_utilization, utils["min_util"])
        hi = np.where(np.isnan(utils["max_util"]), s.solve.max_utilization, utils["max_util"])
        own = ~(np.isnan(utils["min_util"]) & np.isnan(utils["max_util"]))
        flipped = (lo > hi) & (own | (s.solve.min_utilization <= s.solve.max_utilization))
        if flipped.any():
            self.r.error(file, where_units(labels[flipped], "site"),
                         "the site's minimum utilization is above its maximum",
                         "lower min_util or raise max_util (blank = the [solve] default)",
                         labels[flipped])
        points = self._site_points(frame, labels, file)
        keep = ~other
        self.sites = gpd.GeoDataFrame(
            {"site_id": labels, "name": frame[cols["name"]].astype(str).str.strip().to_numpy()
             if "name" in cols else labels, "level": level, "capacity": capacity,
             "status": status, "min_util": utils["min_util"], "max_util": utils["max_util"],
             "unit_index": np.full(n, -1) if misplaced else self._site_units(points, labels,
                                                                             file)},
            geometry=points, crs=self.crs,
        )[keep].reset_index(drop=True)
        self._shared_units(file)

    def _in_degrees(self, frame, key: str, file) -> bool:
        """A layer's coordinates in degrees under the label of a projected CRS (reported).

        Only judged when the units are sound (their own degrees are reported with them).
        True when so: the layer is then not used, since every site would lie "outside"
        and no barrier would cut anything (consequences, not second problems).
        """
        crs, units = frame.crs, self.unit_frame
        if (crs is None or crs.is_geographic or units is None or not len(units)
                or self.source_crs is None or degree_like(units.total_bounds)):
            return False
        geoms = frame.geometry[~(frame.geometry.isna() | frame.geometry.is_empty)]
        if not (len(geoms) and degree_like(geoms.total_bounds)):
            return False
        x0, y0, x1, y1 = geoms.total_bounds
        self.r.error(file, f"[{key}]", f"the {key} coordinates (x {x0:.4f} to {x1:.4f}, y "
                     f"{y0:.4f} to {y1:.4f}) look like longitude/latitude degrees, but the "
                     f"layer says its CRS is {_crs_name(crs)}, and the units' coordinates "
                     "are not degrees",
                     f"assign EPSG:4326 (WGS 84) to the {key} layer with 'Assign projection' "
                     "or 'Set CRS' in a GIS, not 'Reproject', and export again")
        return True

    def _capacity(self, values, column, labels, serving, file) -> np.ndarray:
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
                self.r.error(file, f"column {column}, {where_units(labels[mask], 'site')}",
                             what, f"enter the site's capacity (students, above 0) in {column}"
                             ", or mark the site closed", labels[mask])
        return np.where(np.isfinite(num) & (num > 0), num, 0.0)

    def _share(self, values, column, labels, file) -> np.ndarray:
        num, _missing, bad = number_values(values)
        wrong = bad | (np.nan_to_num(num) < 0) | (np.nan_to_num(num) > MAX_SHARE)
        if wrong.any():
            self.r.error(file, f"column {column}, {where_units(labels[wrong], 'site')}",
                         f"utilization must be a share of capacity from 0 to {MAX_SHARE:g} "
                         f"({cell_text(values, wrong)})",
                         f"enter e.g. 0.9 for 90% in {column}, or leave it blank for the "
                         "[solve] default", labels[wrong])
        return np.where(wrong, np.nan, num)

    def _site_points(self, frame, labels, file) -> np.ndarray:
        geoms = frame.geometry.to_numpy()
        empty = shapely.is_missing(geoms) | shapely.is_empty(geoms)
        if empty.any():
            self.r.error(file, where_units(labels[empty], "site"), "the site has no location",
                         "place the site's point at the school", labels[empty])
        other = ~empty & (shapely.get_type_id(geoms) != 0)
        if other.any():
            self.r.warning(file, where_units(labels[other], "site"),
                           "the site is not a point; a point inside its shape is used",
                           "store sites as points to choose the location yourself",
                           labels[other])
            geoms = geoms.copy()
            geoms[other] = shapely.point_on_surface(geoms[other])
        return geoms

    def _site_units(self, points, labels, file) -> np.ndarray:
        if self.units is None or self.crs is None:
            return np.full(len(points), -1, dtype=np.int64)
        unit_geoms = self.units.geometry.to_numpy()
        usable = ~(shapely.is_missing(points) | shapely.is_empty(points))
        index = np.full(len(points), -1, dtype=np.int64)
        index[usable] = units_of_points(unit_geoms, points[usable])
        outside = usable & (index < 0)
        if outside.any():
            far = shapely.STRtree(unit_geoms).query_nearest(points[outside], return_distance=True)
            dist = far[1]
            self.r.error(file, where_units(labels[outside], "site"),
                         f"the site lies outside every planning unit (by "
                         f"{ids_text([f'{d:,.0f} m' for d in dist], 4)})",
                         "move the site's point into the unit it stands in, or add that unit "
                         "to the units layer", labels[outside])
        return index

    def _shared_units(self, file) -> None:
        """Two sites of one level that are both open in the same unit cannot both hold it."""
        sites = self.sites
        forced = sites[sites["status"].isin(["open", "new"]) & (sites["unit_index"] >= 0)]
        dup = forced[forced.duplicated(["level", "unit_index"], keep=False)]
        if len(dup):
            labels = dup["site_id"].tolist()
            units = self.labels[dup["unit_index"].unique()]
            self.r.error(file, where_units(labels, "site"),
                         f"these sites of one level stand in the same planning unit "
                         f"({ids_text(units)}); each open site's zone must hold its own unit",
                         "split the unit so each site has its own, or mark one site closed",
                         labels)

    # -- today's zones
    def read_zones(self) -> None:
        s = self.s
        n = len(self.labels)
        self.current = {level: np.full(n, -1, dtype=np.int64) for level in s.levels}
        src = s.sources.get("zones")
        if src is None or self.unit_frame is None:
            return
        file = src.path
        units_src = s.sources["units"]
        if (src.path, src.layer) == (units_src.path, units_src.layer):
            frame = self.unit_frame
        elif src.path.suffix.lower() == ".csv":
            frame = self.table(src.path, "zones")
        else:
            frame = self.layer("zones")
        if frame is None:
            return
        roles = {"id": src.columns["id"], **src.level_columns}
        found, lacking = {}, []
        for role, want in roles.items():
            col = find_column(frame.columns, want)
            if col is None:
                lacking.append(f"{want!r} ({role})")
            found[role] = col
        if lacking:
            self.r.error(file, "[zones] columns", f"column{'s' if len(lacking) > 1 else ''} "
                         f"{', '.join(lacking)} not found (columns: {columns_text(frame.columns)})",
                         "rename the column in the data, or correct [zones] id / columns")
        for level in [lv for lv in s.levels if lv not in src.level_columns]:
            self.r.warning(file, "[zones] columns", f"today's {level} zones are not given; "
                           f"students moved and the stability weight do not apply to {level}",
                           f"add {level} = \"<column>\" to [zones] columns")
        if found["id"] is None or self.unit_ids is None:
            return
        if frame is self.unit_frame:
            pos = np.arange(n)
        else:
            ids, missing = text_values(frame[found["id"]])
            check_ids(self.r, file, ids, missing, "row", found["id"], raw=frame[found["id"]])
            first = ~pd.Series(ids).duplicated().to_numpy() & ~missing
            index = pd.Index(ids[first])
            frame = frame[first].reset_index(drop=True)
            pos = index.get_indexer(self.unit_ids)
            extra = ~index.isin(self.unit_ids)
            if extra.any():
                self.r.warning(file, where_units(list(index[extra])), "zone rows for units that "
                               "are not in the units layer are ignored",
                               "correct the unit ids", list(index[extra]))
        site_ids = [] if self.sites is None else self.sites["site_id"].tolist()
        for level, col in src.level_columns.items():
            if col is None or found.get(level) is None:
                continue
            col = found[level]
            cells = np.full(n, "", dtype=object)
            cells[pos >= 0] = text_values(frame[col])[0][pos[pos >= 0]]
            self.current[level] = self._zone_column(cells, level, col, site_ids, file)

    def _zone_column(self, cells, level, col, site_ids, file) -> np.ndarray:
        none = cells == ""
        index = positions(list(site_ids), cells)
        unknown = ~none & (index < 0)
        if self.sites is None:
            return index
        if unknown.any():
            self.r.error(file, f"column {col}, {where_units(self.labels[unknown])}",
                         f"today's {level} zone names site {cell_text(cells, unknown)}, which "
                         "is not in the sites layer",
                         f"correct the site id in {col}, or add the site", self.labels[unknown])
        known = index >= 0
        site_level = np.where(known, self.sites["level"].to_numpy(dtype=object)[index], level)
        wrong = known & (site_level != level)
        if wrong.any():
            self.r.error(file, f"column {col}, {where_units(self.labels[wrong])}",
                         f"today's {level} zone names site {cell_text(cells, wrong)}, which is "
                         f"{_a(ids_text(sorted(set(site_level[wrong]))))} site",
                         f"name {_a(level)} site in {col}", self.labels[wrong])
        status = np.where(known, self.sites["status"].to_numpy(dtype=object)[index], "")
        future = known & ~wrong & np.isin(status, ["new", "candidate"])
        if future.any():
            self.r.warning(file, f"column {col}, {where_units(self.labels[future])}",
                           f"today's {level} zone names a site that is not open today "
                           f"({cell_text(cells, future)}: new or candidate)",
                           "name the school the unit attends today", self.labels[future])
        if none.any():
            self.r.warning(file, f"column {col}, {where_units(self.labels[none])}",
                           f"no current {level} zone: the unit attends no {level} site today, "
                           "so no plan counts it as moved",
                           f"enter today's {level} site id in {col}", self.labels[none])
        return np.where(known & ~wrong, index, -1)

    # -- barriers, bridges, links
    def read_lines(self) -> None:
        for key in ("barriers", "bridges"):
            if key not in self.s.sources:
                continue
            file = self.s.sources[key].path
            frame = self.layer(key)
            if frame is None or self._in_degrees(frame, key, file):
                continue
            frame = self.to_target(frame, key, file)
            geoms = frame.geometry.reset_index(drop=True)
            geoms = geoms[~(geoms.isna() | geoms.is_empty)].reset_index(drop=True)
            if not len(geoms):
                effect = ("no adjacency is cut" if key == "barriers"
                          else "no pair is kept across a barrier")
                self.r.warning(file, f"[{key}]", f"the {key} layer has no features, so "
                               f"{effect}", f"point [{key}] at the layer that holds them, or "
                               f"remove the [{key}] table if there are none")
            if key == "barriers":
                points = np.isin(shapely.get_type_id(geoms.to_numpy()), [0, 4])
                if points.any():
                    self.r.error(file, f"features {ids_text(list(np.flatnonzero(points) + 1))}",
                                 "barriers must be lines (or polygons); a point cannot cut "
                                 "adjacency", "draw the river, road or rail as a line, or put "
                                 "points in [bridges]")
                    geoms = geoms[~points].reset_index(drop=True)
            setattr(self, key, geoms)

    def read_links(self) -> None:
        path = self.s.links
        if path is None:
            return
        table = self.table(path, "links")
        if table is None:
            return
        cols = {c: find_column(table.columns, c) for c in ("unit_a", "unit_b", "action")}
        if None in cols.values():
            self.r.error(path, "", "the links CSV needs columns unit_a, unit_b and action "
                         f"(columns: {columns_text(table.columns)})",
                         "name the header row unit_a,unit_b,action")
            return
        a = text_values(table[cols["unit_a"]])[0]
        b = text_values(table[cols["unit_b"]])[0]
        action = np.char.lower(text_values(table[cols["action"]])[0].astype(str))
        line = np.arange(len(table)) + 2  # the header is line 1
        known = set(self.unit_ids) if self.unit_ids is not None else None
        bad = np.zeros(len(table), bool)
        for what, mask, fix in (
            ("action must be add or remove", ~np.isin(action, ["add", "remove"]),
             "write add (join the pair) or remove (separate it)"),
            ("a unit cannot be linked to itself", (a == b) & (a != ""), "name two units"),
            ("unit_a or unit_b is not a planning unit",
             ~np.isin(a, list(known)) | ~np.isin(b, list(known)) if known is not None
             else np.zeros(len(table), bool), "correct the unit id"),
        ):
            mask = mask & ~bad
            if mask.any():
                rows = [f"row {k} ({a[i]}, {b[i]}, {action[i]})" for i, k in
                        zip(np.flatnonzero(mask), line[mask], strict=True)]
                self.r.error(path, ids_text(rows, 4), what, fix, [str(k) for k in line[mask]])
                bad |= mask
        self.links = pd.DataFrame({"unit_a": a, "unit_b": b, "action": action})[~bad]

    # -- graph, locks, travel, capacity
    def build_adjacency(self) -> None:
        if not self.units_ok or self.units is None:
            return
        file = self.s.sources["units"].path
        try:
            self.adjacency = Adjacency.from_polygons(
                self.units.geometry, self.units["unit_id"].tolist(), self.s.contiguity,
                barriers=self.barriers if len(self.barriers) else None,
                bridges=self.bridges if len(self.bridges) else None,
                links=self.links if self.links is not None and len(self.links) else None,
            )
        except ValueError as err:
            self.r.error(file, "adjacency", f"the adjacency graph cannot be built ({err})",
                         "fix the units, barriers or links named")
            return
        serving, site_labels = {}, {}
        if self.sites is not None:
            for level in self.s.levels:
                lv = self.sites[self.sites["level"] == level]
                serving[level] = lv.loc[lv["status"].isin(SERVING), "unit_index"].to_numpy()
                site_labels[level] = lv["site_id"].to_numpy()
        check_graph(self.r, file, self.adjacency, self.labels, serving, site_labels)

    def check_locks(self) -> None:
        if self.sites is None or self.unit_ids is None:
            return
        file = self.s.path
        site_ids = self.sites["site_id"].to_numpy(dtype=object)
        levels = self.sites["level"].to_numpy(dtype=object)
        status = self.sites["status"].to_numpy(dtype=object)
        seen: dict[tuple[str, str], str] = {}
        for key, pairs in (("locks", self.s.locks), ("forbids", self.s.forbids)):
            for k, lk in enumerate(pairs, start=1):
                where = f"[[{key}]] entry {k} ({lk.level}, {lk.unit}, {lk.site})"
                if lk.level not in self.s.levels:
                    self.r.error(file, where, f"level {lk.level!r} is not one of the project's "
                                 f"levels ({', '.join(self.s.levels)})", "correct the level")
                    continue
                if positions(self.unit_ids, [lk.unit])[0] < 0:
                    self.r.error(file, where, f"unit {lk.unit!r} is not in the units layer",
                                 _id_fix("unit", lk.unit, self.unit_ids), [lk.unit])
                j = positions(site_ids, [lk.site])[0]
                if j < 0:
                    self.r.error(file, where, f"site {lk.site!r} is not in the sites layer",
                                 _id_fix("site", lk.site, site_ids), [lk.site])
                    continue
                if levels[j] != lk.level:
                    self.r.error(file, where, f"site {lk.site} is {_a(levels[j])} site, not "
                                 f"{lk.level}", f"name {_a(lk.level)} site", [lk.site])
                    continue
                if key == "locks":
                    before = seen.get((lk.level, lk.unit))
                    if before is not None and before != lk.site:
                        self.r.error(file, where, f"unit {lk.unit} is locked to both {before} "
                                     f"and {lk.site} for {lk.level}", "keep one lock",
                                     [lk.unit])
                    seen[(lk.level, lk.unit)] = lk.site
                    if status[j] in ("closing", "closed"):
                        self.r.warning(file, where, f"the unit is locked to site {lk.site}, "
                                       f"which is {status[j]}", "lock it to a site that stays "
                                       "open, or change the site's status", [lk.unit])
                elif seen.get((lk.level, lk.unit)) == lk.site:
                    self.r.error(file, where, f"unit {lk.unit} is both locked to and forbidden "
                                 f"from site {lk.site}", "remove the lock or the forbid",
                                 [lk.unit])

    def read_travel(self) -> None:
        path = self.s.solve.travel_matrix
        if path is None:
            return
        table = self.table(path, "travel matrix")
        if table is None or self.sites is None or self.unit_ids is None:
            return
        cols = {c: find_column(table.columns, c) for c in ("unit_id", "site_id", "cost")}
        if None in cols.values():
            self.r.error(path, "", "the travel matrix needs columns unit_id, site_id and cost "
                         f"(columns: {columns_text(table.columns)})",
                         "name the header row unit_id,site_id,cost")
            return
        line = np.arange(len(table)) + 2
        i = positions(self.unit_ids, text_values(table[cols["unit_id"]])[0])
        j = positions(self.sites["site_id"], text_values(table[cols["site_id"]])[0])
        cost, missing, bad = number_values(table[cols["cost"]])
        wrong = missing | bad | (np.nan_to_num(cost) < 0)
        for mask, what, fix in (
            (i < 0, "unit_id is not a planning unit", "correct the unit id"),
            (j < 0, "site_id is not a site (of the project's levels)", "correct the site id"),
            (wrong, "cost is missing, not a number or negative", "enter a cost of 0 or more"),
        ):
            if mask.any():
                rows = [f"row {k}" for k in line[mask]]
                self.r.error(path, ids_text(rows), what, fix, rows)
        ok = (i >= 0) & (j >= 0) & ~wrong
        pair = pd.Series(i[ok] * len(self.sites) + j[ok])
        dup = pair.duplicated(keep=False).to_numpy()
        if dup.any():
            rows = [f"row {k}" for k in line[ok][dup]]
            self.r.error(path, ids_text(rows), "the same unit and site appear on several rows",
                         "keep one row per unit and site", rows)
        travel = np.full((len(self.unit_ids), len(self.sites)), np.inf)
        travel[i[ok], j[ok]] = cost[ok]
        for level in self.s.levels:
            cols_l = np.flatnonzero((self.sites["level"] == level).to_numpy())
            if not len(cols_l):
                continue
            none = ~np.isfinite(travel[:, cols_l]).any(axis=1)
            if none.any():
                self.r.error(path, where_units(self.labels[none]),
                             f"the travel matrix gives the unit no cost to any {level} site, "
                             "so it cannot be assigned", "add rows for the unit (pairs absent "
                             "from the matrix are not allowed)", self.labels[none])
        self.travel = travel

    def check_capacity(self) -> None:
        """Students of each level and year against the room its sites can offer."""
        if self.sites is None or not self.counts:
            return
        s = self.s
        file = s.sources["sites"].path
        band_ok = s.solve.min_utilization <= s.solve.max_utilization
        for level in s.levels:
            lv = self.sites[self.sites["level"] == level]
            status = lv["status"].to_numpy(dtype=object)
            forced = np.isin(status, ["open", "new"])
            candidate = status == "candidate"
            p = s.solve.open_count.get(level)
            cap = lv["capacity"].to_numpy(float)
            hi = np.where(lv["max_util"].isna(), s.solve.max_utilization, lv["max_util"])
            lo = np.where(lv["min_util"].isna(), s.solve.min_utilization, lv["min_util"])
            if p is not None:
                if not candidate.any():
                    self.r.warning(s.path, "[solve] open_count", f"{level} has no candidate "
                                   "sites; open_count is ignored", "mark the sites the solver "
                                   "may open as candidate, or remove open_count")
                    p = None
                elif not forced.sum() <= p <= forced.sum() + candidate.sum():
                    self.r.error(s.path, "[solve] open_count",
                                 f"open_count for {level} is {p}, but {int(forced.sum())} sites "
                                 f"are open or new and {int(candidate.sum())} are candidates",
                                 f"choose a number from {int(forced.sum())} to "
                                 f"{int(forced.sum() + candidate.sum())}")
                    continue
            if (level, None) in self.doubtful:
                continue
            room = usable_capacity(cap, hi, forced, candidate, p)
            floor = float((cap * lo)[forced].sum())
            students = self.counts[level].sum(axis=1)
            names = ids_text(lv["site_id"].tolist()) or "none"
            for t, year in enumerate(s.all_years):
                if t == 0 or (level, year) in self.doubtful:
                    continue  # today's figures are facts, not a plan's constraint
                if students[t] > room + 1e-9:
                    self.r.error(file, f"{level} {year}",
                                 f"{students[t]:,.0f} {level} students in {year} but the "
                                 f"{level} sites that can take students hold only {room:,.0f} "
                                 f"(capacity x max utilization; sites: {names})",
                                 "add capacity, open a site, or raise max_utilization")
                elif band_ok and students[t] < floor - 1e-9:
                    self.r.error(file, f"{level} {year}",
                                 f"{students[t]:,.0f} {level} students in {year} cannot fill "
                                 f"every open {level} site to its minimum utilization "
                                 f"({floor:,.0f} needed)",
                                 "lower min_utilization, or let a site close")

    # -- all of it
    def run(self) -> Inputs | None:
        self.read_units()
        self.read_counts()
        self.read_sites()
        self.read_zones()
        self.read_lines()
        self.read_links()
        self.build_adjacency()
        self.check_locks()
        self.read_travel()
        self.check_capacity()
        if self.r.has_errors:
            return None
        empty = gpd.GeoSeries([], crs=self.crs)
        return Inputs(
            settings=self.s, units=self.units, counts=self.counts, sites=self.sites,
            current=self.current,
            barriers=self.barriers if len(self.barriers) else empty,
            bridges=self.bridges if len(self.bridges) else empty,
            adjacency=self.adjacency, report=self.r, travel=self.travel,
        )
