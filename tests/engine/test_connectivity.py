"""Contiguous zones: networkx (an independent library) checks every returned zone, and a
brute-force enumeration checks the contiguous optimum on tiny grids."""

from __future__ import annotations

import itertools

import networkx as nx
import numpy as np
import pytest

from districting import Problem, solve


def grid(w: int, h: int):
    xy = np.array([(x, y) for y in range(h) for x in range(w)], float)
    edges = [(y * w + x, y * w + x + 1) for y in range(h) for x in range(w - 1)]
    edges += [(y * w + x, (y + 1) * w + x) for y in range(h - 1) for x in range(w)]
    return xy, edges


def nx_graph(n, edges):
    g = nx.Graph()
    g.add_nodes_from(range(n))
    g.add_edges_from(edges)
    return g


def assert_zones_connected(plan, problem, edges):
    g = nx_graph(problem.n_units, edges)
    for j in np.flatnonzero(plan.open_sites):
        zone = np.flatnonzero(plan.assignment == j).tolist()
        assert problem.roots[j] in zone
        assert nx.is_connected(g.subgraph(zone)), f"zone {j} is not connected"


def random_town(seed, w=9, h=8, m=4, empty=0.5, slack=1.2):
    rng = np.random.default_rng(seed)
    xy, edges = grid(w, h)
    n = len(xy)
    roots = rng.choice(n, m, replace=False)
    cost = np.hypot(*(xy[:, None, :] - xy[roots][None, :, :]).transpose(2, 0, 1))
    d = rng.integers(1, 6, n).astype(float)
    d[rng.random(n) < empty] = 0
    d[roots] = np.maximum(d[roots], 1)
    demand = np.stack([d, np.round(d * rng.uniform(0.8, 1.3, n))])
    cap = np.full(m, demand.sum(axis=1).max() / m * slack)
    return Problem.from_arrays(cost, demand, capacity=cap, edges=edges, roots=roots), edges


@pytest.mark.parametrize("seed", range(6))
def test_zones_connected_on_random_grids_with_empty_units(seed):
    problem, edges = random_town(seed)
    plan = solve(problem, gap=1e-6)
    assert plan.status == "optimal"
    assert_zones_connected(plan, problem, edges)
    assert not plan.metrics.out_of_band.any()


def test_zones_connected_on_random_planar_graph():
    # Delaunay triangulation (scipy) of random points, sites at four points, 40% empty
    from scipy.spatial import Delaunay

    rng = np.random.default_rng(11)
    xy = rng.random((90, 2))
    tri = Delaunay(xy)
    edges = {tuple(sorted((int(s[a]), int(s[b])))) for s in tri.simplices
             for a, b in ((0, 1), (1, 2), (0, 2))}
    edges = sorted(edges)
    roots = np.array([0, 1, 2, 3])
    cost = np.hypot(*(xy[:, None, :] - xy[roots][None, :, :]).transpose(2, 0, 1))
    d = rng.integers(1, 4, 90).astype(float)
    d[rng.random(90) < 0.4] = 0
    problem = Problem.from_arrays(cost, d, capacity=d.sum() / 4 * 1.15, edges=edges,
                                  roots=roots)
    plan = solve(problem, gap=1e-6)
    assert plan.status == "optimal"
    assert_zones_connected(plan, problem, edges)


def brute_force(problem, edges):
    """Cheapest assignment meeting capacity with every zone connected (networkx)."""
    n, m = problem.n_units, problem.n_sites
    g = nx_graph(n, edges)
    best = np.inf
    wc = problem.weighted_cost
    cap = problem.max_util * problem.capacity
    for combo in itertools.product(range(m), repeat=n):
        a = np.array(combo)
        if np.any(a[problem.roots] != np.arange(m)):
            continue
        load = np.stack([np.bincount(a, weights=r, minlength=m) for r in problem.demand])
        if np.any(load > cap + 1e-9):
            continue
        if not all(nx.is_connected(g.subgraph(np.flatnonzero(a == j).tolist()))
                   for j in range(m)):
            continue
        best = min(best, wc[np.arange(n), a].sum())
    return best


def tiny_town(seed: int):
    """3x4 grid, 3 sites, costs unrelated to geometry (they force fragments), capacity
    1.3 x the mean load: small enough for :func:`brute_force`. Returns (problem, edges, xy)."""
    rng = np.random.default_rng(100 + seed)
    xy, edges = grid(4, 3)
    n = len(xy)
    roots = rng.choice(n, 3, replace=False)
    cost = rng.uniform(1, 10, (n, 3))
    d = rng.integers(0, 4, n).astype(float)
    d[roots] = 1
    cap = np.full(3, d.sum() / 3 * 1.3)
    return Problem.from_arrays(cost, d, capacity=cap, edges=edges, roots=roots), edges, xy


@pytest.mark.parametrize("seed", range(4))
def test_contiguous_optimum_equals_brute_force(seed):
    # every one of 3^12 assignments is checked
    problem, edges, _ = tiny_town(seed)
    plan = solve(problem, gap=0.0)
    expected = brute_force(problem, edges)
    assert plan.status == "optimal"
    assert plan.objective == pytest.approx(expected)
    assert_zones_connected(plan, problem, edges)


def test_contiguity_costs_more_than_free_assignment_when_costs_scatter():
    # 3x3 grid, 2 sites at opposite corners; unit 4 (centre) is cheap at site 1 only if the
    # zone can reach it. Brute force with and without the connectivity rule.
    xy, edges = grid(3, 3)
    cost = np.array([[0, 9], [1, 9], [1, 9], [1, 9], [9, 0.5], [9, 9],
                     [9, 9], [9, 9], [9, 0]], float)
    cost[5:8, 1] = [1, 1, 1]
    d = np.ones(9)
    problem = Problem.from_arrays(cost, d, capacity=[9, 9], edges=edges, roots=[0, 8])
    plan = solve(problem, gap=0.0)
    assert plan.objective == pytest.approx(brute_force(problem, edges))
    assert_zones_connected(plan, problem, edges)
