"""The town's shapes: outline, lines, units from clipped Voronoi cells, rook pairs, and the
graph helpers (graph Voronoi zones, weighted k-means)."""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely
from scipy.sparse import coo_matrix
from scipy.sparse.csgraph import dijkstra

from .constants import (
    CENTRE,
    GRID,
    HIGHWAY,
    RAIL,
    RIVER,
)


# --------------------------------------------------------------------------- geometry
def town_outline(rng: np.random.Generator, radius: float) -> shapely.Polygon:
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


def barrier_lines(rng: np.random.Generator, outline: shapely.Polygon, radius: float):
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
        pieces = split_pieces(outline, list(lines.values()))
        if shapely.area(pieces).min() >= 5e4:
            return lines, pieces
    raise ValueError("could not draw the lines across this outline; try another seed")


def split_pieces(outline: shapely.Polygon, lines: list) -> np.ndarray:
    """Faces of the outline split by the lines (``shapely.node`` + ``shapely.polygonize``)."""
    noded = shapely.node(shapely.union_all([outline.exterior, *lines]))
    faces = shapely.get_parts(shapely.polygonize(shapely.get_parts(noded)))
    keep = shapely.contains(outline, shapely.point_on_surface(faces))
    return faces[keep]


def sample_in(rng, region, n, centres=None, sigmas=None, weights=None, background=1.0):
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


def voronoi_cells(points: np.ndarray, clip: shapely.Polygon) -> np.ndarray:
    """Voronoi cells of ``points`` in point order, clipped to ``clip``."""
    extent = shapely.buffer(shapely.envelope(clip), 5000.0)
    cells = shapely.get_parts(
        shapely.voronoi_polygons(shapely.multipoints(points), extend_to=extent, ordered=True)
    )
    return shapely.intersection(cells, clip)


def units_from_cells(cells: np.ndarray, pieces: np.ndarray, min_share: float, min_area: float):
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


def reading_order(geoms: np.ndarray, band: float) -> np.ndarray:
    """Permutation sorting polygons north to south in bands, west to east within a band."""
    p = shapely.point_on_surface(geoms)
    x, y = shapely.get_x(p), shapely.get_y(p)
    return np.lexsort((x, -np.floor(y / band)))


def rook_pairs(geoms: np.ndarray, min_length: float = 0.05):
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
def csr(n: int, i: np.ndarray, j: np.ndarray, w: np.ndarray):
    return coo_matrix((np.r_[w, w], (np.r_[i, j], np.r_[j, i])), shape=(n, n)).tocsr()


def graph_voronoi(
    n: int, i: np.ndarray, j: np.ndarray, w: np.ndarray, roots: np.ndarray, offsets: np.ndarray
) -> np.ndarray:
    """Index of the nearest root for every node, distance = offset + path length.

    One Dijkstra run from a super-source joined to each root by an edge of its offset; each
    node's zone is the root its shortest path leaves the super-source by, so every zone is a
    connected subtree that holds its root (given offsets smaller than root distances).
    """
    s = n
    graph = csr(
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


def grow_region(n, i, j, seeds: np.ndarray, size: int) -> np.ndarray:
    """Bool mask of about ``size`` nodes nearest (in hops) to ``seeds``: a breadth-first blob."""
    hops = dijkstra(csr(n, i, j, np.ones(len(i))), directed=False, indices=seeds, min_only=True)
    order = np.argsort(hops, kind="stable")
    mask = np.zeros(n, bool)
    mask[order[: min(size, n)]] = True
    return mask


def weighted_kmeans(rng, xy: np.ndarray, w: np.ndarray, k: int, iters: int = 30) -> np.ndarray:
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


def snap(centres: np.ndarray, xy: np.ndarray, allowed: np.ndarray) -> np.ndarray:
    """Distinct allowed nodes nearest to each centre (greedy, in centre order)."""
    d = np.sqrt(((centres[:, None, :] - xy[None]) ** 2).sum(-1))
    d[:, ~allowed] = np.inf
    chosen = []
    for row in d:  # k is small (a school count)
        row = row.copy()
        row[chosen] = np.inf
        chosen.append(int(np.argmin(row)))
    return np.asarray(chosen)
