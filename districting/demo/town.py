"""The town: :func:`generate` builds units, land use, bridges, students, schools and zones."""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely
from scipy.sparse.csgraph import connected_components

from .constants import (
    BARRIER_NAMES,
    CENTRE,
    CROSSING_KIND,
    CRS,
    DISTRICT_NAME,
    GRID,
    HIGHWAY,
    NEIGHBOURHOODS,
    RAIL,
    RIVER,
    RIVER_BRIDGES,
    SUBDIVISION,
    DemoTown,
)
from .geometry import (
    barrier_lines,
    csr,
    grow_region,
    reading_order,
    rook_pairs,
    sample_in,
    town_outline,
    units_from_cells,
    voronoi_cells,
)
from .groups import group_counts
from .schools import (
    sites_and_zones,
    student_counts,
)
from .streets import street_network


# --------------------------------------------------------------------------- the town
def generate(seed: int = 2027, n_units: int = 1500, radius: float = 6800.0) -> DemoTown:
    """Generate the invented town from ``seed`` (same seed, same town).

    ``n_units`` is the number of Voronoi seeds (the unit count lands within a few percent
    of it); ``radius`` is the mean outline radius in metres (the town is about 2.1 times
    ``radius`` across).
    """
    if n_units < 200:
        raise ValueError(f"n_units={n_units}: the demo town needs at least 200 units")
    rng = np.random.default_rng(seed)
    outline = town_outline(rng, radius)
    lines, pieces = barrier_lines(rng, outline, radius)
    kinds = [RIVER, HIGHWAY, RAIL]

    # neighbourhood centres: the old town at the middle, the subdivision near the edge, the
    # others spread out (farthest-point choice among random candidates)
    n_hood = len(NEIGHBOURHOODS)
    core = outline.buffer(-0.12 * radius)
    cand = sample_in(rng, core, 3000)
    edge = sample_in(rng, core.difference(shapely.Point(CENTRE).buffer(0.6 * radius)), 1)
    centres = [np.array(CENTRE) + rng.normal(0, 0.05 * radius, 2), edge[0]]
    for _ in range(n_hood - 1):
        d = np.sqrt(((cand[:, None] - np.asarray(centres)[None]) ** 2).sum(-1)).min(1)
        centres.append(cand[np.argmax(d)])
    centres = np.asarray(centres)  # row 0 old town, row 1 subdivision, then the others
    hood_names = np.array([NEIGHBOURHOODS[0], SUBDIVISION, *NEIGHBOURHOODS[1:]])
    sigmas = np.r_[0.12, 0.07, rng.uniform(0.09, 0.16, n_hood - 1)] * radius
    weights = np.r_[1.6, 0.6, rng.uniform(0.6, 1.2, n_hood - 1)]

    pts = sample_in(rng, outline, n_units, centres, sigmas, weights, background=0.22)
    pts = shapely.get_coordinates(shapely.centroid(voronoi_cells(pts, outline)))  # one Lloyd step
    cells = voronoi_cells(pts, outline)
    geoms, piece = units_from_cells(cells, pieces, min_share=0.3, min_area=6000.0)
    order = reading_order(geoms, band=250.0)
    geoms, piece = geoms[order], piece[order]
    n = len(geoms)
    point = shapely.point_on_surface(geoms)
    xy = shapely.get_coordinates(point)

    # rook graph; pairs in different pieces lie across a barrier
    i, j, border, blen = rook_pairs(geoms)
    across = piece[i] != piece[j]
    mid = shapely.point_on_surface(border)
    line_arr = np.array([lines[k] for k in kinds], dtype=object)
    kind_of = np.argmin(np.column_stack([shapely.distance(mid, g) for g in line_arr]), axis=1)
    hood = np.argmin(((xy[:, None] - centres[None]) ** 2).sum(-1), axis=1)
    # zones grow over pairs with a clear shared border (>= 5 m), so they stay connected in
    # any rook graph of the units that cuts only pairs along the lines
    base = ~across & (blen >= 5.0)
    bridges, kept = _bridges(
        n, i, j, base, across, kind_of, border, blen, line_arr, kinds, hood_names[hood]
    )
    keep = base | kept
    gi, gj = i[keep], j[keep]
    gw = np.hypot(*(xy[gi] - xy[gj]).T)
    if connected_components(csr(n, gi, gj, gw), directed=False)[0] != 1:
        raise ValueError(f"seed {seed}: the unit graph is not connected after bridges")

    land_use = _land_use(rng, n, gi, gj, i, j, across, kind_of, blen, hood, xy, lines, kinds)
    counts = student_counts(rng, n, land_use, hood, n_hood + 1)
    sites, zones = sites_and_zones(
        rng, n, gi, gj, gw, xy, point, land_use, hood, hood_names, centres, counts
    )

    units = pd.DataFrame(
        {
            "unit_id": [f"U{k + 1:04d}" for k in range(n)],
            "neighbourhood": hood_names[hood],
            "land_use": land_use,
        }
    )
    groups = group_counts(seed, counts, hood)
    units = pd.concat([units, pd.DataFrame(counts), pd.DataFrame(zones), pd.DataFrame(groups)],
                      axis=1)
    units = gpd.GeoDataFrame(units, geometry=geoms, crs=CRS)
    barriers = gpd.GeoDataFrame(
        {"name": [BARRIER_NAMES[k] for k in kinds], "kind": kinds},
        geometry=shapely.set_precision(line_arr, GRID),
        crs=CRS,
    )
    bridges = bridges.set_crs(CRS)
    outline = shapely.set_precision(outline, GRID)
    centroids = shapely.get_coordinates(shapely.centroid(geoms))
    streets = street_network(seed, outline, barriers, bridges, centroids, radius)
    return DemoTown(
        DISTRICT_NAME, seed, units, sites.set_crs(CRS), barriers, bridges, outline, streets
    )


