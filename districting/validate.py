"""The checks a project passes before any solve, and the :class:`Report` that lists them.

Every check adds :class:`Item` s to a :class:`Report` (severity, file, where, what, fix)
instead of raising, so one run lists every problem at once; :mod:`districting.project`
reads the sources and calls these checks, and :func:`districting.project.load_project`
raises :class:`ProjectError` (carrying the report) when any item is an error. Warnings
(a repaired geometry, a reprojection, an island) do not stop a run.

The checks work on whole arrays (shapely 2 / numpy): overlaps come from one STRtree query
over all units and one vectorised intersection over the candidate pairs; sites are placed
in units by one tree query.
"""

from __future__ import annotations

import io as _io
import unicodedata
from collections.abc import Iterable, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np
import pandas as pd
import shapely

if TYPE_CHECKING:  # the project module imports this one; type names only
    from .project import Inputs

__all__ = [
    "Item", "Report", "ProjectError", "check_summary", "check_command", "validate_project",
    "OVERLAP_SHARE", "ERROR", "WARNING",
]

ERROR = "error"
WARNING = "warning"
#: Two units overlap when their intersection exceeds this share of the smaller unit's area
#: (a choice of ours: digitising slivers along shared borders stay far below 1 %).
OVERLAP_SHARE = 0.01
_TYPE_NAMES = ("Point", "LineString", "LinearRing", "Polygon", "MultiPoint", "MultiLineString",
               "MultiPolygon", "GeometryCollection")
_LIST_LIMIT = 8  # ids printed per item; the item keeps them all in ``ids``


# ----------------------------------------------------------------------------- the report
@dataclass(frozen=True)
class Item:
    """One problem: how bad, which file, where in it, what is wrong, how to fix it.

    ``where`` is words ("unit U0412", "row 7", "column elementary_2027", "[solve]
    gap"); ``ids`` holds every unit, site or row id the item is about (``where`` prints
    the first few).
    """

    severity: str  # ERROR or WARNING
    file: Path | None
    where: str
    what: str
    fix: str
    ids: tuple[str, ...] = ()

    @property
    def is_error(self) -> bool:
        return self.severity == ERROR

    def text(self) -> str:
        head = f"{self.where}: {self.what}" if self.where else self.what
        return f"{head}\n      fix: {self.fix}" if self.fix else head


class Report:
    """Every problem found in a project, in the order found; :meth:`format` groups them."""

    def __init__(self, project: str | Path | None = None):
        self.project = None if project is None else Path(project)
        self._base = None if project is None else Path(project).resolve().parent
        self.items: list[Item] = []

    def add(self, severity: str, file, where: str, what: str, fix: str = "",
            ids: Iterable = ()) -> Item:
        if severity not in (ERROR, WARNING):
            raise ValueError(f"severity must be {ERROR!r} or {WARNING!r}, not {severity!r}")
        item = Item(severity, None if file is None else Path(file), where, what, fix,
                    tuple(str(i) for i in ids))
        self.items.append(item)
        return item

    def error(self, file, where: str, what: str, fix: str = "", ids: Iterable = ()) -> Item:
        return self.add(ERROR, file, where, what, fix, ids)

    def warning(self, file, where: str, what: str, fix: str = "", ids: Iterable = ()) -> Item:
        return self.add(WARNING, file, where, what, fix, ids)

    @property
    def errors(self) -> list[Item]:
        return [it for it in self.items if it.is_error]

    @property
    def warnings(self) -> list[Item]:
        return [it for it in self.items if not it.is_error]

    @property
    def has_errors(self) -> bool:
        return any(it.is_error for it in self.items)

    def __len__(self) -> int:
        return len(self.items)

    def __iter__(self):
        return iter(self.items)

    def _file_label(self, file: Path | None) -> str:
        if file is None:
            return "(project)"
        if self._base is not None:
            try:
                return str(file.resolve().relative_to(self._base))
            except ValueError:
                pass
        return str(file)

    def format(self) -> str:
        """The report as text: errors first, then warnings, grouped by file."""
        name = "project" if self.project is None else str(self.project)
        n_err, n_warn = len(self.errors), len(self.warnings)
        if not self.items:
            return f"{name}: no problems found."
        lines = [f"{name}: {_plural(n_err, 'error')}, {_plural(n_warn, 'warning')}"]
        for title, items in (("ERRORS (the run stops)", self.errors),
                             ("WARNINGS (the run goes on)", self.warnings)):
            if not items:
                continue
            lines += ["", title]
            files: dict[str, list[Item]] = {}
            for it in items:
                files.setdefault(self._file_label(it.file), []).append(it)
            for label, group in files.items():
                lines.append(f"  {label}")
                lines += [f"    - {it.text()}" for it in group]
        return "\n".join(lines)


