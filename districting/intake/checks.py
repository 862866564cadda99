"""Checks on whole arrays (shapely 2 / numpy), each adding items to a :class:`Report`.

Overlaps come from one STRtree query over all units and one vectorised intersection over
the candidate pairs; sites are placed in units by one tree query.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import pandas as pd
import shapely

from .cells import cell_text, number_values
from .report import Report, ids_text, plural, where_units

__all__ = ["check_ids", "degree_like", "check_polygons", "check_overlaps", "units_of_points",
           "check_counts", "check_graph", "is_coverage", "OVERLAP_SHARE"]

#: Two units overlap when their intersection exceeds this share of the smaller unit's area
#: (a choice of ours: digitising slivers along shared borders stay far below 1 %).
OVERLAP_SHARE = 0.01
_TYPE_NAMES = ("Point", "LineString", "LinearRing", "Polygon", "MultiPoint", "MultiLineString",
               "MultiPolygon", "GeometryCollection")


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
        report.error(file, ids_text(rows), f"{plural(len(rows), word)} with no id in "
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
                       f"{plural(int(invalid.sum()), 'invalid geometry')} repaired with "
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
                         f"this piece of the adjacency graph ({plural(len(members), 'unit')}) "
                         f"holds no {level} site that can take students, so its units cannot "
                         f"join any {level} zone (zones are contiguous; {level} sites: "
                         f"{ids_text(site_labels.get(level, [])) or 'none'})",
                         "connect the piece with a bridge or an 'add' link, or place an open "
                         "or candidate site in it", members)


def is_coverage(geoms) -> bool:
    """True when the polygons form a valid coverage: no overlaps, and neighbours share
    their borders vertex for vertex (GEOS CoverageValidator, shapely.coverage_is_valid)."""
    geoms = np.asarray(geoms, dtype=object)
    return bool(len(geoms)) and bool(shapely.coverage_is_valid(geoms))
