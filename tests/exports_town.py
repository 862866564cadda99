"""A small invented grid town for the option, export and packet tests.

Square planning units on a grid in a projected CRS (metres), a few elementary schools with
invented names, seeded student counts for the current and projected years, today's zones
as vertical bands, and the proposed assignment as the nearest open school (a real,
computed assignment: the tests then check that what is saved, exported or printed agrees
with it). Not a stand-in for the engine: no solver result is faked; status and bound are
given as plain plan fields.
"""

from __future__ import annotations

from pathlib import Path

import geopandas as gpd
import numpy as np
import shapely

from districting.intake import Inputs, Settings, SolveSettings
from districting.intake.adjacency import Adjacency
from districting.study import Outcome, RunSettings, outcome_from_assignment

CRS = "EPSG:32617"  # a UTM zone: any projected CRS in metres will do for the invented town
CELL = 250.0
YEARS = (2027, 2028, 2029)
SITE_NAMES = ("Larkwhistle", "Tansy Hollow", "Quillmere", "Corvel Park", "Fernby Green")


def grid_edges(nx: int, ny: int) -> np.ndarray:
    """Rook neighbours of an nx-by-ny grid numbered row by row."""
    idx = np.arange(nx * ny).reshape(ny, nx)
    horizontal = np.column_stack([idx[:, :-1].ravel(), idx[:, 1:].ravel()])
    vertical = np.column_stack([idx[:-1, :].ravel(), idx[1:, :].ravel()])
    return np.vstack([horizontal, vertical])


def make_town(folder: Path, nx: int = 10, ny: int = 8, n_sites: int = 4, seed: int = 7,
              store_name: str = "options.gpkg", statuses=None) -> Inputs:
    """Inputs of an invented grid town with ``n_sites`` elementary schools."""
    rng = np.random.default_rng(seed)
    folder = Path(folder)
    col, row = np.meshgrid(np.arange(nx), np.arange(ny))
    col, row = col.ravel(), row.ravel()
    x0, y0 = 500_000.0 + col * CELL, 4_400_000.0 + row * CELL
    geoms = shapely.box(x0, y0, x0 + CELL, y0 + CELL)
    n = nx * ny
    unit_ids = [f"U{k:04d}" for k in range(n)]
    units = gpd.GeoDataFrame(
        {"unit_id": unit_ids, "point": shapely.centroid(geoms)}, geometry=geoms, crs=CRS
    )

    # Schools spread along a diagonal, off the band centres so today's zones are not optimal.
    fx = (np.arange(n_sites) + 0.5) / n_sites
    site_col = np.clip((fx * nx).astype(int), 0, nx - 1)
    site_row = np.clip(((0.25 + 0.5 * fx) * ny).astype(int), 0, ny - 1)
    roots = site_row * nx + site_col
    base = rng.integers(20, 60, n).astype(float)
    growth = np.linspace(0.97, 1.08, len(YEARS) + 1)
    counts = np.round(base[None, :] * growth[:, None] * rng.uniform(0.9, 1.1, (len(YEARS) + 1, n)))
    total = counts[1].sum()
    capacity = np.round(np.full(n_sites, total / n_sites) * rng.uniform(0.95, 1.3, n_sites), -1)
    sites = gpd.GeoDataFrame(
        {
            "site_id": [f"E{j + 1:02d}" for j in range(n_sites)],
            "name": [f"{SITE_NAMES[j % len(SITE_NAMES)]} Elementary" for j in range(n_sites)],
            "level": "elementary",
            "capacity": capacity,
            "status": list(statuses) if statuses is not None else ["open"] * n_sites,
            "min_util": np.nan,
            "max_util": np.nan,
            "unit_index": roots.astype(np.int64),
        },
        geometry=shapely.centroid(geoms[roots]),
        crs=CRS,
    )
    current = np.minimum((col * n_sites) // nx, n_sites - 1).astype(np.int64)
    settings = Settings(
        path=folder / "project.toml",
        name="Test grid town (invented)",
        current_year=2026,
        years=YEARS,
        plan_year=YEARS[0],
        levels=("elementary",),
        store=folder / store_name,
        solve=SolveSettings(max_utilization=1.0, min_utilization=0.6),
    )
    return Inputs(
        settings=settings,
        units=units,
        counts={"elementary": counts},
        sites=sites,
        current={"elementary": current},
        barriers=gpd.GeoSeries([], crs=CRS),
        bridges=gpd.GeoSeries([], crs=CRS),
        adjacency=Adjacency.from_edges(unit_ids, grid_edges(nx, ny)),
        report=None,
    )


def nearest_assignment(inputs: Inputs, open_mask=None) -> np.ndarray:
    """Each unit to its nearest (open) elementary school: index into the level's sites."""
    pts = shapely.get_coordinates(inputs.units["point"].to_numpy())
    xy = shapely.get_coordinates(inputs.sites.geometry.to_numpy())
    d = np.hypot(pts[:, None, 0] - xy[None, :, 0], pts[:, None, 1] - xy[None, :, 1])
    if open_mask is not None:
        d[:, ~np.asarray(open_mask, bool)] = np.inf
    return d.argmin(axis=1).astype(np.int64)


def make_outcome(inputs: Inputs, name: str = "Option A", **rs_fields) -> Outcome:
    """An Outcome of the nearest-school assignment, with plain plan fields."""
    rs = RunSettings(level="elementary", **rs_fields)
    a = nearest_assignment(inputs)
    return outcome_from_assignment(
        inputs, rs, a,
        {"status": "feasible", "bound": 0.0, "gap": 1.0, "rounds": 3, "message": "test plan"},
        name=name,
    )


#: A no-plan message as districting.engine.findings.no_plan_text writes it: the lead line,
#: then one cause per line.
NO_PLAN_MESSAGE = "No plan: too few seats.\n- Alder: 40 students over\n- Birch: 12 students over"


def no_plan_outcome(inputs: Inputs, message: str = NO_PLAN_MESSAGE) -> Outcome:
    """An outcome without a valid plan (one unit unassigned, status infeasible)."""
    out = make_outcome(inputs)
    a = out.assignment.copy()
    a[3] = -1
    return outcome_from_assignment(inputs, out.settings, a, {"status": "infeasible",
                                                             "message": message})
