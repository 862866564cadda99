"""The zone bound by column generation (engine.columns) and its pricing (engine.pricing).

Outside references: plain enumeration written here (every assignment of a tiny instance,
every subset of units for one site's pricing), and the published optima of Osman &
Christofides (1994) and Lorena & Senne (2004) (readers in test_benchmarks.py). A bound
must never exceed an optimum; where the zone LP is integral it must equal it.
"""

from __future__ import annotations

import itertools

import numpy as np
import pytest
from plan_check import assert_plan_valid
from test_benchmarks import DATA, capacitated, osman_instance, published_assignment, read_sjc

from districting import Problem
from districting.engine.columns import column_bound
from districting.engine.pricing import price_zone


# ---------------------------------------------------------------- plain enumeration
def brute_force(problem: Problem) -> tuple[float, np.ndarray | None, float]:
    """(optimum, an optimal plan, the worst valid cost) by trying every assignment; the
    rules written here from the Problem's documented fields, not from engine code."""
    n, m = problem.n_units, problem.n_sites
    d, d0 = problem.demand, problem.demand[0]
    ok = np.isfinite(problem.cost) & ~problem.forbidden & ~problem.closed_sites[None, :]
    best, best_a, worst = np.inf, None, -np.inf
    for a in itertools.product(range(m), repeat=n):
        a = np.array(a)
        if not ok[np.arange(n), a].all():
            continue
        if ((problem.locks >= 0) & (a != problem.locks)).any():
            continue
        used = np.zeros(m, bool)
        used[a] = True
        always = ~problem.closed_sites if problem.p is None else problem.open_sites
        opened = used | always
        if problem.p is not None:
            # an unused candidate without a floor may be opened empty to reach p
            floor = problem.min_util * problem.capacity if problem.capacity is not None \
                else np.zeros(m)
            spare = ~opened & ~problem.closed_sites & (floor <= 0)
            if not opened.sum() <= problem.p <= opened.sum() + spare.sum():
                continue
        if problem.capacity is not None:
            load = np.stack([np.bincount(a, weights=d[t], minlength=m)
                             for t in range(len(d))])
            hi = problem.max_util * problem.capacity
            lo = problem.min_util * problem.capacity
            if ((load > hi + 1e-9) | (load < lo - 1e-9))[:, opened].any():
                continue
        moved = (problem.current >= 0) & (a != problem.current)
        if problem.max_moved is not None and d0[moved].sum() > problem.max_moved + 1e-9:
            continue
        rides = ~problem.walk[np.arange(n), a] if problem.walk is not None else np.zeros(n, bool)
        if problem.max_transported is not None and d0[rides].sum() > problem.max_transported:
            continue
        cost = float((d0 * problem.cost[np.arange(n), a]).sum()
                     + problem.stability_weight * d0[moved].sum())
        if cost < best:
            best, best_a = cost, a
        worst = max(worst, cost)
    return best, best_a, worst


def worst_plan(problem: Problem) -> np.ndarray:
    """A valid plan of the worst cost (a start the column generation must improve on)."""
    _, _, worst = brute_force(problem)
    return next(a for a in _valid_plans(problem) if _cost(problem, a) == pytest.approx(worst))


def _valid_plans(problem):
    from districting.engine.connectivity import plan_checks

    for a in itertools.product(range(problem.n_sites), repeat=problem.n_units):
        a = np.array(a)
        if not plan_checks(problem, a):
            yield a


def _cost(problem: Problem, a: np.ndarray) -> float:
    """Plan cost recomputed from the definition: d[0, i] c[i, a_i] (+ stability charge)."""
    d0 = problem.demand[0]
    moved = (problem.current >= 0) & (a != problem.current)
    return float((d0 * problem.cost[np.arange(len(a)), a]).sum()
                 + problem.stability_weight * d0[moved].sum())


# ---------------------------------------------------------------- tiny instances
COST = np.array([[1.0, 4.0, 6.0], [2.0, 3.0, 5.0], [5.0, 1.0, 4.0], [6.0, 2.0, 2.0],
                 [4.0, 5.0, 1.0], [3.0, 6.0, 2.0], [2.0, 2.0, 3.0]])
# two demand rows: row 1 (a later year) is tighter for site 0 than row 0
DEMAND = np.array([[3.0, 2.0, 4.0, 1.0, 3.0, 2.0, 2.0],
                   [6.0, 4.0, 4.0, 1.0, 3.0, 2.0, 3.0]])

