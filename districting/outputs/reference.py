"""Reference layers of a map: barriers by kind and streets, read from the project.

``Inputs`` keep the barriers' geometry only; :func:`barrier_kinds` reads the barrier
layer's ``kind`` column (river, highway, rail...) back from the file the project names.
:func:`streets` is the project's street lines when it has them (``inputs.street_lines``).
"""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pyogrio

from .symbols import BARRIER_SYMBOLS

__all__ = ["barrier_kinds", "streets"]


def barrier_kinds(inputs) -> np.ndarray:
    """One kind per barrier line of ``inputs.barriers``: a key of
    :data:`~districting.outputs.symbols.BARRIER_SYMBOLS` ("barrier" when the layer has no
    ``kind`` column, an unknown kind, or rows that do not line up with the barriers)."""
    n = len(inputs.barriers)
    kinds = np.full(n, "barrier", dtype=object)
    source = getattr(inputs.settings, "sources", {}).get("barriers")
    if source is None or not n:
        return kinds
    try:
        table = pyogrio.read_dataframe(source.path, layer=source.layer, read_geometry=False)
    except (OSError, ValueError, pyogrio.errors.DataSourceError, pyogrio.errors.DataLayerError):
        return kinds  # the kinds only style the lines; the barriers themselves were read
    if "kind" not in table.columns or len(table) != n:
        return kinds
    read = table["kind"].fillna("").astype(str).str.strip().str.lower().to_numpy()
    return np.where(np.isin(read, list(BARRIER_SYMBOLS)), read, "barrier").astype(object)


def streets(inputs):
    """The project's street lines (a GeoSeries) or None."""
    lines = inputs.street_lines
    if lines is None or not len(lines):
        return None
    return gpd.GeoSeries(lines, crs=inputs.crs)
