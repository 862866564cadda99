"""The records a project is read into: :class:`Settings` (the project file) and
:class:`Inputs` (everything a solve needs, validated)."""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import cached_property
from pathlib import Path

import geopandas as gpd
import numpy as np
import shapely

from ..travel.cache import cache_key, cached_arrays
from ..travel.measures import check_measure, default_measure, travel_matrix
from .checks import is_coverage
from .feeders import FeederSettings
from .schema import default

__all__ = ["Settings", "SolveSettings", "WalkSettings", "GroupSettings", "group_name", "Lock",
           "Source", "Inputs", "LEVELS"]

LEVELS = tuple(default("project", "levels"))


@dataclass(frozen=True)
class SolveSettings:
    """The [solve] table: defaults for every level, overridable per run.

    The defaults are the schema's (:data:`districting.intake.schema.SCHEMA`).
    """

    max_utilization: float = default("solve", "max_utilization")
    min_utilization: float = default("solve", "min_utilization")
    stability_weight: float = default("solve", "stability_weight")  # metres per student moved
    keep_option_weight: float = default("solve", "keep_option_weight")  # metres per student
    max_distance: dict[str, float] = field(default_factory=dict)  # level -> metres
    max_moved: float | None = None  # students (plan year) allowed to change school
    open_count: dict[str, int] = field(default_factory=dict)  # level -> p (with candidates)
    gap: float = default("solve", "gap")
    time_limit: float | None = default("solve", "time_limit")
    solver: str = default("solve", "solver")  # "highs" (array route) or a Pyomo solver name
    travel_matrix: Path | None = None  # CSV unit_id, site_id, cost (replaces distances)
    #: the travel measure of runs that name none (districting.travel.MEASURES)
    travel: str = default_measure(has_streets=False)


@dataclass(frozen=True)
class WalkSettings:
    """The [walking] table: walking distance per level (metres; a level without one has no
    walk zone) and the optional rules on walkers and transport."""

    distance: dict[str, float] = field(default_factory=dict)
    keep_walkers: bool = False
    max_transported: dict[str, float] = field(default_factory=dict)  # level -> students
    transport_charge: float = 0.0  # metres per student beyond walking distance


@dataclass(frozen=True)
class GroupSettings:
    """The [groups] table: one column template per student group, and the band in
    percentage points around the district's share (0: shares reported, no band)."""

    columns: tuple[str, ...] = ()
    band_points: float = 0.0

    @property
    def names(self) -> tuple[str, ...]:
        """Each group's name for people: its template without {level} and {year}."""
        return tuple(group_name(c) for c in self.columns)


def group_name(template: str) -> str:
    """``meal_support_{level}_{year}`` -> ``meal_support``."""
    name = template.replace("{level}", "").replace("{year}", "")
    while "__" in name:
        name = name.replace("__", "_")
    return name.strip("_- ") or template


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
    #: "units", "sites" and, when the file has them, "counts", "zones", "barriers",
    #: "bridges", "streets"
    sources: dict[str, Source] = field(default_factory=dict)
    contiguity: str = "rook"  # [adjacency] contiguity: "rook" or "queen"
    links: Path | None = None  # [adjacency] links CSV (unit_a, unit_b, action)
    max_access: float = default("streets", "max_access")  # metres to the nearest street
    feeders: FeederSettings = field(default_factory=FeederSettings)  # [feeders]
    walking: WalkSettings = field(default_factory=WalkSettings)
    groups: GroupSettings = field(default_factory=GroupSettings)

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
    - ``groups[level]``: float array (groups, len(settings.all_years), n_units) of each
      ``[groups]`` column's students; NaN in the years a template without {year} leaves
      out (it holds the plan year only). Empty dict without a [groups] table.
    - ``sites``: GeoDataFrame, index 0..s-1, columns ``site_id``, ``name``, ``level``,
      ``capacity``, ``status`` (one of ``rules.SITE_STATUSES``), ``min_util``, ``max_util`` (nan =
      project default), ``unit_index`` (int: the unit containing the site), ``geometry``.
    - ``current[level]``: int array (n_units,): index into ``sites`` of today's school, -1
      where the unit has none.
    - ``barriers``, ``bridges``: GeoSeries (possibly empty).
    - ``adjacency``: :class:`districting.intake.adjacency.Adjacency` after barrier cuts, bridges
      and manual links.
    - ``travel``: optional (n_units, n_sites) cost matrix from the travel CSV (inf = none).
    - ``streets``, ``street_travel``: with a [streets] table, the
      :class:`~districting.travel.StreetNetwork` and the units x sites
      :class:`~districting.travel.StreetTravel` (access legs, pieces) read and checked;
      ``street_lines`` the lines themselves (for maps).
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
    streets: object = None
    street_lines: np.ndarray | None = None  # the street lines read, for maps
    street_travel: object = None
    groups: dict[str, np.ndarray] = field(default_factory=dict)

    @property
    def crs(self):
        return self.units.crs

    def year_row(self, year: int) -> int:
        return self.settings.all_years.index(year)

    @cached_property
    def units_coverage(self) -> bool:
        """Whether the units form a valid polygon coverage (checked once per project)."""
        return is_coverage(self.units.geometry.to_numpy())

    @cached_property
    def _travel_metres(self) -> dict[str, np.ndarray]:
        return {}

    def travel_metres(self, measure: str) -> np.ndarray:
        """(n_units, n_sites) travel in metres by ``measure`` (inf: no path), computed once
        per load and kept on disk per project (:mod:`districting.travel.cache`)."""
        check_measure(measure)
        if measure not in self._travel_metres:
            self._travel_metres[measure] = self._compute_travel(measure)
        return self._travel_metres[measure]

    def _compute_travel(self, measure: str) -> np.ndarray:
        unit_xy = shapely.get_coordinates(self.units["point"].to_numpy())
        site_xy = shapely.get_coordinates(self.sites.geometry.to_numpy())
        if measure == "streets":
            if self.street_travel is None:
                raise ValueError("travel along streets needs a [streets] table in the "
                                 "project; choose barrier-aware or straight-line travel")
            return self.street_travel.metres
        if measure == "straight-line" or not len(self.barriers):
            return travel_matrix("straight-line", unit_xy, site_xy)
        barriers = self.barriers.to_numpy()
        bridges = self.bridges.to_numpy()
        # Unit polygons are left out of the triangulation: on the demo they made paths 0.6%
        # less like the streets and the build 8 times slower (bench_travel_measures.py).
        key = cache_key(measure, barriers, bridges, unit_xy=unit_xy, site_xy=site_xy)
        return cached_arrays(self.settings.path.parent, key, lambda: {
            "metres": travel_matrix(measure, unit_xy, site_xy, barriers=barriers,
                                    crossings=bridges)})["metres"]
