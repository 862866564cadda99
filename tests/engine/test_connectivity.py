"""Contiguous zones: networkx (an independent library) checks every returned zone, and a
brute-force enumeration checks the contiguous optimum on tiny grids."""

from __future__ import annotations

import itertools

import networkx as nx
import numpy as np
import pytest

from districting import Problem, solve
from districting.engine import connectivity as cg
from districting.engine import cuts as cutting
from districting.engine import repair


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


def test_separator_separates_fragment_from_root():
    # a zone split in two: the separator must cut every path (networkx node connectivity)
    xy, edges = grid(5, 5)
    n = 25
    problem = Problem.from_arrays(np.ones((n, 2)), np.ones(n), edges=edges, roots=[0, 24])
    a = np.ones(n, np.int64)
    a[[0, 1, 5]] = 0
    a[[18, 19]] = 0  # fragment of zone 0 near the far corner
    graph = cg.UnitGraph.of(problem)
    frags = cg.fragments(problem, graph, a)
    assert [sorted(f.tolist()) for f in frags] == [[18, 19]]
    cuts = cutting.separator_cuts(problem, graph, a)
    # the fragment's own separator, then the smallest one (here the root's two neighbours)
    assert len(cuts) == 2
    for cut in cuts:
        g = nx_graph(n, edges)
        g.remove_nodes_from(cut.separator.tolist())
        assert not nx.has_path(g, 18, 0)
    sep = set(cuts[0].separator.tolist())
    # minimal: putting any one unit back reconnects
    for s in sep:
        h = nx_graph(n, edges)
        h.remove_nodes_from(sep - {s})
        assert nx.has_path(h, 18, 0)
    # minimum: as small as networkx's minimum node cut (independent library; Menger)
    g = nx_graph(n, edges)
    g.add_edges_from([("piece", 18), ("piece", 19)])
    assert len(cuts[1].separator) == len(nx.minimum_node_cut(g, "piece", 0))
    assert sorted(cuts[1].separator.tolist()) == [1, 5]


def test_reassign_empty_keeps_student_units_and_connects():
    # two students of zone 0 joined to their root only through empty units the MIP gave
    # to zone 1: handing the empty units out again connects zone 0 at no cost
    xy, edges = grid(5, 1)
    d = np.array([1, 0, 0, 1, 1], float)
    problem = Problem.from_arrays(np.zeros((5, 2)), d, edges=edges, roots=[0, 4])
    a = np.array([0, 1, 1, 0, 1])
    graph = cg.UnitGraph.of(problem)
    b, detached = repair.reassign_empty(problem, graph, a)
    assert not detached.any()
    assert b.tolist() == [0, 0, 0, 0, 1]
    assert cg.is_contiguous(problem, graph, b)


def split_graph_min_cut(n, edges, weight, source, sink):
    """Minimum weight of a vertex set separating ``source`` from ``sink``, by networkx's
    max-flow on its own split graph (an independent construction; Menger's theorem)."""
    g = nx.DiGraph()
    for v in range(n):
        cap = np.inf if v in (source, sink) else float(weight[v])
        g.add_edge(("in", v), ("out", v), capacity=cap)
    for u, v in edges:
        g.add_edge(("out", u), ("in", v), capacity=np.inf)
        g.add_edge(("out", v), ("in", u), capacity=np.inf)
    return nx.maximum_flow_value(g, ("in", source), ("out", sink))


def test_fractional_cut_weight_matches_networkx_and_separates():
    # 5x5 grid, root of site 0 at corner 0; unit 24 (far corner) fully in zone 0 while the
    # units around it carry little of zone 0: the LP point breaks a separator inequality
    xy, edges = grid(5, 5)
    n = 25
    problem = Problem.from_arrays(np.ones((n, 2)), np.ones(n), edges=edges, roots=[0, 12])
    point = np.zeros((n, 2))
    point[:, 0] = 0.5
    point[[0, 1, 5]] = [1.0, 0.0]
    point[[24]] = [1.0, 0.0]
    point[[19, 23]] = [0.2, 0.8]
    point[:, 1] = 1.0 - point[:, 0]
    point[12] = [0.0, 1.0]
    graph = cg.UnitGraph.of(problem)
    cuts = [c for c in cutting.fractional_cuts(problem, graph, point) if c.site == 0]
    expected = split_graph_min_cut(n, edges, point[:, 0], 24, 0)
    assert expected == pytest.approx(0.4)  # its two neighbours, 0.2 each
    assert cuts, "a violated cut was not found"
    cut = next(c for c in cuts if 24 in c.units.tolist())
    assert point[cut.separator, 0].sum() == pytest.approx(expected)
    g = nx_graph(n, edges)
    g.remove_nodes_from(cut.separator.tolist())
    assert not nx.has_path(g, 24, 0)
    # a point whose every unit reaches its root through heavier units breaks no cut
    solid = np.zeros((n, 2))
    solid[:, 0] = 1.0
    solid[12] = [0.0, 1.0]
    assert not [c for c in cutting.fractional_cuts(problem, graph, solid) if c.site == 0]


@pytest.mark.parametrize("seed", range(3))
def test_fractional_cuts_hold_for_every_contiguous_plan(seed):
    # 3x3 grid, 2 sites: every cut found at random fractional points holds for each of the
    # contiguous plans, enumerated with networkx (cuts must never remove a valid plan)
    rng = np.random.default_rng(seed)
    xy, edges = grid(3, 3)
    n, roots = 9, [0, 8]
    problem = Problem.from_arrays(np.ones((n, 2)), np.ones(n), edges=edges, roots=roots)
    graph = cg.UnitGraph.of(problem)
    g = nx_graph(n, edges)
    plans = []
    for combo in itertools.product(range(2), repeat=n):
        a = np.array(combo)
        if a[0] == 0 and a[8] == 1 and all(
                nx.is_connected(g.subgraph(np.flatnonzero(a == j).tolist())) for j in (0, 1)):
            plans.append(np.eye(2)[a])
    found = 0
    for _ in range(40):
        x0 = rng.random(n)
        point = np.column_stack([x0, 1 - x0])
        point[0], point[8] = [1, 0], [0, 1]
        for cut in cutting.fractional_cuts(problem, graph, point):
            found += 1
            for x in plans:
                lhs = x[cut.units, cut.site]
                assert (lhs <= x[cut.separator, cut.site].sum() + 1e-9).all()
    assert found > 0
