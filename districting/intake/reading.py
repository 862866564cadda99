"""The record one reading of a project fills in, and the reads every step shares.

:func:`districting.intake.validate_project` reads the units, counts, sites, today's zones,
barriers, bridges, manual links and travel matrix in that order (one function each, over
a :class:`Reading`); every step goes as far as the data allow, so one pass reports every
problem: a later step that needs an earlier one's result (sites need the units' polygons)
skips only the checks it cannot make.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd

from .cells import columns_text, find_column
from .checks import (
    degree_like,
)
from .layers import ReadError, read_layer, read_table
from .records import Settings
from .report import Report

__all__ = ["Reading", "positions", "source_layer", "source_table", "source_columns",
           "to_project_crs", "in_degrees", "a_word", "crs_name", "csv_columns"]


def positions(keys: Sequence, wanted) -> np.ndarray:
    """Index in ``keys`` (first occurrence) of each of ``wanted``; -1 where absent."""
    keys = pd.Index(pd.Series(list(keys), dtype=object))
    wanted = np.asarray(wanted, dtype=object)
    if not len(keys):
        return np.full(len(wanted), -1, dtype=np.int64)
    first = np.flatnonzero(~keys.duplicated())
    pos = keys[first].get_indexer(pd.Series(wanted, dtype=object))
    return np.where(pos >= 0, first[np.maximum(pos, 0)], -1).astype(np.int64)


def a_word(word: str) -> str:
    return f"{'an' if word[:1].lower() in 'aeiou' else 'a'} {word}"


def crs_name(crs) -> str:
    return f"{crs.to_string()} ({crs.name})"


@dataclass(eq=False)
class Reading:
    """What the steps of one reading have found so far (filled in step by step)."""

    settings: Settings
    report: Report
    layers: dict[tuple, gpd.GeoDataFrame | None] = field(default_factory=dict)
    failed: set[Path] = field(default_factory=set)  # sources that cannot be read
    crs: object = None  # the project's CRS (the units', or its UTM zone)
    source_crs: object = None  # the units layer's own CRS
    unit_frame: gpd.GeoDataFrame | None = None  # attributes, rows = units
    units: gpd.GeoDataFrame | None = None  # unit_id, geometry, point
    unit_ids: np.ndarray | None = None
    labels: np.ndarray = field(default_factory=lambda: np.zeros(0, dtype=object))  # unit id,
    # or "feature k" without one
    units_ok: bool = False  # ids unique and every polygon usable
    counts: dict[str, np.ndarray] = field(default_factory=dict)
    groups: dict[str, np.ndarray] = field(default_factory=dict)  # level -> (G, years, n)
    sites: gpd.GeoDataFrame | None = None
    current: dict[str, np.ndarray] = field(default_factory=dict)
    barriers: gpd.GeoSeries = field(default_factory=lambda: gpd.GeoSeries([], crs=None))
    bridges: gpd.GeoSeries = field(default_factory=lambda: gpd.GeoSeries([], crs=None))
    links: pd.DataFrame | None = None
    adjacency: object = None
    travel: np.ndarray | None = None
    streets: object = None  # districting.travel.StreetNetwork, with a [streets] table
    street_lines: object = None  # the street lines read (array of shapely geometries)
    street_travel: object = None  # districting.travel.StreetTravel, units x sites
    cache: bool = True  # keep travel in the project's disk cache (check writes nothing)
    #: (level, year) or (level, None): figures with an error already reported; the
    #: capacity balance skips them rather than report a consequence as a new problem
    doubtful: set[tuple[str, int | None]] = field(default_factory=set)


def source_layer(st: Reading, key: str) -> gpd.GeoDataFrame | None:
    src = st.settings.sources[key]
    cache = (src.path, src.layer)
    if cache in st.layers:
        return st.layers[cache]
    frame = None
    if src.path not in st.failed:
        try:
            frame = read_layer(src.path, src.layer, what=key)
        except ReadError as err:
            where = f"layer {src.layer}" if src.layer and err.kind == "layer" else ""
            st.report.error(err.path, where, f"[{key}] source: {err.problem}", err.fix,
                            err.layers)
            if err.kind in ("missing", "unreadable"):
                st.failed.add(src.path)
    st.layers[cache] = frame
    return frame


def source_table(st: Reading, path: Path, what: str) -> pd.DataFrame | None:
    if path in st.failed:
        return None
    try:
        return read_table(path, what)
    except ReadError as err:
        st.report.error(err.path, "", err.problem, err.fix)
        st.failed.add(path)
        return None


def source_columns(st: Reading, key: str, frame, roles: Sequence[str], file: Path,
            optional: Sequence[str] = ()) -> dict[str, str] | None:
    """Actual column names for ``roles`` of [key]; one error listing every missing one."""
    src = st.settings.sources[key]
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
        st.report.error(file, f"[{key}] columns", f"column{'s' if len(missing) > 1 else ''} "
                        f"{', '.join(missing)} not found (columns: {columns_text(frame.columns)})",
                        f"rename the column in the data, or set the [{key}] key to one of the "
                        "columns listed")
        return None
    return found


def to_project_crs(st: Reading, frame: gpd.GeoDataFrame, key: str, file: Path):
    """``frame`` in the project's CRS; reports a layer with no CRS, warns on another CRS.

    A layer in the units' own CRS is reprojected with them without a word; one in
    another CRS is reprojected too (coordinates are exact either way), with a warning
    naming both, since a mismatch is often a layer exported from the wrong project.
    """
    if frame.crs is None:
        st.report.error(file, f"[{key}]", f"the {key} layer has no coordinate reference "
                        "system (CRS)", "assign the layer's CRS in a GIS (e.g. 'Assign "
                        "projection') and export it again")
        return frame
    if st.crs is None or frame.crs == st.crs:
        return frame
    if st.source_crs is not None and frame.crs != st.source_crs:
        st.report.warning(file, f"[{key}]", f"the {key} layer is in {crs_name(frame.crs)} "
                          f"but the units are in {crs_name(st.source_crs)}; the {key} are "
                          "reprojected to the units' CRS",
                          "nothing to do if both CRSs are right; export the layer in the "
                          "units' CRS to silence this")
    return frame.to_crs(st.crs)


def in_degrees(st: Reading, frame, key: str, file) -> bool:
    """A layer's coordinates in degrees under the label of a projected CRS (reported).

    Only judged when the units are sound (their own degrees are reported with them).
    True when so: the layer is then not used, since every site would lie "outside"
    and no barrier would cut anything (consequences, not second problems).
    """
    crs, units = frame.crs, st.unit_frame
    if (crs is None or crs.is_geographic or units is None or not len(units)
            or st.source_crs is None or degree_like(units.total_bounds)):
        return False
    geoms = frame.geometry[~(frame.geometry.isna() | frame.geometry.is_empty)]
    if not (len(geoms) and degree_like(geoms.total_bounds)):
        return False
    x0, y0, x1, y1 = geoms.total_bounds
    st.report.error(file, f"[{key}]", f"the {key} coordinates (x {x0:.4f} to {x1:.4f}, y "
                    f"{y0:.4f} to {y1:.4f}) look like longitude/latitude degrees, but the "
                    f"layer says its CRS is {crs_name(crs)}, and the units' coordinates "
                    "are not degrees",
                    f"assign EPSG:4326 (WGS 84) to the {key} layer with 'Assign projection' "
                    "or 'Set CRS' in a GIS, not 'Reproject', and export again")
    return True


def csv_columns(st: Reading, path: Path, table: pd.DataFrame, names: tuple[str, ...],
                what: str) -> dict[str, str] | None:
    """The columns ``names`` of a CSV (found ignoring case); None after one error naming all."""
    cols = {c: find_column(table.columns, c) for c in names}
    if None in cols.values():
        st.report.error(path, "", f"{what} needs columns {', '.join(names[:-1])} and "
                        f"{names[-1]} (columns: {columns_text(table.columns)})",
                        f"name the header row {','.join(names)}")
        return None
    return cols