WALK = np.array([[1, 0, 0], [0, 1, 0], [0, 1, 0], [0, 0, 1], [1, 0, 0], [1, 0, 0], [0, 0, 1]],
                bool)


def tiny(case: str) -> Problem:
    kw: dict = {}
    if case == "band":  # two rows, floors, every site open
        return Problem.from_arrays(COST, DEMAND, capacity=[9.0, 8.0, 8.0], min_util=0.4)
    if case == "one_row":  # integer demand, one row (the dynamic programme), a lock
        return Problem.from_arrays(COST, DEMAND[1], capacity=[9.0, 8.0, 9.0], locks={6: 1},
                                   min_util=0.3)
    if case == "candidate":  # p = 2 of 3 candidates, one forced open
        kw = dict(p=2, open_sites=[False, False, True])
        return Problem.from_arrays(COST, DEMAND, capacity=[14.0, 13.0, 10.0], **kw)
    if case == "moved":  # a limit on students moved with today's zones
        return Problem.from_arrays(COST, DEMAND, capacity=[10.0, 10.0, 10.0],
                                   current=[2, 2, 0, 0, 1, 1, 0], max_moved=7.0,
                                   stability_weight=0.5)
    if case == "transport":  # binds: 24 without the limit, 28 with it (enumerated)
        return Problem.from_arrays(COST, DEMAND, capacity=[11.0, 11.0, 11.0], walk=WALK,
                                   max_transported=6.0)
    if case == "loose":  # capacity never binds: the zone LP is integral
        return Problem.from_arrays(COST, DEMAND, capacity=[100.0, 100.0, 100.0])
    raise KeyError(case)


CASES = ["band", "one_row", "candidate", "moved", "transport", "loose"]


@pytest.mark.parametrize("case", CASES)
def test_bound_below_the_enumerated_optimum(case):
    problem = tiny(case)
    opt, _, _ = brute_force(problem)
    assert np.isfinite(opt)
    res = column_bound(problem, start=worst_plan(problem), time_limit=20)
    assert res is not None and res.converged
    assert res.bound <= opt + 1e-6
    assert res.bound == pytest.approx(res.master_lp, rel=1e-6)
    # price-and-branch: a valid plan, its cost recomputed from the definition
    assert res.plan is not None
    assert_plan_valid(problem, res.plan)
    assert res.plan_cost == pytest.approx(_cost(problem, res.plan))
    assert res.plan_cost >= opt - 1e-6
    if case == "loose":
        assert res.bound == pytest.approx(opt)
        assert res.plan_cost == pytest.approx(opt)


@pytest.mark.parametrize("case", ["band", "candidate"])
def test_binding_rows_lift_the_bound_above_the_plain_assignment(case):
    # each unit at its cheapest site is below the optimum here (the band binds): the zone
    # bound must see the band and be higher than that, yet never above the optimum
    problem = tiny(case)
    opt, _, _ = brute_force(problem)
    cheapest = float((problem.demand[0] * problem.cost.min(axis=1)).sum())
    res = column_bound(problem, start=worst_plan(problem), time_limit=20)
    assert cheapest < opt - 1
    assert cheapest + 1e-6 < res.bound <= opt + 1e-6


def test_without_a_start_the_artificials_give_way():
    problem = tiny("band")
    opt, _, _ = brute_force(problem)
    res = column_bound(problem, start=None, time_limit=20)
    assert res.bound <= opt + 1e-6
    assert res.plan is not None and res.plan_cost >= opt - 1e-6


def test_contiguous_zones_on_a_path():
    # a path of 6 units, site roots at both ends: zones must be connected
    cost = np.array([[0.0, 5.0], [1.0, 4.0], [2.0, 3.0], [3.0, 2.0], [4.0, 1.0], [5.0, 0.0]])
    edges = [(k, k + 1) for k in range(5)]
    problem = Problem.from_arrays(cost, [2.0, 1.0, 3.0, 3.0, 1.0, 2.0], capacity=7.0,
                                  edges=edges, roots=[0, 5])
    res = column_bound(problem, start=np.array([0, 0, 0, 1, 1, 1]), time_limit=10)
    # on a path a connected zone holding an end is a prefix or a suffix: the plans are the
    # six split points, enumerated by hand (capacity 7 per zone in the one year)
    d = np.array([2.0, 1.0, 3.0, 3.0, 1.0, 2.0])
    costs = [float((d[:k] * cost[:k, 0]).sum() + (d[k:] * cost[k:, 1]).sum())
             for k in range(1, 6) if d[:k].sum() <= 7 and d[k:].sum() <= 7]
    opt = min(costs)
    assert res.bound <= opt + 1e-6
    assert res.bound >= opt - 1e-6  # the zone master is exact on a path
    assert res.plan is not None
    assert_plan_valid(problem, res.plan)


