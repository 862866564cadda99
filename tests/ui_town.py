"""A small invented grid town for the workbench tests (no real place or data).

Square planning units (200 m) on an ``nx`` x ``ny`` grid, four middle schools with invented
names, seeded student counts for today and three projected years, today's zones as
vertical bands (so today's plan is far from the shortest trips), rook adjacency. The
engine solves it for real in well under a second. ``new_store`` and ``boundary_pair`` are
the workbench tests' shared helpers.
"""

from __future__ import annotations

from pathlib import Path

import geopandas as gpd
import numpy as np
import shapely

from districting.intake import Inputs, Settings, SolveSettings
from districting.intake.adjacency import Adjacency

CRS = "EPSG:32633"  # any projected CRS in metres
CELL = 200.0
YEARS = (2027, 2028, 2029)
NAMES = ("Brackenlow Middle", "Tumbleford Middle", "Ashgrove Rise Middle", "Wrenmoor Middle")


def grid_inputs(folder: Path, nx: int = 14, ny: int = 10, seed: int = 11) -> Inputs:
    rng = np.random.default_rng(seed)
    col, row = np.meshgrid(np.arange(nx), np.arange(ny))
    col, row = col.ravel(), row.ravel()
    x0, y0 = 400_000.0 + col * CELL, 5_000_000.0 + row * CELL
    geoms = shapely.box(x0, y0, x0 + CELL, y0 + CELL)
    n = nx * ny
    ids = [f"G{k:03d}" for k in range(n)]
    units = gpd.GeoDataFrame({"unit_id": ids, "point": shapely.centroid(geoms)},
                             geometry=geoms, crs=CRS)
    idx = np.arange(n).reshape(ny, nx)
    edges = np.vstack([np.column_stack([idx[:, :-1].ravel(), idx[:, 1:].ravel()]),
                       np.column_stack([idx[:-1].ravel(), idx[1:].ravel()])])
    roots = np.array([idx[2, 2], idx[2, nx - 3], idx[ny - 3, 2], idx[ny - 3, nx - 3]])
    base = rng.integers(5, 30, n).astype(float)
    base[rng.random(n) < 0.1] = 0.0  # parks: no students
    growth = np.array([1.0, 1.02, 1.05, 1.08])
    counts = np.round(base[None, :] * growth[:, None])
    cap = np.round(counts.max(axis=0).sum() / 4 * np.array([1.25, 1.2, 1.3, 1.15]), -1)
    sites = gpd.GeoDataFrame({
        "site_id": [f"M{j + 1}" for j in range(4)], "name": list(NAMES), "level": "middle",
        "capacity": cap, "status": "open", "min_util": np.nan, "max_util": np.nan,
        "unit_index": roots.astype(np.int64)}, geometry=shapely.centroid(geoms[roots]),
        crs=CRS)
    current = np.minimum(col * 4 // nx, 3).astype(np.int64)  # four vertical bands
    settings = Settings(
        path=Path(folder) / "project.toml", name="Grid town (invented)", current_year=2026,
        years=YEARS, plan_year=YEARS[0], levels=("middle",), store=Path(folder) / "store.gpkg",
        solve=SolveSettings(max_utilization=1.0, min_utilization=0.5, time_limit=30.0))
    return Inputs(settings=settings, units=units, counts={"middle": counts}, sites=sites,
                  current={"middle": current}, barriers=gpd.GeoSeries([], crs=CRS),
                  bridges=gpd.GeoSeries([], crs=CRS),
                  adjacency=Adjacency.from_edges(ids, edges), report=None)


# ---------------------------------------------------------------------- workbench helpers
LEVEL = "middle"


def new_store(inputs):
    """A workbench store on the grid town, at its level, with a 30 s time limit."""
    from ui.store import Store

    st = Store(inputs)
    st.set_level(LEVEL)
    st.update_settings(time_limit=30)
    return st


def boundary_pair(out, inputs) -> tuple[str, str]:
    """A unit on a zone border and the school of a neighbouring zone (a lock that can hold)."""
    a = out.assignment
    e = inputs.adjacency.edges
    students = out.problem.demand[0]
    k = np.flatnonzero((a[e[:, 0]] != a[e[:, 1]]) & (students[e[:, 0]] > 0))
    assert len(k), "the plan has no zone border"
    i, j = e[k[0]]
    return out.unit_ids[i], out.site_ids[a[j]]
