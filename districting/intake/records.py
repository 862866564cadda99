"""The records a project is read into: :class:`Settings` (the project file) and
:class:`Inputs` (everything a solve needs, validated)."""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import cached_property
from pathlib import Path

import geopandas as gpd
import numpy as np

from .checks import is_coverage
from .schema import default

__all__ = ["Settings", "SolveSettings", "Lock", "Source", "Inputs", "LEVELS"]

LEVELS = tuple(default("project", "levels"))


@dataclass(frozen=True)
class SolveSettings:
    """The [solve] table: defaults for every level, overridable per run.

    The defaults are the schema's (:data:`districting.intake.schema.SCHEMA`).
    """

    max_utilization: float = default("solve", "max_utilization")
    min_utilization: float = default("solve", "min_utilization")
    stability_weight: float = default("solve", "stability_weight")  # metres per student moved
    max_distance: dict[str, float] = field(default_factory=dict)  # level -> metres
    max_moved: float | None = None  # students (plan year) allowed to change school
    open_count: dict[str, int] = field(default_factory=dict)  # level -> p (with candidates)
    gap: float = default("solve", "gap")
    time_limit: float | None = default("solve", "time_limit")
    solver: str = default("solve", "solver")  # "highs" (array route) or a Pyomo solver name
    travel_matrix: Path | None = None  # CSV unit_id, site_id, cost (replaces distances)


@dataclass(frozen=True)
class Lock:
    level: str
    unit: str  # unit id
    site: str  # site id


@dataclass(frozen=True)
class Source:
    """One source table of the project file: where the layer is, which column plays which role.

    ``columns`` maps a role ("id", "counts", "capacity"...) to a column name ("" = not
    given); ``level_columns`` maps a level to its column ([zones] ``columns``).
    """

    path: Path
    layer: str | None = None
    columns: dict[str, str] = field(default_factory=dict)
    level_columns: dict[str, str] = field(default_factory=dict)


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
    #: "units", "sites" and, when the file has them, "counts", "zones", "barriers", "bridges"
    sources: dict[str, Source] = field(default_factory=dict)
    contiguity: str = "rook"  # [adjacency] contiguity: "rook" or "queen"
    links: Path | None = None  # [adjacency] links CSV (unit_a, unit_b, action)

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
      ``capacity``, ``status`` (one of ``rules.SITE_STATUSES``), ``min_util``, ``max_util`` (nan =
      project default), ``unit_index`` (int: the unit containing the site), ``geometry``.
    - ``current[level]``: int array (n_units,): index into ``sites`` of today's school, -1
      where the unit has none.
    - ``barriers``, ``bridges``: GeoSeries (possibly empty).
    - ``adjacency``: :class:`districting.intake.adjacency.Adjacency` after barrier cuts, bridges
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

    @cached_property
    def units_coverage(self) -> bool:
        """Whether the units form a valid polygon coverage (checked once per project)."""
        return is_coverage(self.units.geometry.to_numpy())
