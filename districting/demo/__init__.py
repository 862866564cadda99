"""The invented demo town of Brindlemoor, generated from a seed.

Brindlemoor is made up: its outline, river, highway, rail line, neighbourhoods, schools and
students all come from :func:`generate` and a seed; nothing is taken from a real place.
The committed copy in ``data/demo/`` (written by :func:`write_demo`, regenerated with
``python -m districting.demo data/demo``) lets the demo and the tests run without any
randomness at run time.

How the town is built (all whole-array shapely 2 / numpy calls):

1. An irregular outline (a radius made of a few random harmonics) and three lines that
   cross it: a meandering river, a gently curving highway and a straight-ish rail line.
2. The outline is split by the lines first (``shapely.node`` + ``shapely.polygonize``), so
   every unit border that meets a line runs exactly along it.
3. Seed points, dense around neighbourhood centres and sparse at the edge, are relaxed by
   one Lloyd step (each seed moves to the centroid of its Voronoi cell, Lloyd 1982) and
   their Voronoi cells (``shapely.voronoi_polygons``) are clipped to the pieces; slivers
   that a line cuts off a cell are merged into the neighbour with the longest shared border.
4. Rook neighbours come from shared border lengths; pairs in different pieces lie across a
   barrier. Bridges (two on the river, overpasses and rail crossings) are placed on shared
   borders along the lines until the graph is one connected piece.
5. Land use (parks, floodplain along the river, industry along the rail, commerce along the
   highway) leaves about a tenth of the units without students. Students per level come
   from a multinomial draw over residential units; projections decline in older
   neighbourhoods and grow in the new subdivision as its phases are built.
6. School sites sit at weighted k-means centres (Lloyd iterations) of the students; today's
   attendance zones are a graph Voronoi diagram (additively weighted, one multi-source
   Dijkstra run, Erwig 2000), so each zone is connected and holds its school's unit.
   Capacities make some schools over capacity and some far under it today, while each
   level's plan-year capacity stays above its students in every projected year.

References: S. P. Lloyd, "Least squares quantization in PCM", IEEE Trans. Inf. Theory 28
(1982) 129-137; M. Erwig, "The graph Voronoi diagram with applications", Networks 36 (2000)
156-163.
"""

from .constants import (
    CRS,
    CURRENT_YEAR,
    DISTRICT_NAME,
    LEVELS,
    SUBDIVISION,
    TOWN_NAME,
    YEARS,
    DemoTown,
)
from .files import copy_demo, demo_folder, main, project_settings, write_demo
from .town import generate

__all__ = [
    "DemoTown", "generate", "write_demo", "demo_folder", "copy_demo", "project_settings",
    "main", "TOWN_NAME", "DISTRICT_NAME", "CRS", "CURRENT_YEAR", "YEARS", "LEVELS",
    "SUBDIVISION",
]