class ProjectError(ValueError):
    """A project with errors; ``report`` lists every one of them (and the warnings)."""

    def __init__(self, report: Report):
        self.report = report
        super().__init__(report.format())


def _plural(k: int, word: str) -> str:
    return f"{k} {word}" + ("" if k == 1 else "s")


def ids_text(ids: Sequence, limit: int = _LIST_LIMIT) -> str:
    """'U1, U2, U3' or 'U1, U2, ... and 40 more'."""
    ids = [str(i) for i in ids]
    if len(ids) <= limit:
        return ", ".join(ids)
    return f"{', '.join(ids[:limit])} and {len(ids) - limit} more"


def where_units(labels: Sequence, word: str = "unit") -> str:
    return f"{word}{'s' if len(labels) > 1 else ''} {ids_text(labels)}"


# ----------------------------------------------------------------------------- cell values
def text_values(values) -> tuple[np.ndarray, np.ndarray]:
    """Ids as text, and where they are missing.

    Whole numbers stored as floats (Shapefile, spreadsheets) lose their ``.0``; strings are
    stripped and put in Unicode normal form NFC (an accent stored as a separate combining
    mark reads as the one composed character it looks like, so ids match whichever way a
    file or keyboard spelled them); None, NaN and "" count as missing.
    """
    s = pd.Series(values, dtype=object).reset_index(drop=True)
    missing = s.isna().to_numpy(dtype=bool)
    num = pd.to_numeric(s.where(~missing), errors="coerce")
    is_num = s.map(lambda v: isinstance(v, int | float | np.number)
                   and not isinstance(v, bool)).to_numpy(dtype=bool)
    whole = is_num & np.isfinite(num.to_numpy(dtype=float)) & (num.to_numpy() % 1 == 0)
    out = np.array([unicodedata.normalize("NFC", str(v).strip()) for v in s], dtype=object)
    out[whole] = num[whole].astype(np.int64).astype(str).to_numpy()
    missing = missing | (out == "")
    out[missing] = ""
    return out, missing


