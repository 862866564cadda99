"""Large-neighbourhood search: sub-problems map back exactly; plans stay valid.

Independent checks: networkx for connectivity, loads recomputed with numpy, and the
brute-force optimum of tests/test_contiguity.py on a town small enough to enumerate.
"""

from __future__ import annotations

import networkx as nx
import numpy as np
import pytest
from plan_check import assert_plan_valid
from test_connectivity import brute_force, tiny_town

from districting import Problem, solve
from districting.engine import neighbourhood as nh
from districting.engine.connectivity import UnitGraph
from districting.engine.repair import make_valid
from districting.engine.session import exact_subsolve


def grid(w: int, h: int):
    xy = np.array([(x, y) for y in range(h) for x in range(w)], float)
    edges = [(y * w + x, y * w + x + 1) for y in range(h) for x in range(w - 1)]
    edges += [(y * w + x, (y + 1) * w + x) for y in range(h - 1) for x in range(w)]
    return xy, edges


def town(seed: int, max_moved=None, stability=0.0):
    """10 x 8 grid, 6 schools, two years, units without students, capacity that binds."""
    rng = np.random.default_rng(seed)
    xy, edges = grid(10, 8)
    n = len(xy)
    roots = rng.choice(n, 6, replace=False)
    cost = np.hypot(xy[:, None, 0] - xy[roots][None, :, 0],
                    xy[:, None, 1] - xy[roots][None, :, 1]) + 1.0
    d = rng.integers(1, 8, size=(2, n)).astype(float)
    d[:, rng.choice(n, 10, replace=False)] = 0
    cap = np.full(6, d.sum(axis=1).max() / 6 * 1.25)
    current = np.argmin(cost, axis=1)
    prob = Problem.from_arrays(cost, d, capacity=cap, edges=edges, roots=roots,
                               min_util=0.4, current=current, stability_weight=stability,
                               max_moved=max_moved)
    return prob, edges


def assert_valid(prob, edges, a):
    assert_plan_valid(prob, a)  # every rule, by the independent checker
    g = nx.Graph(edges)
    g.add_nodes_from(range(prob.n_units))
    for j in range(prob.n_sites):
        members = np.flatnonzero(a == j).tolist()
        assert int(prob.roots[j]) in members
        assert nx.is_connected(g.subgraph(members))
    load = np.stack([np.bincount(a, weights=r, minlength=prob.n_sites) for r in prob.demand])
    assert (load <= prob.capacity + 1e-9).all()
    assert (load >= prob.min_util * prob.capacity - 1e-9).all()


def stripes(prob) -> np.ndarray:
    """A poor start: each unit to the school nearest in the x direction only."""
    x = np.arange(prob.n_units) % 10
    a = np.argmin(np.abs(x[:, None] - x[prob.roots][None, :]), axis=1)
    a[prob.roots] = np.arange(prob.n_sites)
    return a


def cost_of(prob, a) -> float:
    return float(prob.weighted_cost[np.arange(prob.n_units), a].sum())


def test_subproblem_holds_the_zones_of_its_sites_with_the_same_loads():
    prob, _ = town(0)
    g = UnitGraph.of(prob)
    a = make_valid(prob, g, prob.current)
    assert a is not None
    sites = np.array([1, 3, 4])
    sub, units = nh.subproblem(prob, a, sites)
    assert set(units.tolist()) == set(np.flatnonzero(np.isin(a, sites)).tolist())
    smap = {int(s): k for k, s in enumerate(sites)}
    a_sub = np.array([smap[int(j)] for j in a[units]])
    assert_plan_valid(sub, a_sub)
    load = np.stack([np.bincount(a_sub, weights=r, minlength=3) for r in sub.demand])
    full = np.stack([np.bincount(a, weights=r, minlength=6) for r in prob.demand])
    assert np.allclose(load, full[:, sites])
    # roots map to the units that hold the sites
    assert list(units[sub.roots]) == list(prob.roots[sites])


def test_subproblem_keeps_walk_zones_the_transport_charge_and_the_transport_limit():
    prob, _ = town(0)
    walk = prob.cost <= 3.5  # within 3.5 grid steps (less the 1.0 offset) of the school
    prob = prob.replace(walk=walk, transport_weight=2.0)
    a = make_valid(prob, UnitGraph.of(prob), prob.current)
    d0 = prob.demand[0]
    far = ~walk[np.arange(prob.n_units), a]
    prob = prob.replace(max_transported=float(d0[far].sum()) + 3)
    sites = np.array([0, 2, 5])
    sub, units = nh.subproblem(prob, a, sites)
    # the same charge per pair: walking distance and transport charge came along
    assert np.allclose(sub.weighted_cost, prob.weighted_cost[np.ix_(units, sites)])
    # the limit left for the neighbourhood: the full limit less the students carried
    # outside it, so the neighbourhood's own carried students plus 3 spare
    inside = np.isin(a, sites)
    assert sub.max_transported == pytest.approx(float(d0[far & inside].sum()) + 3)


@pytest.mark.parametrize("seed", range(3))
def test_reoptimise_never_raises_the_cost_and_keeps_every_rule(seed):
    prob, edges = town(seed, stability=0.5)
    g = UnitGraph.of(prob)
    a = make_valid(prob, g, stripes(prob))
    assert a is not None
    b = nh.reoptimise(prob, g, a, exact_subsolve)
    assert_valid(prob, edges, b)
    assert cost_of(prob, b) < cost_of(prob, a)  # local search alone left room
    # a bound proven by the exact engine is a lower bound for any plan the search returns
    exact = solve(prob, gap=1e-9, time_limit=5)
    assert cost_of(prob, b) >= exact.bound - 1e-6


def test_reoptimise_keeps_the_moved_students_limit():
    prob, edges = town(1)
    prob = prob.replace(current=stripes(prob))  # today's zones are poor: better plans move many
    g = UnitGraph.of(prob)
    a = make_valid(prob, g, prob.current)
    assert a is not None
    d0 = prob.demand[0]
    limit = float(d0[a != prob.current].sum()) + 5
    free = nh.reoptimise(prob, g, a, exact_subsolve)
    assert float(d0[free != prob.current].sum()) > limit  # the limit binds
    prob = prob.replace(max_moved=limit)
    b = nh.reoptimise(prob, g, a, exact_subsolve)
    assert float(d0[b != prob.current].sum()) <= limit + 1e-9
    assert cost_of(prob, b) < cost_of(prob, a)
    assert_valid(prob, edges, b)


@pytest.mark.parametrize("seed", range(2))
def test_one_neighbourhood_over_the_whole_town_reaches_the_brute_force_optimum(seed):
    # 4 x 3 grid, 3 sites: a neighbourhood of 3 zones is the whole problem, so the search
    # must end at the optimum found by enumerating all 3^12 assignments
    prob, edges, xy = tiny_town(seed)
    roots = prob.roots
    g = UnitGraph.of(prob)
    hops = np.abs(xy[:, None, :] - xy[roots][None, :, :]).sum(axis=2)  # grid distance
    a = make_valid(prob, g, np.argmin(hops, axis=1))  # compact zones, not cheap ones
    assert a is not None
    b = nh.reoptimise(prob, g, a, exact_subsolve, sizes=(3,), gap=1e-9)
    assert cost_of(prob, b) < cost_of(prob, a)
    assert cost_of(prob, b) == pytest.approx(brute_force(prob, edges))