def test_rules_the_master_cannot_state_give_none():
    whole = Problem.from_arrays(COST, DEMAND, capacity=20.0, feeder_groups=[0, 0, 1, 1, 2, 2, 2],
                                feeder_rule="whole")
    assert column_bound(whole, start=None, time_limit=5) is None
    groups = np.ones((1, 2, 7))
    banded = Problem.from_arrays(COST, DEMAND, capacity=20.0, groups=groups, group_band=0.1)
    assert column_bound(banded, start=None, time_limit=5) is None


# ---------------------------------------------------------------- pricing alone
def brute_zone(problem: Problem, site: int, reduced: np.ndarray) -> float:
    """Cheapest feasible zone of ``site`` by trying every subset of units."""
    n, best = problem.n_units, np.inf
    for bits in itertools.product((0, 1), repeat=n):
        z = np.flatnonzero(bits)
        if not np.isfinite(reduced[z]).all() or (problem.locks[z] != site)[
                problem.locks[z] >= 0].any():
            continue
        if ((problem.locks == site) & (np.array(bits) == 0)).any():
            continue
        load = problem.demand[:, z].sum(axis=1)
        q = problem.capacity[site]
        if (load > problem.max_util[site] * q + 1e-9).any() or (
                load < problem.min_util[site] * q - 1e-9).any():
            continue
        best = min(best, float(reduced[z].sum()))
    return best


@pytest.mark.parametrize("case", ["band", "one_row"])
@pytest.mark.parametrize("seed", range(4))
def test_exact_pricing_finds_the_cheapest_zone(case, seed):
    problem = tiny(case)
    rng = np.random.default_rng(seed)
    for site in range(problem.n_sites):
        reduced = rng.normal(0.0, 3.0, problem.n_units)
        reduced[~problem.allowed[:, site]] = np.inf
        want = brute_zone(problem, site, reduced)
        got = price_zone(problem, None, site, reduced, exact=True, time_limit=5)
        assert got.bound <= want + 1e-9
        assert got.values[0] == pytest.approx(want)
        assert got.values[0] == pytest.approx(reduced[got.zones[0]].sum())
        quick = price_zone(problem, None, site, reduced, exact=False, time_limit=5)
        assert quick.bound == -np.inf
        for z, v in zip(quick.zones, quick.values, strict=True):  # feasible zones
            assert v >= want - 1e-9
            assert v == pytest.approx(reduced[z].sum())


# ---------------------------------------------------------------- published optima
@pytest.mark.parametrize("k", [1, 11, 20])
def test_osman_christofides_bound_below_the_optimum(k):
    # Osman & Christofides (1994) instances 1, 11, 20: published optima 713, 1006, 1005
    dist, dem, p, q, opt = osman_instance(k)
    problem = capacitated(dist, dem, p, q)
    lit = next((DATA / "orlib_pmedcap" / "solutions_lit").glob(f"solOPT.cpmp{k:02d}_*.json"))
    res = column_bound(problem, start=published_assignment(lit), time_limit=5)
    assert res.bound <= opt + 1e-6
    assert res.bound > 0.9 * opt  # far above zero: the exact passes ran
    assert res.plan is not None and res.plan_cost >= opt - 1e-6


def test_lorena_senne_sjc1_bound_below_the_optimum():
    # Lorena & Senne (2004) SJC1: optimum 17,288.99 (unrounded Euclidean)
    dist, dem, p, cap = read_sjc(DATA / "lorena_senne_sjc" / "SJC1.dat")
    problem = capacitated(dist, dem, p, cap)
    pub = published_assignment(
        DATA / "lorena_senne_sjc" / "solutions_lit" / "solOPT.SJC1_17288.json")
    res = column_bound(problem, start=pub, time_limit=5)
    assert res.bound <= 17288.99 + 1e-6
    assert res.bound > 0.9 * 17288.99