def _bridges(n, i, j, base, across, kind_of, border, blen, lines, kinds, hood_of):
    """Crossings on the barrier lines: two river bridges, three crossings each of the
    highway and the rail line, spread along each line, then more (on the highway or rail
    when one will do) until the graph of the ``base`` pairs and the crossings is one piece.
    Each crossing sits at the middle of a shared border (longer than 40 m) along its line.
    Returns (GeoDataFrame of bridges, bool per rook pair: kept across a barrier)."""
    per_kind = {RIVER: (1 / 3, 2 / 3), HIGHWAY: (0.2, 0.5, 0.8), RAIL: (0.2, 0.5, 0.8)}
    kept = np.zeros(len(i), bool)
    cand = across & (blen > 40.0)
    for k, kind in enumerate(kinds):
        on = np.flatnonzero(cand & (kind_of == k))
        line = lines[k]
        pos = shapely.line_locate_point(line, shapely.point_on_surface(border[on]), normalized=True)
        for target in per_kind[kind]:
            kept[on[np.argmin(np.abs(pos - target))]] = True
    # more crossings until one connected piece (the river only when nothing else will do)
    while True:
        edge = base | kept
        ncomp, lab = connected_components(
            csr(n, i[edge], j[edge], np.ones(int(edge.sum()))), directed=False
        )
        if ncomp == 1:
            break
        links = np.flatnonzero(cand & ~kept & (lab[i] != lab[j]))
        road = links[kind_of[links] != 0]
        pick = road if len(road) else links
        if not len(pick):
            raise ValueError("no crossing can join the pieces of the town")
        kept[pick[np.argmax(blen[pick])]] = True
    e = np.flatnonzero(kept)
    on_line = shapely.line_interpolate_point(border[e], 0.5, normalized=True)
    kind = np.array(kinds)[kind_of[e]]
    pos = shapely.line_locate_point(lines[kind_of[e]], on_line, normalized=True)
    order = np.lexsort((pos, kind_of[e]))
    e, on_line, kind = e[order], on_line[order], kind[order]
    names, used, river_no = [], set(), 0
    for x, kd in zip(e, kind, strict=True):
        if kd == RIVER and river_no < len(RIVER_BRIDGES):
            name = RIVER_BRIDGES[river_no]
            river_no += 1
        else:
            base = f"{hood_of[i[x]]} {CROSSING_KIND[kd].title()}"
            name, extra = base, 2
            while name in used:
                name, extra = f"{base} {extra}", extra + 1
        used.add(name)
        names.append(name)
    gdf = gpd.GeoDataFrame(
        {
            "name": names,
            "kind": [CROSSING_KIND[kd] for kd in kind],
            "barrier": [BARRIER_NAMES[kd] for kd in kind],
        },
        geometry=shapely.set_precision(on_line, GRID),
    )
    return gdf, kept


def _land_use(rng, n, gi, gj, i, j, across, kind_of, blen, hood, xy, lines, kinds):
    """Non-residential units: parks (small blobs), floodplain along the river, industry
    along a stretch of the rail line, commerce along a mid-town stretch of the highway."""
    use = np.full(n, "residential", dtype=object)

    def along(k):  # units with a border on barrier k, and their position along it
        e = across & (kind_of == k) & (blen > 20.0)
        u = np.unique(np.r_[i[e], j[e]])
        pos = shapely.line_locate_point(lines[kinds[k]], shapely.points(xy[u]), normalized=True)
        return u, pos

    u, pos = along(0)
    use[u[rng.random(len(u)) < 0.5]] = "floodplain"
    u, pos = along(2)
    start = rng.uniform(0.5, 0.6)
    yard = u[(pos > start) & (pos < start + 0.2)]
    if len(yard):  # the yards and the blocks around them
        use[grow_region(n, gi, gj, yard, int(0.035 * n))] = "industrial"
    u, pos = along(1)
    start = rng.uniform(0.35, 0.45)
    use[u[(pos > start) & (pos < start + 0.15)]] = "commercial"
    n_parks = max(3, n // 130)
    free = np.flatnonzero((use == "residential") & (hood != 1))
    for s in rng.choice(free, n_parks, replace=False):
        blob = grow_region(n, gi, gj, np.array([s]), int(rng.integers(2, 8)))
        use[blob & (use == "residential")] = "park"
    return use.astype(str)