def number_values(values) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Numbers (float), where missing, where not a number (text that does not parse, inf)."""
    s = pd.Series(values, dtype=object).reset_index(drop=True)
    text = s.map(lambda v: v.strip() if isinstance(v, str) else v)
    missing = (text.isna() | text.eq("")).to_numpy(dtype=bool)
    num = pd.to_numeric(text.where(~missing), errors="coerce").to_numpy(dtype=float)
    bad = ~missing & ~np.isfinite(num)
    return np.where(missing | bad, np.nan, num), missing, bad


def cell_text(values, mask: np.ndarray) -> str:
    """The first few offending cell values, quoted."""
    vals = pd.Series(values, dtype=object).reset_index(drop=True)[mask]
    shown = [f"{v:g}" if isinstance(v, int | float) and not isinstance(v, bool) else repr(str(v))
             for v in vals]
    return ids_text(list(dict.fromkeys(shown)), limit=4)


def find_column(columns: Iterable[str], name: str) -> str | None:
    """``name`` among ``columns``: exact, else the one column equal to it ignoring case."""
    cols = [str(c) for c in columns]
    if name in cols:
        return name
    folded = [c for c in cols if c.casefold() == name.casefold()]
    return folded[0] if len(folded) == 1 else None


def columns_text(columns: Iterable[str]) -> str:
    cols = [str(c) for c in columns if str(c) != "geometry"]
    return ", ".join(cols) if cols else "none"


# ----------------------------------------------------------------------------- checks
def check_ids(report: Report, file, ids: np.ndarray, missing: np.ndarray, word: str,
              column: str, row_word: str = "feature", raw=None) -> bool:
    """Missing and duplicate ids (one item each); True when every id is present and unique.

    ``ids`` come from :func:`text_values` (NFC); ``raw`` are the cells as stored. Ids that
    differ only in Unicode composition look the same on every screen and page, so they are
    duplicates (an error that says why); ids that differ only in upper/lower case are kept
    apart but warned about, since spreadsheets and many GIS joins treat them as one.
    """
    ok = True
    if missing.any():
        rows = [f"{row_word} {k + 1}" for k in np.flatnonzero(missing)]
        report.error(file, ids_text(rows), f"{_plural(len(rows), word)} with no id in "
                     f"column {column}", f"give every {word} a unique id in {column}", rows)
        ok = False
    present = pd.Series(ids[~missing])
    dup = present[present.duplicated(keep=False)].unique()
    if len(dup):
        spelled = ""
        if raw is not None:
            stored = pd.Series([str(v).strip() for v in raw], dtype=object)[~missing]
            if stored[present.isin(dup).to_numpy()].nunique() > len(dup):
                spelled = (" (some are written once with composed and once with decomposed "
                           "accents: they look the same and are read as the same id)")
        report.error(file, where_units(list(dup), word),
                     f"the id{'s' if len(dup) > 1 else ''} in column {column} "
                     f"appear{'' if len(dup) > 1 else 's'} more than once{spelled}",
                     f"give every {word} its own id (split or merge the duplicate rows)", dup)
        ok = False
    unique = present.drop_duplicates()
    folded = unique.str.casefold()
    alike = unique[folded.duplicated(keep=False).to_numpy()]
    if len(alike):
        groups = alike.groupby(folded[alike.index]).agg(lambda g: "/".join(sorted(g)))
        report.warning(file, where_units(list(groups), word),
                       f"ids in column {column} differ only in upper/lower case; they are kept "
                       "apart here, but spreadsheets and many GIS joins treat them as one id",
                       f"give each {word} an id that differs in more than case", list(alike))
    return ok


def degree_like(bounds) -> bool:
    """Coordinates that fit longitude/latitude degrees (x within ±180, y within ±90)."""
    x0, y0, x1, y1 = (float(b) for b in bounds)
    return bool(np.isfinite([x0, y0, x1, y1]).all() and -180 <= x0 <= x1 <= 180
                and -90 <= y0 <= y1 <= 90)


def check_polygons(report: Report, file, geoms: np.ndarray, labels: Sequence[str]
                   ) -> tuple[np.ndarray, bool]:
    """Empty, non-polygon and invalid unit geometries; invalid ones are repaired.

    Repair is ``shapely.make_valid(method="structure", keep_collapsed=False)`` (GEOS 3.10+):
    polygonal input stays polygonal, a self-intersecting ring keeps its enclosed area, and
    parts that collapse to lines are dropped.
    Returns the (repaired) geometries and whether every unit has a usable polygon.
    """
    labels = np.asarray(labels, dtype=object)
    geoms = np.asarray(geoms, dtype=object)
    empty = shapely.is_missing(geoms) | shapely.is_empty(geoms)
    ok = True
    if empty.any():
        report.error(file, where_units(labels[empty]), "empty or missing geometry",
                     "draw the unit's polygon, or delete the row", labels[empty])
        ok = False
    kind = shapely.get_type_id(geoms)
    wrong = ~empty & ~np.isin(kind, [3, 6])
    if wrong.any():
        names = [_TYPE_NAMES[k] for k in np.unique(kind[wrong]) if 0 <= k < len(_TYPE_NAMES)]
        report.error(file, where_units(labels[wrong]),
                     f"planning units must be polygons; found {', '.join(names)}",
                     "use the polygon layer of the planning units", labels[wrong])
        ok = False
    invalid = ~empty & ~wrong & ~shapely.is_valid(geoms)
    if invalid.any():
        reasons = shapely.is_valid_reason(geoms[invalid])
        fixed = shapely.make_valid(geoms[invalid], method="structure", keep_collapsed=False)
        geoms = geoms.copy()
        geoms[invalid] = fixed
        report.warning(file, where_units(labels[invalid]),
                       f"{_plural(int(invalid.sum()), 'invalid geometry')} repaired with "
                       f"shapely.make_valid (first: {reasons[0]})",
                       "check the repaired units in a GIS; fix the source to silence this",
                       labels[invalid])
        lost = shapely.is_empty(fixed)
        if lost.any():
            bad = labels[invalid][lost]
            report.error(file, where_units(bad), "the geometry has no area left after repair",
                         "redraw the unit's polygon", bad)
            ok = False
    return geoms, ok


def check_overlaps(report: Report, file, geoms: np.ndarray, labels: Sequence[str],
                   share: float = OVERLAP_SHARE) -> np.ndarray:
    """Pairs of units whose intersection exceeds ``share`` of the smaller unit's area.

    One STRtree query over the whole array gives the intersecting pairs; one vectorised
    intersection measures them. Returns the offending pairs (k, 2) of unit indices.
    """
    labels = np.asarray(labels, dtype=object)
    geoms = np.asarray(geoms, dtype=object)
    a, b = shapely.STRtree(geoms).query(geoms, predicate="intersects")
    keep = a < b
    a, b = a[keep], b[keep]
    area = shapely.area(geoms)
    inter = shapely.area(shapely.intersection(geoms[a], geoms[b]))
    smaller = np.minimum(area[a], area[b])
    ratio = np.divide(inter, smaller, out=np.zeros_like(inter), where=smaller > 0)
    bad = ratio > share
    pairs = np.column_stack([a[bad], b[bad]])
    if len(pairs):
        shown = [f"{labels[i]} & {labels[j]} ({100 * r:.0f}%)"
                 for i, j, r in zip(pairs[:, 0], pairs[:, 1], ratio[bad], strict=True)]
        report.error(file, f"unit pair{'s' if len(shown) > 1 else ''} {ids_text(shown)}",
                     f"units overlap (shared area above {100 * share:g}% of the smaller "
                     "unit; the figure is that share)",
                     "planning units must not overlap: clip one of each pair in a GIS, or "
                     "remove a duplicated unit",
                     [f"{labels[i]}/{labels[j]}" for i, j in pairs])
    return pairs


def units_of_points(unit_geoms: np.ndarray, points: np.ndarray) -> np.ndarray:
    """Index of the unit holding each point (lowest index on a shared border), -1 if none."""
    inp, tree = shapely.STRtree(np.asarray(unit_geoms, dtype=object)).query(
        np.asarray(points, dtype=object), predicate="intersects")
    out = np.full(len(points), np.iinfo(np.int64).max, dtype=np.int64)
    np.minimum.at(out, inp, tree)
    out[out == np.iinfo(np.int64).max] = -1
    return out


def check_counts(report: Report, file, values, labels: np.ndarray, column: str) -> np.ndarray:
    """Missing, non-numeric and negative student counts of one column; returns floats."""
    num, missing, bad = number_values(values)
    if missing.any():
        report.error(file, f"column {column}, {where_units(labels[missing])}",
                     "student count is missing",
                     f"enter a count (0 when there are no students) in {column}",
                     labels[missing])
    if bad.any():
        report.error(file, f"column {column}, {where_units(labels[bad])}",
                     f"student count is not a number ({cell_text(values, bad)})",
                     f"enter a number in {column}", labels[bad])
    neg = np.nan_to_num(num) < 0
    if neg.any():
        report.error(file, f"column {column}, {where_units(labels[neg])}",
                     f"student count is negative ({ids_text([f'{v:g}' for v in num[neg]], 4)})",
                     f"counts are students, 0 or more: correct {column}", labels[neg])
    return np.where(np.isfinite(num) & (num >= 0), num, 0.0)


def usable_capacity(capacity: np.ndarray, max_util: np.ndarray, forced: np.ndarray,
                    candidate: np.ndarray, open_count: int | None) -> float:
    """The most students a level's sites can take in a year (capacity x max utilization).

    ``forced`` sites are open; of the ``candidate`` sites, all may open, or only the
    ``open_count - forced`` largest when the number of open sites is fixed.
    """
    room = np.asarray(capacity, float) * np.asarray(max_util, float)
    total = float(room[forced].sum())
    cand = np.sort(room[candidate])[::-1]
    if open_count is not None:
        cand = cand[: max(int(open_count) - int(forced.sum()), 0)]
    return total + float(cand.sum())


def check_graph(report: Report, file, adjacency, labels: np.ndarray,
                serving: dict[str, np.ndarray], site_labels: dict[str, np.ndarray]) -> None:
    """Islands and pieces of the adjacency graph; a piece with no site of a level is an error.

    ``serving[level]``: unit index of each site that can take students (open, new,
    candidate); zones are contiguous, so every piece of the graph needs one per level.
    """
    islands = adjacency.islands()
    fix_link = ("if the unit is reached by a road or ferry, add a row 'unit_a,unit_b,add' to "
                "the [adjacency] links CSV; otherwise check the barriers and bridges")
    if len(islands):
        report.warning(file, where_units(labels[islands]),
                       "unit has no neighbour in the adjacency graph (an island): it can only "
                       "form a zone on its own", fix_link, labels[islands])
    k = adjacency.n_components
    if k <= 1:
        return
    comp = adjacency.components()
    sizes = np.bincount(comp, minlength=k)
    order = np.argsort(-sizes, kind="stable")
    report.warning(file, "adjacency graph",
                   f"the units form {k} separate pieces (sizes "
                   f"{', '.join(str(int(s)) for s in sizes[order])}); no zone can cross "
                   "between pieces", fix_link)
    for level, units in serving.items():
        have = np.zeros(k, bool)
        have[comp[units[units >= 0]]] = True
        for c in order[~have[order]]:
            members = labels[comp == c]
            report.error(file, where_units(members),
                         f"this piece of the adjacency graph ({_plural(len(members), 'unit')}) "
                         f"holds no {level} site that can take students, so its units cannot "
                         f"join any {level} zone (zones are contiguous; {level} sites: "
                         f"{ids_text(site_labels.get(level, [])) or 'none'})",
                         "connect the piece with a bridge or an 'add' link, or place an open "
                         "or candidate site in it", members)


# ----------------------------------------------------------------------------- summary
def check_summary(inputs: Inputs) -> str:
    """One screen on a validated project: units, students, sites, capacity, graph."""
    s = inputs.settings
    units, sites, adj = inputs.units, inputs.sites, inputs.adjacency
    crs = inputs.crs
    crs_text = "no CRS" if crs is None else f"{crs.to_string()} ({crs.name})"
    area = float(units.geometry.area.sum()) / 1e6
    out = _io.StringIO()

    def w(line: str = "") -> None:
        out.write(line + "\n")

    w(f"{s.name}  ({s.path.name})")
    w(f"  CRS {crs_text}; plan year {s.plan_year}; years {', '.join(map(str, s.years))}")
    comps = adj.n_components
    sizes = np.bincount(adj.components()) if adj.n else np.zeros(0, int)
    piece = "1 piece" if comps == 1 else (f"{comps} pieces (sizes "
                                          f"{', '.join(map(str, sorted(sizes, reverse=True)))})")
    w(f"  {len(units)} planning units, {area:,.1f} km2; adjacency ({adj.contiguity}) "
      f"{adj.n_edges} pairs, {piece}, {len(adj.islands())} islands")
    years = s.all_years
    head = f"  {'':<14}" + "".join(f"{y:>9}" for y in years)
    w()
    w("Students (current year first)")
    w(head)
    for level in s.levels:
        w(f"  {level:<14}" + "".join(f"{v:>9,.0f}" for v in inputs.counts[level].sum(axis=1)))
    w()
    w("Sites (count by status; capacity by status)")
    for level in s.levels:
        lv = sites[sites["level"] == level]
        counts = lv["status"].value_counts()
        status = ", ".join(f"{int(counts[st])} {st}" for st in _statuses() if st in counts)
        cap = lv.groupby("status")["capacity"].sum()
        room = ", ".join(f"{st} {cap[st]:,.0f}" for st in _statuses() if st in cap)
        w(f"  {level:<14}{_plural(len(lv), 'site')} ({status or 'none'}); "
          f"capacity {room or '-'}")
    w()
    w("Capacity vs students (capacity x max utilization of sites that may take students)")
    w(head)
    for level in s.levels:
        room = _room_by_year(inputs, level)
        util = inputs.counts[level].sum(axis=1) / np.where(room > 0, room, np.nan)
        w(f"  {level:<14}" + "".join(f"{r:>9,.0f}" for r in room))
        w(f"  {'  utilization':<14}" + "".join(
            f"{'-':>9}" if not np.isfinite(u) else f"{100 * u:>8.0f}%" for u in util))
    return out.getvalue().rstrip("\n")


def _statuses() -> tuple[str, ...]:
    from .project import SITE_STATUSES

    return SITE_STATUSES


def _room_by_year(inputs: Inputs, level: str) -> np.ndarray:
    """Usable capacity per row of ``all_years``: today's sites now, the plan's afterwards."""
    s = inputs.settings
    lv = inputs.sites[inputs.sites["level"] == level]
    cap = lv["capacity"].to_numpy(float)
    max_u = lv["max_util"].to_numpy(float)
    max_u = np.where(np.isnan(max_u), s.solve.max_utilization, max_u)
    status = lv["status"].to_numpy(dtype=object)
    today = usable_capacity(cap, max_u, np.isin(status, ["open", "closing"]),
                            np.zeros(len(lv), bool), None)
    later = usable_capacity(cap, max_u, np.isin(status, ["open", "new"]),
                            status == "candidate", s.solve.open_count.get(level))
    return np.array([today] + [later] * len(s.years))


# ----------------------------------------------------------------------------- command
def check_command(path: str | Path) -> int:
    """`districting check PROJECT.toml`: print the report and summary; 0 clean, 1 errors.

    Reads only: nothing is written, not even a cache.
    """
    from .project import validate_project

    inputs, report = validate_project(path)
    print(report.format())
    if inputs is not None:
        print()
        print(check_summary(inputs))
    return 1 if report.has_errors else 0


def validate_project(path: str | Path) -> tuple[Inputs | None, Report]:
    """Read and check a project: (Inputs, report), Inputs None when there are errors.

    The work is :func:`districting.project.validate_project` (which reads the sources);
    offered here beside the checks.
    """
    from .project import validate_project as _validate

    return _validate(path)
