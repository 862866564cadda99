"""A project: one TOML file -> validated inputs.

The TOML file names where each layer comes from and which column plays which role
(see DEVELOPERS.md, "Project file"). :func:`load_project` reads it, validates everything
before any solve, and returns :class:`Inputs`; every problem found is reported at once in a
:class:`~districting.validate.Report` (errors stop the run, warnings do not).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

import geopandas as gpd
import numpy as np

__all__ = ["Settings", "SolveSettings", "Inputs", "load_project", "LEVELS", "SITE_STATUSES"]

LEVELS = ("elementary", "middle", "high")
#: open: open now and in the plan; closing: closes at the plan year (its students move);
#: new: opens at the plan year; candidate: the solver decides; closed: not in use.
SITE_STATUSES = ("open", "closing", "new", "candidate", "closed")


@dataclass(frozen=True)
class SolveSettings:
    """The [solve] table: defaults for every level, overridable per run."""

    max_utilization: float = 1.0
    min_utilization: float = 0.0
    stability_weight: float = 0.0  # extra metres of travel charged per student moved
    max_distance: dict[str, float] = field(default_factory=dict)  # level -> metres
    max_moved: float | None = None  # students (plan year) allowed to change school
    open_count: dict[str, int] = field(default_factory=dict)  # level -> p (with candidates)
    gap: float = 1e-4
    time_limit: float | None = 60.0
    solver: str = "highs"  # "highs" (array route) or any solver name Pyomo drives
    travel_matrix: Path | None = None  # CSV unit_id, site_id, cost (replaces distances)


@dataclass(frozen=True)
class Lock:
    level: str
    unit: str  # unit id
    site: str  # site id


@dataclass(frozen=True)
class Settings:
    """The parsed project file, paths resolved against the file's folder."""

    path: Path  # the TOML file
    name: str
    current_year: int
    years: tuple[int, ...]  # projected years; capacity must hold in each
    plan_year: int  # the year new zones take effect; one of ``years``
    levels: tuple[str, ...]
    store: Path  # GeoPackage that holds saved options
    solve: SolveSettings
    locks: tuple[Lock, ...] = ()
    forbids: tuple[Lock, ...] = ()
    raw: dict = field(default_factory=dict, repr=False)  # the TOML as read

    @property
    def all_years(self) -> tuple[int, ...]:
        """Rows of ``Inputs.counts``: the current year, then the projected years."""
        return (self.current_year, *self.years)


@dataclass(frozen=True, eq=False)
class Inputs:
    """Everything a solve needs, validated, in one projected CRS.

    - ``units``: GeoDataFrame, positional index 0..n-1, columns ``unit_id`` (str),
      ``geometry`` (polygons), ``point`` (shapely Point: population-weighted point if the
      project gives one, else the centroid).
    - ``counts[level]``: float array (len(settings.all_years), n_units).
    - ``sites``: GeoDataFrame, index 0..s-1, columns ``site_id``, ``name``, ``level``,
      ``capacity``, ``status`` (one of SITE_STATUSES), ``min_util``, ``max_util`` (nan =
      project default), ``unit_index`` (int: the unit containing the site), ``geometry``.
    - ``current[level]``: int array (n_units,): index into ``sites`` of today's school, -1
      where the unit has none.
    - ``barriers``, ``bridges``: GeoSeries (possibly empty).
    - ``adjacency``: :class:`districting.adjacency.Adjacency` after barrier cuts, bridges
      and manual links.
    - ``travel``: optional (n_units, n_sites) cost matrix from the travel CSV (inf = none).
    """

    settings: Settings
    units: gpd.GeoDataFrame
    counts: dict[str, np.ndarray]
    sites: gpd.GeoDataFrame
    current: dict[str, np.ndarray]
    barriers: gpd.GeoSeries
    bridges: gpd.GeoSeries
    adjacency: object
    report: object
    travel: np.ndarray | None = None

    @property
    def crs(self):
        return self.units.crs

    def year_row(self, year: int) -> int:
        return self.settings.all_years.index(year)


def load_project(path: str | Path) -> Inputs:
    """Read, validate and return a project's inputs; raise ProjectError listing every error."""
    raise NotImplementedError("filled in by the intake work (issue 2)")
