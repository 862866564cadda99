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

from __future__ import annotations

import argparse
import shutil
import sys
from dataclasses import dataclass
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely
from scipy.sparse import coo_matrix
from scipy.sparse.csgraph import connected_components, dijkstra

from .io import atomic_path, atomic_write_text

__all__ = [
    "DemoTown",
    "generate",
    "write_demo",
    "demo_folder",
    "copy_demo",
    "TOWN_NAME",
    "DISTRICT_NAME",
    "CRS",
    "CURRENT_YEAR",
    "YEARS",
    "LEVELS",
]

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
    """

    name: str
    seed: int
    units: gpd.GeoDataFrame
    sites: gpd.GeoDataFrame
    barriers: gpd.GeoDataFrame
    bridges: gpd.GeoDataFrame
    outline: shapely.Polygon
    subdivision: str = SUBDIVISION
    current_year: int = CURRENT_YEAR
    years: tuple[int, ...] = YEARS
    plan_year: int = PLAN_YEAR


# --------------------------------------------------------------------------- geometry
def _outline(rng: np.random.Generator, radius: float) -> shapely.Polygon:
    """A star-shaped outline: radius times (1 + a few random harmonics)."""
    theta = np.linspace(0.0, 2.0 * np.pi, 240, endpoint=False)
    r = np.ones_like(theta)
    for k, amp in zip((2, 3, 4, 5, 7), (0.10, 0.07, 0.05, 0.03, 0.02), strict=True):
        r += amp * rng.uniform(0.6, 1.0) * np.cos(k * theta + rng.uniform(0, 2 * np.pi))
    x = CENTRE[0] + radius * r * np.cos(theta) * 1.08
    y = CENTRE[1] + radius * r * np.sin(theta) * 0.93
    return shapely.Polygon(np.column_stack([x, y]))  # star-shaped with r > 0: simple


#: Each line runs between two outline vertices: (kind, entry angle, exit angle, meander
#: amplitude as a share of the radius, meander wavelengths along the line).
_LINE_PLAN = (
    (RIVER, 180.0, 0.0, 0.09, (2.5, 6.0)),
    (HIGHWAY, 95.0, 265.0, 0.04, (1.0,)),
    (RAIL, 140.0, 320.0, 0.015, (1.5,)),
)


def _lines(rng: np.random.Generator, outline: shapely.Polygon, radius: float):
    """The river, highway and rail line, each from one outline vertex to another.

    Starting and ending exactly on outline vertices lets ``shapely.node`` split the outline
    ring there without rounding gaps. Each line is the chord between its ends plus a
    meander (sum of sines, tapered to zero at both ends); the meander is damped until the
    line stays inside the town and no face of the split is smaller than 5 ha.
    """
    ring = shapely.get_coordinates(outline.exterior)[:-1]
    ang = np.degrees(np.arctan2(ring[:, 1] - CENTRE[1], ring[:, 0] - CENTRE[0])) % 360.0
    t = np.linspace(0.0, 1.0, 241)
    shapes = []
    for kind, a0, a1, amp, waves in _LINE_PLAN:
        ends = []
        for a in (a0, a1):
            a = (a + rng.uniform(-12.0, 12.0)) % 360.0
            ends.append(ring[np.argmin(np.abs((ang - a + 180.0) % 360.0 - 180.0))])
        p, q = ends
        wiggle = sum(
            rng.uniform(0.5, 1.0) * np.sin(2 * np.pi * w * t + rng.uniform(0, 6.3)) for w in waves
        )
        shapes.append((kind, p, q, amp * radius * np.sin(np.pi * t) ** 0.8 * wiggle))
    for damp in (1.0, 0.7, 0.45, 0.25, 0.0):
        lines = {}
        for kind, p, q, offset in shapes:
            along = q - p
            normal = np.array([-along[1], along[0]]) / np.hypot(*along)
            xy = p + t[:, None] * along + damp * offset[:, None] * normal
            xy[0], xy[-1] = p, q  # exactly on the outline vertices
            lines[kind] = shapely.LineString(xy)
        if not shapely.contains(outline, np.array(list(lines.values()))).all():
            continue
        pieces = _pieces(outline, list(lines.values()))
        if shapely.area(pieces).min() >= 5e4:
            return lines, pieces
    raise ValueError("could not draw the lines across this outline; try another seed")


def _pieces(outline: shapely.Polygon, lines: list) -> np.ndarray:
    """Faces of the outline split by the lines (``shapely.node`` + ``shapely.polygonize``)."""
    noded = shapely.node(shapely.union_all([outline.exterior, *lines]))
    faces = shapely.get_parts(shapely.polygonize(shapely.get_parts(noded)))
    keep = shapely.contains(outline, shapely.point_on_surface(faces))
    return faces[keep]


def _sample_in(rng, region, n, centres=None, sigmas=None, weights=None, background=1.0):
    """``n`` points inside ``region``: a Gaussian mixture around ``centres`` (spreads
    ``sigmas``, mixing ``weights``) plus a uniform ``background`` share; rejection sampling
    over whole batches. With no centres the points are uniform."""
    x0, y0, x1, y1 = region.bounds
    out = np.empty((0, 2))
    shapely.prepare(region)
    while len(out) < n:
        m = 4 * n
        pts = np.column_stack([rng.uniform(x0, x1, m), rng.uniform(y0, y1, m)])
        if centres is not None:
            mixed = rng.random(m) >= background
            comp = rng.choice(len(centres), size=int(mixed.sum()), p=weights / weights.sum())
            pts[mixed] = centres[comp] + rng.normal(size=(len(comp), 2)) * sigmas[comp, None]
        out = np.vstack([out, pts[shapely.contains_xy(region, pts[:, 0], pts[:, 1])]])
    return out[:n]


def _voronoi(points: np.ndarray, clip: shapely.Polygon) -> np.ndarray:
    """Voronoi cells of ``points`` in point order, clipped to ``clip``."""
    extent = shapely.buffer(shapely.envelope(clip), 5000.0)
    cells = shapely.get_parts(
        shapely.voronoi_polygons(shapely.multipoints(points), extend_to=extent, ordered=True)
    )
    return shapely.intersection(cells, clip)


def _units_from_cells(cells: np.ndarray, pieces: np.ndarray, min_share: float, min_area: float):
    """Clip cells to the pieces, explode, and merge slivers into a same-piece neighbour.

    A part is a sliver when it is below ``min_share`` of its cell's area or below
    ``min_area``; it joins the larger part of the same piece that shares the longest border
    with it (chains of joins are followed to their end; a sliver with no larger neighbour in
    its piece stays a unit of its own).
    Returns (polygons, piece index per polygon).
    """
    tree = shapely.STRtree(pieces)
    ic, ip = tree.query(cells, predicate="intersects")
    clipped = shapely.intersection(cells[ic], pieces[ip])
    parts, k = shapely.get_parts(clipped, return_index=True)
    poly = shapely.get_type_id(parts) == 3
    parts, cell, piece = parts[poly], ic[k[poly]], ip[k[poly]]
    area = shapely.area(parts)
    parts, cell, piece, area = (a[area > 0.0] for a in (parts, cell, piece, area))
    small = (area < min_share * shapely.area(cells)[cell]) | (area < min_area)

    si = np.flatnonzero(small)
    a, b = shapely.STRtree(parts).query(parts[si], predicate="intersects")
    a = si[a]
    ok = (area[b] > area[a]) & (piece[a] == piece[b])
    a, b = a[ok], b[ok]
    shared = shapely.length(
        shapely.intersection(shapely.boundary(parts[a]), shapely.boundary(parts[b]))
    )
    pairs = pd.DataFrame({"a": a, "b": b, "len": shared})
    best = pairs[pairs["len"] > 0].sort_values(["a", "len"], ascending=[True, False])
    best = best.drop_duplicates("a")
    group = np.arange(len(parts))
    group[best["a"].to_numpy()] = best["b"].to_numpy()
    while not np.array_equal(group[group], group):  # follow chains a -> b -> c
        group = group[group]
    merged = gpd.GeoDataFrame({"group": group, "piece": piece}, geometry=parts).dissolve(
        by="group", aggfunc="first"
    )
    geoms = shapely.set_precision(merged.geometry.to_numpy(), GRID)
    # a dissolve of exactly touching parts is one polygon; keep the largest part otherwise
    geoms = _largest_part(geoms)
    return geoms, merged["piece"].to_numpy()


def _largest_part(geoms: np.ndarray) -> np.ndarray:
    parts, idx = shapely.get_parts(geoms, return_index=True)
    order = pd.DataFrame({"i": idx, "area": shapely.area(parts)}).sort_values(
        ["i", "area"], ascending=[True, False]
    )
    first = order.drop_duplicates("i").index.to_numpy()
    out = np.empty(len(geoms), dtype=object)
    out[idx[first]] = parts[first]
    return out


def _reading_order(geoms: np.ndarray, band: float) -> np.ndarray:
    """Permutation sorting polygons north to south in bands, west to east within a band."""
    p = shapely.point_on_surface(geoms)
    x, y = shapely.get_x(p), shapely.get_y(p)
    return np.lexsort((x, -np.floor(y / band)))


def _rook_pairs(geoms: np.ndarray, min_length: float = 0.05):
    """Pairs (i < j) of polygons sharing a border longer than ``min_length`` metres, the
    shared border of each pair and its length."""
    i, j = shapely.STRtree(geoms).query(geoms, predicate="intersects")
    keep = i < j
    i, j = i[keep], j[keep]
    border = shapely.intersection(shapely.boundary(geoms[i]), shapely.boundary(geoms[j]))
    length = shapely.length(border)
    keep = length > min_length
    return i[keep], j[keep], border[keep], length[keep]


# --------------------------------------------------------------------------- graph helpers
def _csr(n: int, i: np.ndarray, j: np.ndarray, w: np.ndarray):
    return coo_matrix((np.r_[w, w], (np.r_[i, j], np.r_[j, i])), shape=(n, n)).tocsr()


def _graph_voronoi(
    n: int, i: np.ndarray, j: np.ndarray, w: np.ndarray, roots: np.ndarray, offsets: np.ndarray
) -> np.ndarray:
    """Index of the nearest root for every node, distance = offset + path length.

    One Dijkstra run from a super-source joined to each root by an edge of its offset; each
    node's zone is the root its shortest path leaves the super-source by, so every zone is a
    connected subtree that holds its root (given offsets smaller than root distances).
    """
    s = n
    graph = _csr(
        n + 1,
        np.r_[i, np.full(len(roots), s)],
        np.r_[j, roots],
        np.r_[w, offsets + 1.0],  # +1: a zero weight would vanish from the sparse matrix
    )
    dist, pred = dijkstra(graph, directed=False, indices=s, return_predecessors=True)
    if not np.isfinite(dist[:n]).all():
        raise ValueError("the unit graph is not connected; cannot grow zones")
    up = np.where(pred[:n] == s, np.arange(n), pred[:n])
    while True:  # pointer jumping up to the child of the super-source
        nxt = up[up]
        if np.array_equal(nxt, up):
            break
        up = nxt
    index = np.full(n, -1)
    index[roots] = np.arange(len(roots))
    zone = index[up]
    if (zone[roots] != np.arange(len(roots))).any():
        raise ValueError("a root lies in another root's zone; lower the offsets")
    return zone


def _grow(n, i, j, seeds: np.ndarray, size: int) -> np.ndarray:
    """Bool mask of about ``size`` nodes nearest (in hops) to ``seeds``: a breadth-first blob."""
    hops = dijkstra(_csr(n, i, j, np.ones(len(i))), directed=False, indices=seeds, min_only=True)
    order = np.argsort(hops, kind="stable")
    mask = np.zeros(n, bool)
    mask[order[: min(size, n)]] = True
    return mask


def _kmeans(rng, xy: np.ndarray, w: np.ndarray, k: int, iters: int = 30) -> np.ndarray:
    """Weighted k-means (k-means++ start, Lloyd iterations); returns the k centres."""
    p = w / w.sum()
    centres = [xy[rng.choice(len(xy), p=p)]]
    for _ in range(k - 1):
        d2 = ((xy[:, None, :] - np.asarray(centres)[None]) ** 2).sum(-1).min(1)
        q = p * d2
        centres.append(xy[rng.choice(len(xy), p=q / q.sum())])
    c = np.asarray(centres)
    for _ in range(iters):
        lab = ((xy[:, None, :] - c[None]) ** 2).sum(-1).argmin(1)
        mass = np.bincount(lab, weights=w, minlength=k)
        sx = np.bincount(lab, weights=w * xy[:, 0], minlength=k)
        sy = np.bincount(lab, weights=w * xy[:, 1], minlength=k)
        filled = mass > 0
        c[filled] = np.column_stack([sx, sy])[filled] / mass[filled, None]
    return c


def _snap(centres: np.ndarray, xy: np.ndarray, allowed: np.ndarray) -> np.ndarray:
    """Distinct allowed nodes nearest to each centre (greedy, in centre order)."""
    d = np.sqrt(((centres[:, None, :] - xy[None]) ** 2).sum(-1))
    d[:, ~allowed] = np.inf
    chosen = []
    for row in d:  # k is small (a school count)
        row = row.copy()
        row[chosen] = np.inf
        chosen.append(int(np.argmin(row)))
    return np.asarray(chosen)


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
    outline = _outline(rng, radius)
    lines, pieces = _lines(rng, outline, radius)
    kinds = [RIVER, HIGHWAY, RAIL]

    # neighbourhood centres: the old town at the middle, the subdivision near the edge, the
    # others spread out (farthest-point choice among random candidates)
    n_hood = len(NEIGHBOURHOODS)
    core = outline.buffer(-0.12 * radius)
    cand = _sample_in(rng, core, 3000)
    edge = _sample_in(rng, core.difference(shapely.Point(CENTRE).buffer(0.6 * radius)), 1)
    centres = [np.array(CENTRE) + rng.normal(0, 0.05 * radius, 2), edge[0]]
    for _ in range(n_hood - 1):
        d = np.sqrt(((cand[:, None] - np.asarray(centres)[None]) ** 2).sum(-1)).min(1)
        centres.append(cand[np.argmax(d)])
    centres = np.asarray(centres)  # row 0 old town, row 1 subdivision, then the others
    hood_names = np.array([NEIGHBOURHOODS[0], SUBDIVISION, *NEIGHBOURHOODS[1:]])
    sigmas = np.r_[0.12, 0.07, rng.uniform(0.09, 0.16, n_hood - 1)] * radius
    weights = np.r_[1.6, 0.6, rng.uniform(0.6, 1.2, n_hood - 1)]

    pts = _sample_in(rng, outline, n_units, centres, sigmas, weights, background=0.22)
    pts = shapely.get_coordinates(shapely.centroid(_voronoi(pts, outline)))  # one Lloyd step
    cells = _voronoi(pts, outline)
    geoms, piece = _units_from_cells(cells, pieces, min_share=0.3, min_area=6000.0)
    order = _reading_order(geoms, band=250.0)
    geoms, piece = geoms[order], piece[order]
    n = len(geoms)
    point = shapely.point_on_surface(geoms)
    xy = shapely.get_coordinates(point)

    # rook graph; pairs in different pieces lie across a barrier
    i, j, border, blen = _rook_pairs(geoms)
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
    if connected_components(_csr(n, gi, gj, gw), directed=False)[0] != 1:
        raise ValueError(f"seed {seed}: the unit graph is not connected after bridges")

    land_use = _land_use(rng, n, gi, gj, i, j, across, kind_of, blen, hood, xy, lines, kinds)
    counts = _counts(rng, n, land_use, hood, n_hood + 1)
    sites, zones = _sites_and_zones(
        rng, n, gi, gj, gw, xy, point, land_use, hood, hood_names, centres, counts
    )

    units = pd.DataFrame(
        {
            "unit_id": [f"U{k + 1:04d}" for k in range(n)],
            "neighbourhood": hood_names[hood],
            "land_use": land_use,
        }
    )
    units = pd.concat([units, pd.DataFrame(counts), pd.DataFrame(zones)], axis=1)
    units = gpd.GeoDataFrame(units, geometry=geoms, crs=CRS)
    barriers = gpd.GeoDataFrame(
        {"name": [BARRIER_NAMES[k] for k in kinds], "kind": kinds},
        geometry=shapely.set_precision(line_arr, GRID),
        crs=CRS,
    )
    bridges = bridges.set_crs(CRS)
    outline = shapely.set_precision(outline, GRID)
    return DemoTown(DISTRICT_NAME, seed, units, sites.set_crs(CRS), barriers, bridges, outline)


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
            _csr(n, i[edge], j[edge], np.ones(int(edge.sum()))), directed=False
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
        use[_grow(n, gi, gj, yard, int(0.035 * n))] = "industrial"
    u, pos = along(1)
    start = rng.uniform(0.35, 0.45)
    use[u[(pos > start) & (pos < start + 0.15)]] = "commercial"
    n_parks = max(3, n // 130)
    free = np.flatnonzero((use == "residential") & (hood != 1))
    for s in rng.choice(free, n_parks, replace=False):
        blob = _grow(n, gi, gj, np.array([s]), int(rng.integers(2, 8)))
        use[blob & (use == "residential")] = "park"
    return use.astype(str)


def _counts(rng, n, land_use, hood, n_hood) -> dict[str, np.ndarray]:
    """Students per unit, level and year (int arrays keyed ``{level}_{year}``).

    Households per residential unit are lognormal; each neighbourhood has its own mix of
    ages and its own yearly trend (older neighbourhoods lose students). The subdivision's
    units are built in phases: a unit counts fully from a year after its build year, with
    middle and high school students arriving a few years after the young children.
    """
    res = land_use == "residential"
    sub = res & (hood == 1)
    homes = np.where(res, rng.lognormal(0.0, 0.45, n), 0.0)
    trend = rng.uniform(-0.025, 0.008, n_hood)
    trend[0] = -0.035  # the old town loses families
    years = np.arange(CURRENT_YEAR, YEARS[-1] + 1)
    build = rng.integers(CURRENT_YEAR - 5, YEARS[-1], n)  # phases 2021-2030
    lag = {"elementary": 0, "middle": 2, "high": 3}
    sub_share = {"elementary": 0.023, "middle": 0.02, "high": 0.015}  # x4: the build-out
    out: dict[str, np.ndarray] = {}
    for level in LEVELS:
        mix = rng.uniform(0.75, 1.25, n_hood)
        p = homes * mix[hood] * rng.lognormal(0.0, 0.15, n)
        p[sub] = 0.0
        # full build-out of a subdivision unit: well above a typical unit (young families)
        full = np.zeros(n)
        full[sub] = rng.poisson(sub_share[level] * TOTALS[level] * 4 / max(sub.sum(), 1), sub.sum())
        built = [
            np.floor(full * np.clip((year - build - lag[level]) / 2.0, 0.0, 1.0) + 0.5)
            for year in years
        ]
        # the rest of the town holds the current-year total less the subdivision's share
        rest = max(TOTALS[level] - int(built[0].sum()), 0)
        base = rng.multinomial(rest, p / p.sum()).astype(float)
        unit_trend = trend[hood] + rng.normal(0.0, 0.01, n)
        for t, year in enumerate(years):
            grown = np.floor(base * (1.0 + unit_trend) ** t + 0.5)
            out[f"{level}_{year}"] = np.where(sub, built[t], grown).astype(np.int64)
    return out


def _sites_and_zones(rng, n, gi, gj, gw, xy, point, land_use, hood, hood_names, centres, counts):
    """Sites per level at weighted k-means centres, today's zones by graph Voronoi, and
    capacities that crowd a few schools and leave a few far under capacity today."""
    res = land_use == "residential"
    rows, zones = [], {}
    cur, years = str(CURRENT_YEAR), YEARS
    taken: dict[str, set] = {}
    for level in LEVELS:
        now = counts[f"{level}_{cur}"].astype(float)
        late = counts[f"{level}_{years[-1]}"].astype(float)
        w = np.where(res, 0.5 * now + 0.5 * late + 0.5, 0.0)
        k = N_SITES[level]
        c = _kmeans(rng, xy, w, k)
        allowed = res & (hood != 1)  # today's schools stand in the built town
        roots = _snap(c, xy, allowed)
        roots = roots[_reading_order(shapely.points(xy[roots]), band=1500.0)]
        spacing = np.sqrt(((xy[roots][:, None] - xy[roots][None]) ** 2).sum(-1))
        np.fill_diagonal(spacing, np.inf)
        nearest = spacing.min(1)
        offsets = rng.uniform(0.0, 0.15, k) * nearest
        status = np.array(["open"] * k, dtype=object)
        zone = _graph_voronoi(n, gi, gj, gw, roots, offsets)
        zone_now = np.bincount(zone, weights=now, minlength=k)
        new_root = relief = closing = None
        if level == "elementary":
            # the largest of the three schools nearest the subdivision is crowded today; of
            # the others, the one with the fewest students times the distance to its
            # nearest neighbour (small, close to another school) is under-used and closes
            near_sub = np.argsort(np.hypot(*(xy[roots] - centres[1]).T))[:3]
            relief = int(near_sub[np.argmax(zone_now[near_sub])])
            score = zone_now * nearest
            score[relief] = np.inf
            closing = int(np.argmin(score))
            status[closing] = "closing"
            in_sub = np.flatnonzero(res & (hood == 1))
            new_root = int(in_sub[np.argmin(np.hypot(*(xy[in_sub] - centres[1]).T))])
        plan_open = status != "closing"
        demand = np.array([counts[f"{level}_{y}"].sum() for y in years], float)
        sub_late = float(late[hood == 1].sum())
        cap = _capacities(
            rng, level, zone_now, relief, closing, plan_open, demand, new_root, sub_late
        )
        ids = [f"{level[0].upper()}{m + 1:02d}" for m in range(k + (new_root is not None))]
        zones[f"zone_{level}"] = np.array(ids)[zone]
        all_roots = np.r_[roots, [new_root] if new_root is not None else []].astype(int)
        all_status = list(status) + (["new"] if new_root is not None else [])
        names = _school_names(level, all_roots, hood, hood_names, xy, centres, taken)
        for m, root in enumerate(all_roots):
            rows.append(
                {
                    "site_id": ids[m],
                    "name": names[m],
                    "level": level,
                    "capacity": int(cap[m]),
                    "status": all_status[m],
                    "geometry": point[root],
                }
            )
    sites = gpd.GeoDataFrame(rows, geometry="geometry")
    return sites, zones


def _capacities(rng, level, zone_now, relief, closing, plan_open, demand, new_root, sub_late):
    """Seats per site: over-capacity and under-used schools today at set utilizations,
    the others sharing what is left so that the plan-year capacity (open and new sites)
    is CAPACITY_RATIO times the largest projected enrolment. The new site (last) is sized
    for the built-out subdivision (``sub_late`` students), at least an average school."""
    k = len(zone_now)
    order = np.argsort(-zone_now, kind="stable")
    over = [relief] if relief is not None else []
    over += [int(m) for m in order if m not in over and m != closing][: N_OVER[level] - len(over)]
    rest = [int(m) for m in rng.permutation(k) if m not in over and m != closing]
    under = rest[: N_UNDER[level]]
    normal = [m for m in range(k) if m not in over and m not in under and m != closing]
    util = np.zeros(k)
    util[over] = rng.uniform(*OVER_UTIL, len(over))
    util[under] = rng.uniform(*UNDER_UTIL, len(under))
    if closing is not None:
        util[closing] = rng.uniform(*UNDER_UTIL)
    cap = np.zeros(k)
    fixed = [*over, *under] + ([closing] if closing is not None else [])
    cap[fixed] = zone_now[fixed] / util[fixed]
    new_cap = 0.0
    if new_root is not None:
        new_cap = max(float(demand.max()) / (k - 1), 1.1 * sub_late)
    target = CAPACITY_RATIO * demand.max()
    left = target - cap[[m for m in fixed if plan_open[m]]].sum() - new_cap
    share = zone_now[normal] * rng.uniform(0.92, 1.08, len(normal))
    if normal:
        cap[normal] = left * share / share.sum()
    elif under:  # no school in between: the under-used ones take what is left
        cap[under] = (left + cap[under].sum()) * zone_now[under] / zone_now[under].sum()
    cap = np.r_[cap, [new_cap] if new_root is not None else []]
    return np.maximum(MIN_SEATS[level], np.round(cap / SEAT_STEP) * SEAT_STEP)


def _school_names(level, roots, hood, hood_names, xy, centres, taken) -> list[str]:
    """'<neighbourhood> Elementary School' etc.; a compass word tells apart two schools of
    one level in the same neighbourhood."""
    suffix = {"elementary": "Elementary School", "middle": "Middle School", "high": "High School"}[
        level
    ]
    names = []
    used = taken.setdefault(level, set())
    for r in roots:
        h = hood[r]
        name = f"{hood_names[h]} {suffix}"
        if name in used:
            dx, dy = xy[r] - centres[h]
            word = (
                ("East" if dx > 0 else "West")
                if abs(dx) > abs(dy)
                else ("North" if dy > 0 else "South")
            )
            name = f"{hood_names[h]} {word} {suffix}"
            extra = 2
            while name in used:
                name = f"{hood_names[h]} {word} {suffix} {extra}"
                extra += 1
        used.add(name)
        names.append(name)
    return names


# --------------------------------------------------------------------------- files
def project_settings(gpkg: str = "town.gpkg") -> dict:
    """The demo project file as a dict (schema: DEVELOPERS.md, "Project file")."""
    return {
        "project": {
            "name": DISTRICT_NAME,
            "current_year": CURRENT_YEAR,
            "years": list(YEARS),
            "plan_year": PLAN_YEAR,
            "levels": list(LEVELS),
            "store": "options.gpkg",
        },
        "units": {"source": gpkg, "layer": "units", "id": "unit_id", "counts": "{level}_{year}"},
        "sites": {
            "source": gpkg,
            "layer": "sites",
            "id": "site_id",
            "name": "name",
            "level": "level",
            "capacity": "capacity",
            "status": "status",
        },
        "zones": {
            "source": gpkg,
            "layer": "units",
            "id": "unit_id",
            "columns": {level: f"zone_{level}" for level in LEVELS},
        },
        "barriers": {"source": gpkg, "layer": "barriers"},
        "bridges": {"source": gpkg, "layer": "bridges"},
        "adjacency": {"contiguity": "rook"},
        "solve": {
            "max_utilization": 1.0,
            "min_utilization": 0.6,
            "stability_weight": 0.0,
            "gap": 1e-4,
            "time_limit": 60,
            "solver": "highs",
        },
    }


def write_demo(folder: str | Path, seed: int = 2027, n_units: int = 1500) -> Path:
    """Generate the town and write ``project.toml`` and ``town.gpkg`` into ``folder``.

    Both files are written atomically; returns the path of ``project.toml``.
    """
    import tomli_w

    folder = Path(folder)
    town = generate(seed=seed, n_units=n_units)
    with atomic_path(folder / "town.gpkg") as tmp:
        for layer in ("units", "sites", "barriers", "bridges"):
            getattr(town, layer).to_file(tmp, layer=layer, driver="GPKG", engine="pyogrio")
    header = (
        f"# {TOWN_NAME} is an invented town: every name and number here is made up.\n"
        f"# Generated by districting.demo (seed {seed}, {n_units} units); regenerate with\n"
        "#   python -m districting.demo data/demo\n\n"
    )
    toml_path = folder / "project.toml"
    atomic_write_text(toml_path, header + tomli_w.dumps(project_settings()))
    return toml_path


def demo_folder() -> Path:
    """The committed demo folder (``data/demo`` beside the package)."""
    return Path(__file__).resolve().parents[1] / "data" / "demo"


def copy_demo(dest: str | Path) -> Path:
    """Copy the demo project into ``dest`` unless it already holds a project.toml.

    The committed files are never written to: the CLI and the workbench work on the copy.
    Returns ``dest / "project.toml"``.
    """
    dest = Path(dest)
    target = dest / "project.toml"
    if target.exists():
        return target
    src = demo_folder()
    for name in ("town.gpkg", "project.toml"):  # the project file last: it marks a full copy
        if not (src / name).exists():
            raise FileNotFoundError(
                f"{src / name} is missing; regenerate it with: python -m districting.demo {src}"
            )
        with atomic_path(dest / name) as tmp:
            shutil.copyfile(src / name, tmp)
    return target


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(
        prog="python -m districting.demo",
        description=f"Write the invented demo town of {TOWN_NAME} (project.toml + town.gpkg).",
    )
    parser.add_argument("folder", type=Path, help="folder to write into (e.g. data/demo)")
    parser.add_argument("--seed", type=int, default=2027)
    parser.add_argument("--units", type=int, default=1500, help="about this many units")
    args = parser.parse_args(argv)
    path = write_demo(args.folder, seed=args.seed, n_units=args.units)
    print(f"wrote {path} and {path.parent / 'town.gpkg'}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
