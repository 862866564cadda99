"""Seeded synthetic towns for the engine benchmark (invented data, no real place).

:func:`synthetic_town` scatters planning units over an irregular region with denser
neighbourhoods, joins them by Delaunay adjacency (very long edges dropped, a spanning tree
kept so the town stays connected), leaves a share of units empty (parks, industry), puts
school sites at some units and sizes capacities so they bind: total capacity is 1.1-1.25x
the students of the busiest year and is spread unevenly, so some schools are overcrowded
under nearest-school assignment. Students come in 3 demand rows (plan year and two
projections) with growth on one side of town and decline on the other.

:func:`scattered_grid` is a small grid town whose travel is distance plus a random amount
per pair, so zones want to break up, with many units without students.
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp
from scipy.cluster.vq import kmeans2
from scipy.sparse.csgraph import minimum_spanning_tree
from scipy.spatial import Delaunay, cKDTree

from districting import Problem

__all__ = ["synthetic_town", "scattered_grid"]


def _region_points(rng: np.random.Generator, n: int, radius: float) -> np.ndarray:
    """n points in a wobbly blob: a uniform background plus 4-9 dense neighbourhoods."""
    phase = rng.uniform(0, 2 * np.pi, 3)

    def inside(p: np.ndarray) -> np.ndarray:
        theta = np.arctan2(p[:, 1], p[:, 0])
        edge = radius * (1 + 0.22 * np.sin(3 * theta + phase[0])
                         + 0.12 * np.cos(5 * theta + phase[1])
                         + 0.06 * np.sin(9 * theta + phase[2]))
        return np.hypot(p[:, 0], p[:, 1]) < edge

    n_clusters = int(rng.integers(4, 10))
    centres = rng.uniform(-0.6, 0.6, (n_clusters, 2)) * radius
    spread = rng.uniform(0.08, 0.2, n_clusters) * radius
    pts = np.empty((0, 2))
    while len(pts) < n:
        k = 2 * n
        dense = rng.random(k) < 0.6
        which = rng.integers(0, n_clusters, k)
        cand = np.where(dense[:, None],
                        centres[which] + rng.normal(size=(k, 2)) * spread[which, None],
                        rng.uniform(-1.4, 1.4, (k, 2)) * radius)
        pts = np.vstack([pts, cand[inside(cand)]])
    return pts[:n]


def _adjacency(pts: np.ndarray, long_factor: float = 3.0) -> np.ndarray:
    """Delaunay edges without the very long ones (> long_factor x median), tree kept."""
    tri = Delaunay(pts)
    s = tri.simplices
    e = np.vstack([s[:, [0, 1]], s[:, [1, 2]], s[:, [0, 2]]])
    e = np.unique(np.sort(e, axis=1), axis=0)
    length = np.linalg.norm(pts[e[:, 0]] - pts[e[:, 1]], axis=1)
    n = len(pts)
    graph = sp.coo_matrix((length + 1e-9, (e[:, 0], e[:, 1])), shape=(n, n))
    tree = minimum_spanning_tree(graph).tocoo()
    tree_edges = np.sort(np.column_stack([tree.row, tree.col]), axis=1)
    keep = e[length <= long_factor * np.median(length)]
    return np.unique(np.vstack([keep, tree_edges]), axis=0)


def synthetic_town(
    n_units: int,
    n_sites: int,
    seed: int,
    empty_share: float = 0.3,
    *,
    min_util: float = 0.0,
    stability_weight: float = 0.0,
) -> tuple[Problem, dict]:
    """A seeded random town as a contiguous capacitated :class:`~districting.Problem`.

    Costs are straight-line metres per student (the region spans about 300 m per unit of
    sqrt(n_units)); ``current`` is the nearest site (today's zones). Returns the problem and
    an ``info`` dict (students per year, capacity ratio, schools overcrowded today...).
    """
    rng = np.random.default_rng(seed)
    radius = 150.0 * np.sqrt(n_units)
    pts = _region_points(rng, n_units, radius)
    edges = _adjacency(pts)

    # Empty units: more likely away from the dense neighbourhoods.
    tree = cKDTree(pts)
    crowd = tree.query(pts, k=min(8, n_units))[0][:, -1]
    weight = crowd / crowd.sum()
    n_empty = int(round(empty_share * n_units))
    empty = np.zeros(n_units, bool)
    empty[rng.choice(n_units, n_empty, replace=False, p=weight)] = True
    d0 = np.where(empty, 0.0, np.round(rng.lognormal(np.log(20.0), 0.6, n_units)))

    # Growth to the east, decline to the west, with noise (per year).
    rate = 0.04 * pts[:, 0] / radius + rng.normal(0, 0.015, n_units)
    demand = np.vstack([np.round(d0 * (1 + rate) ** t) for t in range(3)])

    # Sites: k-means centres of the populated units, snapped to distinct units.
    populated = np.flatnonzero(d0 > 0)
    centres, _ = kmeans2(pts[populated], n_sites, seed=int(rng.integers(1 << 31)),
                         minit="++")
    sites = []
    for c in centres:
        for k in tree.query(c, k=min(n_units, n_sites + 5))[1]:
            if k not in sites:
                sites.append(int(k))
                break
    sites = np.array(sites[:n_sites])
    dist = np.linalg.norm(pts[:, None, :] - pts[sites][None, :, :], axis=2)
    nearest = np.argmin(dist, axis=1)

    # Capacity ~1.1-1.25x the busiest year, spread unevenly (some schools overcrowded today).
    peak = demand.sum(axis=1).max()
    ratio = rng.uniform(1.1, 1.25)
    today = np.bincount(nearest, weights=demand.max(axis=0), minlength=n_sites)
    share = np.sqrt(today + 1) * rng.uniform(0.6, 1.4, n_sites)
    capacity = np.maximum(25.0, np.round(share / share.sum() * ratio * peak / 25.0) * 25.0)
    problem = Problem.from_arrays(
        dist, demand, capacity, edges=edges, roots=sites, current=nearest,
        min_util=min_util, stability_weight=stability_weight, years=(2027, 2028, 2029),
        level="elementary",
    )
    load = np.stack([np.bincount(nearest, weights=row, minlength=n_sites) for row in demand])
    info = {
        "seed": seed,
        "units": n_units,
        "sites": n_sites,
        "edges": len(edges),
        "empty_share": float(empty.mean()),
        "students": demand.sum(axis=1).tolist(),
        "capacity_ratio": float(capacity.sum() / peak),
        "overcrowded_today": int((load > capacity).any(axis=0).sum()),
    }
    return problem, info


def scattered_grid(w: int, h: int, m: int, empty: float, seed: int) -> Problem:
    """A w x h grid (rook adjacency), ``m`` schools at random units, a share ``empty`` of
    units without students (1-3 students elsewhere), travel = grid distance to the school
    plus a uniform 0-4 per pair, capacity 1.25 x the mean load."""
    rng = np.random.default_rng(900 + seed)
    xy = np.array([(x, y) for y in range(h) for x in range(w)], float)
    edges = [(y * w + x, y * w + x + 1) for y in range(h) for x in range(w - 1)]
    edges += [(y * w + x, (y + 1) * w + x) for y in range(h - 1) for x in range(w)]
    n = len(xy)
    roots = rng.choice(n, m, replace=False)
    near = np.hypot(*(xy[:, None, :] - xy[roots][None, :, :]).transpose(2, 0, 1))
    cost = near + rng.uniform(0, 4, (n, m))
    d = rng.integers(1, 4, n).astype(float)
    d[rng.random(n) < empty] = 0
    d[roots] = 1
    cap = np.full(m, d.sum() / m * 1.25)
    return Problem.from_arrays(cost, d, capacity=cap, edges=edges, roots=roots)
