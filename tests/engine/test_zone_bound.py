"""The Lagrangian bound over connected zones: never above the optimum, at least the LP.

References written apart from the code under test: the optimum of a 3 x 3 town by plain
enumeration of every assignment (connectivity checked with networkx), and the assignment
LP's duals from scipy's ``linprog`` (a second solver route to the same LP).
"""

from __future__ import annotations

import itertools

import networkx as nx
import numpy as np
import pytest
from grid_town import grid_town
from scipy.optimize import linprog

from districting.engine.connectivity import UnitGraph, free_units
from districting.engine.highs_route import HighsRoute
from districting.engine.session import Session
from districting.engine.zone_bound import decomposes, zone_bound
from districting.problem import Problem

# a 3 x 3 town cut by a river between the middle and right columns, crossed only by the
# bottom row: units 0 1 2 / 3 4 5 / 6 7 8, schools in units 0, 2 and 6
EDGES = [(0, 1), (3, 4), (6, 7), (7, 8), (0, 3), (3, 6), (1, 4), (4, 7), (2, 5), (5, 8)]
ROOTS = [0, 2, 6]


def _town(river: bool = True) -> Problem:
    xy = np.array([(i % 3, i // 3) for i in range(9)], float)
    cost = np.hypot(*(xy[:, None, :] - xy[ROOTS][None, :, :]).transpose(2, 0, 1))
    if river:
        cost[1, 1] = 0.2  # unit 1 faces school 2 across the river: near, but no way across
    demand = np.array([[10, 12, 9, 11, 14, 8, 13, 10, 12],
                       [12, 10, 11, 9, 12, 10, 11, 13, 10]], float)
    return Problem.from_arrays(cost, demand, capacity=[40.0, 40.0, 40.0], edges=EDGES,
                               roots=ROOTS, min_util=0.6, max_util=1.0)


def _optimum(p: Problem) -> float:
    """Every assignment of 9 units to 3 schools, checked with numpy and networkx."""
    g = nx.Graph(EDGES)
    w = p.weighted_cost
    lo, hi = p.min_util * p.capacity, p.max_util * p.capacity
    best = np.inf
    for a in itertools.product(range(3), repeat=9):
        a = np.array(a)
        if any(a[r] != j for j, r in enumerate(ROOTS)):
            continue
        loads = np.stack([np.bincount(a, weights=p.demand[t], minlength=3)
                          for t in range(2)])
        if np.any(loads < lo - 1e-9) or np.any(loads > hi + 1e-9):
            continue
        if not all(nx.is_connected(g.subgraph(np.flatnonzero(a == j).tolist()))
                   for j in range(3)):
            continue
        best = min(best, float(w[np.arange(9), a].sum()))
    return best


def _assignment_lp(p: Problem) -> tuple[float, np.ndarray]:
    """The assignment LP with the band rows (no contiguity) by scipy: (value, unit duals)."""
    n, m = p.n_units, p.n_sites
    c = p.weighted_cost.ravel()
    a_eq = np.kron(np.eye(n), np.ones(m))
    rows, rhs = [], []
    for t in range(p.n_years):
        for j in range(m):
            row = np.zeros((n, m))
            row[:, j] = p.demand[t]
            rows += [row.ravel(), -row.ravel()]
            rhs += [p.max_util[j] * p.capacity[j], -p.min_util[j] * p.capacity[j]]
    bounds = [(0, 1)] * (n * m)
    for j, r in enumerate(ROOTS):
        bounds[r * m + j] = (1, 1)
    res = linprog(c, A_ub=np.array(rows), b_ub=rhs, A_eq=a_eq, b_eq=np.ones(n),
                  bounds=bounds, method="highs")
    assert res.status == 0
    return float(res.fun), np.asarray(res.eqlin.marginals)


def test_the_bound_never_exceeds_the_enumerated_optimum() -> None:
    p = _town()
    opt = _optimum(p)
    lp, duals = _assignment_lp(p)
    graph = UnitGraph.of(p)
    rng = np.random.default_rng(5)
    for pi in [duals, np.zeros(9), *(duals + rng.normal(0, 20, 9) for _ in range(5))]:
        found = zone_bound(p, graph, pi, time_limit=30)
        assert found.value <= opt + 1e-6
    at_lp = zone_bound(p, graph, duals, time_limit=30).value
    # at the LP's duals the bound is at least the LP (Geoffrion 1974): here the river makes
    # the LP's zones disconnected, so the bound lies strictly above it
    assert at_lp >= lp - 1e-6
    assert lp < opt - 1e-6


def test_the_bound_is_the_optimum_where_the_lps_zones_are_connected() -> None:
    """Without the near unit across the river the LP's own zones are connected: then the
    LP, the bound and the enumerated optimum coincide (so a bound raised by any amount
    would be caught here)."""
    p = _town(river=False)
    opt = _optimum(p)
    lp, duals = _assignment_lp(p)
    assert lp == pytest.approx(opt, abs=1e-9)
    assert zone_bound(p, UnitGraph.of(p), duals, time_limit=30).value == pytest.approx(
        opt, abs=1e-6)


def test_at_the_engines_cut_lp_duals_the_bound_is_at_least_that_lp() -> None:
    """A 12 x 12 grid town with 10 schools: L at the duals of the LP with root separator
    cuts is at least that LP's value (duals taken from the wrong rows would break it)."""
    rng, roots, cost, edges = grid_town(12, 10, seed=3)
    demand = rng.integers(1, 20, size=144).astype(float)
    cap = np.full(10, demand.sum() / 10 * 1.3)
    p = Problem.from_arrays(cost, demand, capacity=cap, edges=edges, roots=roots,
                            min_util=0.5, max_util=1.0)
    graph = UnitGraph.of(p)
    passable = free_units(p)
    route = HighsRoute(p, passable if passable.any() else None)
    route.relaxation()
    route.strengthen(graph, None, float("inf"), keep_share=0.0)
    z = route.strongest()[0]
    found = zone_bound(p, graph, route.unit_duals(), time_limit=30)
    assert found.value >= z - 1e-6 * abs(z)
    plan = Session(p).solve(gap=1e-4, time_limit=60)
    assert found.value <= plan.objective + 1e-6


def test_it_applies_only_where_the_rows_split_by_site() -> None:
    p = _town()
    assert decomposes(p)
    assert not decomposes(p.replace(max_moved=5.0))
    assert not decomposes(p.replace(p=2))
    assert not decomposes(p.replace(edges=None))
    assert zone_bound(p.replace(p=2), UnitGraph.of(p), np.zeros(9)) is None


@pytest.mark.parametrize("limit", [0.0, 0.05])
def test_a_pricing_cut_short_still_gives_a_valid_bound(limit: float) -> None:
    p = _town()
    _, duals = _assignment_lp(p)
    found = zone_bound(p, UnitGraph.of(p), duals, time_limit=limit)
    assert np.isfinite(found.value)
    assert found.value <= _optimum(p) + 1e-6
