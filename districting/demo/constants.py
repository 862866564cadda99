"""The demo town's fixed figures and names (all invented), and the :class:`DemoTown` record."""

from __future__ import annotations

from dataclasses import dataclass

import geopandas as gpd
import shapely

TOWN_NAME = "Brindlemoor"
DISTRICT_NAME = "Brindlemoor Unified School District (invented demo)"
#: WGS 84 / UTM zone 26N. The town is placed in the open North Atlantic (about 41.5 N,
#: 27 W, open ocean well away from any land), so its map cannot be mistaken for a real place.
CRS = "EPSG:32626"
CENTRE = (500_000.0, 4_600_000.0)
CURRENT_YEAR = 2026
YEARS = (2027, 2028, 2029, 2030, 2031)
PLAN_YEAR = 2027
LEVELS = ("elementary", "middle", "high")
GRID = 0.01  # metres: coordinates are rounded to this grid
#: Students in the current year, town-wide (an invented town of about 40,000 people).
TOTALS = {"elementary": 7000, "middle": 3200, "high": 4500}
#: Today's open sites per level (the elementary count includes the one that closes).
N_SITES = {"elementary": 13, "middle": 4, "high": 2}
#: How many schools are crowded / under-used today, per level.
N_OVER = {"elementary": 3, "middle": 1, "high": 1}
N_UNDER = {"elementary": 2, "middle": 1, "high": 1}
OVER_UTIL = (1.15, 1.30)
UNDER_UTIL = (0.55, 0.65)
#: Plan-year capacity of the open and new sites over the largest projected enrolment.
CAPACITY_RATIO = 1.14
SEAT_STEP = 25  # capacities are whole multiples of this many seats
MIN_SEATS = {"elementary": 300, "middle": 500, "high": 1200}  # no smaller school

RIVER, HIGHWAY, RAIL = "river", "highway", "rail"
BARRIER_NAMES = {
    RIVER: "Wendle River",
    HIGHWAY: "Moorline Expressway",
    RAIL: "Coldspan Freight Line",
}
RIVER_BRIDGES = ("Millrace Bridge", "Ferrystone Bridge")
CROSSING_KIND = {RIVER: "bridge", HIGHWAY: "overpass", RAIL: "rail crossing"}
#: Invented neighbourhood names; the first is the old town centre.
NEIGHBOURHOODS = (
    "Old Brindle",
    "Pellowfield",
    "Tamberwick",
    "Dunmarrow",
    "Wickenlea",
    "Harrowmint",
    "Quillmarsh",
    "Orrinvale",
    "Sablecote",
    "Tinderholt",
    "Gorsebeck",
    "Mirelock",
    "Hollinfret",
    "Cobbleward",
)
SUBDIVISION = "Saffron Reach"


@dataclass(frozen=True, eq=False)
class DemoTown:
    """A generated town: four layers in :data:`CRS`, plus the outline and a few names.

    - ``units``: ``unit_id``, ``neighbourhood``, ``land_use``, ``{level}_{year}`` counts
      (int) for the current and projected years, ``zone_{level}`` (today's site id),
      ``geometry`` (Polygon).
    - ``sites``: ``site_id``, ``name``, ``level``, ``capacity`` (int), ``status``
      (open / closing / new), ``geometry`` (Point inside its unit).
    - ``barriers``: ``name``, ``kind`` (river / highway / rail), ``geometry`` (LineString).
    - ``bridges``: ``name``, ``kind``, ``barrier`` (name of the line crossed), ``geometry``
      (Point on the line).
    - ``streets``: ``name``, ``kind`` (arterial / collector / local), ``walkable`` (bool),
      ``geometry`` (LineString pieces meeting at shared vertices; see ``demo.streets``).
    """

    name: str
    seed: int
    units: gpd.GeoDataFrame
    sites: gpd.GeoDataFrame
    barriers: gpd.GeoDataFrame
    bridges: gpd.GeoDataFrame
    outline: shapely.Polygon
    streets: gpd.GeoDataFrame
    subdivision: str = SUBDIVISION
    current_year: int = CURRENT_YEAR
    years: tuple[int, ...] = YEARS
    plan_year: int = PLAN_YEAR
