"""The pair screen (engine.pair_screen): the LP priced from a few pairs per unit.

Checked against references written apart from it:

- its bound is the LP optimum of the capacitated p-median's strong formulation, written
  here by hand for scipy's ``linprog`` (Osman & Christofides 1994, instance 1, copied to
  tests/data with its citation) and equal to the whole model's LP in the engine's own route;
- on tiny instances, every plan found by brute-force enumeration that costs at most a
  given value uses only pairs the screen keeps for that value (the screen never removes a
  pair a good plan needs), and no plan costs less than its bound;
- a solve with the screen on reaches and proves the published optima of Osman &
  Christofides (1994) instances 1-3, and the screen keeps their published optimal plans.
"""

from __future__ import annotations

import itertools

import numpy as np
import pytest
import scipy.sparse as sp
from scipy.optimize import linprog
from test_benchmarks import DATA, capacitated, osman_instance, published_assignment

from districting import Problem
from districting.engine import screen_stage as stage_module
from districting.engine.greedy import median_start
from districting.engine.highs_route import HighsRoute
from districting.engine.pair_screen import lagrangian_bound, screen_pairs
from districting.engine.session import Session


def strong_lp(dist: np.ndarray, dem: np.ndarray, p: int, cap: float,
              floor: float = 0.0, forced: tuple[int, ...] = ()) -> float:
    """LP value of min sum d_ij x_ij, sum_j x_ij = 1, F y_j <= sum_i q_i x_ij <= Q y_j,
    x_ij <= y_j, sum_j y_j = p, 0 <= x, y <= 1 (the strong capacitated p-median
    formulation, with a floor F of students per open site), y_j = 1 for j in ``forced``."""
    n = len(dem)
    nx = n * n
    c = np.concatenate([dist.ravel(), np.zeros(n)])
    rows_eq = sp.hstack([sp.kron(sp.eye(n), np.ones((1, n))), sp.csr_matrix((n, n))])
    count = sp.hstack([sp.csr_matrix((1, nx)), np.ones((1, n))])
    capacity = sp.hstack([sp.kron(dem[None, :], sp.eye(n)), -cap * sp.eye(n)])
    floors = sp.hstack([-sp.kron(dem[None, :], sp.eye(n)), floor * sp.eye(n)])
    link = sp.hstack([sp.eye(nx), -sp.kron(np.ones((n, 1)), sp.eye(n))])
    res = linprog(c, A_ub=sp.vstack([capacity, floors, link]).tocsr(),
                  b_ub=np.zeros(2 * n + nx),
                  A_eq=sp.vstack([rows_eq, count]).tocsr(),
                  b_eq=np.concatenate([np.ones(n), [p]]),
                  bounds=[(0, 1)] * nx + [(1 if j in forced else 0, 1) for j in range(n)],
                  method="highs-ds")
    assert res.status == 0
    return float(res.fun)


def published(k: int):
    """Osman & Christofides (1994) instance k as a problem, with its distances, demand,
    published optimum and published optimal assignment."""
    dist, dem, p, q, opt = osman_instance(k)
    pub = published_assignment(next((DATA / "orlib_pmedcap" / "solutions_lit").glob(
        f"solOPT.cpmp{k:02d}_*.json")))
    return capacitated(dist, dem, p, q), dist, dem, opt, pub


def test_the_bound_is_the_lp_of_the_strong_formulation():
    # Osman & Christofides (1994) instance 1 (n=50, p=5, Q=120): the LP written by hand
    dist, dem, p, q, _ = osman_instance(1)
    problem = capacitated(dist, dem, p, q)
    plan = median_start(problem, None, 0.5)
    screen = screen_pairs(problem, None, plan, np.inf, nearest=3)
    assert screen is not None
    want = strong_lp(dist, dem, p, q)
    assert screen.bound == pytest.approx(want, rel=1e-7)
    # the engine's whole model (every pair, every linking row) gives the same LP
    assert HighsRoute(problem).relaxation()[0] == pytest.approx(want, rel=1e-7)
    # it priced: the first LP held 3 pairs per unit and the plan's, the last more
    assert screen.rounds > 1
    assert screen.columns < dist.size
    # the LP point covers every unit once
    assert np.allclose(screen.value.sum(axis=1), 1.0)


@pytest.mark.parametrize("n_forced", [0, 2])
def test_the_bound_with_a_floor_per_open_site(n_forced):
    # the same instance with every open site holding at least 60 students (half its
    # capacity), and with the sites farthest from the rest open whatever the plan (their
    # floors bind): the bound is still the hand-written LP's
    dist, dem, p, q, _ = osman_instance(1)
    forced = tuple(np.argsort(dist.mean(axis=1))[len(dem) - n_forced:].tolist())
    opened = np.isin(np.arange(len(dem)), forced)
    problem = Problem.from_arrays(dist / dem[:, None], dem, capacity=q, p=p, min_util=0.5,
                                  open_sites=opened)
    plan = median_start(problem, None, 0.5)
    screen = screen_pairs(problem, None, plan, np.inf, nearest=3)
    assert screen is not None
    want = strong_lp(dist, dem, p, q, floor=0.5 * q, forced=forced)
    assert want > strong_lp(dist, dem, p, q) + 1.0  # the floor binds
    assert screen.bound == pytest.approx(want, rel=1e-7)


def test_the_adopted_lp_fixes_no_pair_of_an_optimal_plan():
    # Osman & Christofides (1994) instance 4: the model holds the LP the screen priced;
    # fixing by reduced cost against the published optimum keeps the published optimal
    # plan's pairs (a wrong reduced cost would fix them and "prove" a worse plan)
    problem, _dist, dem, opt, pub = published(4)
    screen = screen_pairs(problem, None, median_start(problem, None, 0.5), np.inf)
    route = HighsRoute(problem)
    route.adopt_relaxation(screen.bound, screen.value, screen.floor, screen.unit_duals)
    assert route.relaxation()[0] == pytest.approx(HighsRoute(problem).relaxation()[0])
    assert route.fix_by_reduced_cost(opt) > 0
    assert (route.upper[route.column(np.arange(len(dem)), pub)] == 1).all()


def test_a_screen_stopped_early_still_bounds_and_keeps_the_optimal_pairs():
    # Osman & Christofides (1994) instance 1, pricing stopped after the first LP: the bound
    # lies below the LP optimum (hand-written LP), the floors still keep the published
    # optimal plan's pairs at its cost, and no LP point is handed on
    problem, dist, dem, opt, pub = published(1)
    screen = screen_pairs(problem, None, median_start(problem, None, 0.5), np.inf,
                          nearest=2, max_rounds=1)
    assert screen is not None and not screen.converged
    assert screen.bound < strong_lp(dist, dem, problem.p, float(problem.capacity[0])) - 1e-6
    assert screen.keep(opt)[np.arange(len(dem)), pub].all()
    assert not screen.value.any()


def test_lagrangian_bound_holds_at_any_multipliers():
    # weak duality: at random multipliers the bound stays at or below the LP optimum
    dist, dem, p, q, _ = osman_instance(1)
    problem = capacitated(dist, dem, p, q)
    from districting.engine.formulation import formulate

    f = formulate(problem)
    a, lo, hi = f.matrix()
    lp = strong_lp(dist, dem, p, q)
    rng = np.random.default_rng(3)
    for _ in range(20):
        y = rng.normal(0, 20, a.shape[0])
        lb, _rc = lagrangian_bound(f.cost, a.tocsc(), lo, hi, f.lower, f.upper, y)
        assert lb <= lp + 1e-6


def brute_force(problem: Problem) -> list[tuple[float, tuple[int, ...]]]:
    """Every plan of a tiny capacitated p-median (at most p sites used, each within its
    capacity in every demand row) with its cost."""
    n, m = problem.n_units, problem.n_sites
    plans = []
    for a in itertools.product(range(m), repeat=n):
        arr = np.array(a)
        if len(set(a)) > problem.p:
            continue
        loads = np.stack([np.bincount(arr, weights=d, minlength=m) for d in problem.demand])
        if (loads > problem.max_util * problem.capacity + 1e-9).any():
            continue
        plans.append((float(problem.weighted_cost[np.arange(n), arr].sum()), a))
    return sorted(plans)


@pytest.mark.parametrize("seed", range(6))
def test_the_screen_keeps_every_pair_a_good_plan_uses(seed):
    # hand-made tiny instances, checked by enumerating every plan
    rng = np.random.default_rng(seed)
    n, m, p = 7, 4, 2
    xy = rng.uniform(0, 10, (n, 2))
    sites = rng.choice(n, m, replace=False)
    dist = np.hypot(*(xy[:, None, :] - xy[None, sites, :]).transpose(2, 0, 1))
    dem = rng.integers(1, 6, (2, n)).astype(float)
    cap = np.full(m, np.ceil(dem.sum(axis=1).max() / p * 1.2))
    problem = Problem.from_arrays(dist, dem, capacity=cap, p=p)
    plans = brute_force(problem)
    assert plans
    start = np.array(plans[len(plans) // 2][1])
    screen = screen_pairs(problem, None, start, np.inf, nearest=1)
    assert screen is not None
    assert screen.bound <= plans[0][0] + 1e-7
    for ub in (plans[0][0], plans[min(5, len(plans) - 1)][0], plans[len(plans) // 2][0]):
        keep = screen.keep(ub)
        for cost, a in plans:
            if cost > ub:
                break
            assert keep[np.arange(n), list(a)].all(), (ub, cost, a)


@pytest.mark.parametrize("k", [1, 2, 3])
def test_a_solve_with_the_screen_proves_published_optima(monkeypatch, k):
    # Osman & Christofides (1994) instances 1-3 (n=50): with the screen on at any size, the
    # solve proves the published optimum, and the screen keeps the published optimal
    # plan's pairs at its cost
    calls = []
    real = stage_module.screen_pairs

    def spy(*args, **kw):
        calls.append(real(*args, **kw))
        return calls[-1]

    monkeypatch.setattr(stage_module, "SCREEN_MIN_PAIRS", 0)
    monkeypatch.setattr(stage_module, "screen_pairs", spy)
    problem, dist, dem, opt, pub = published(k)
    plan = Session(problem).solve(gap=1e-7, time_limit=60)
    assert plan.status == "optimal"
    assert dist[np.arange(len(dem)), plan.assignment].sum() == pytest.approx(opt)
    assert calls and calls[0] is not None
    assert calls[0].keep(opt)[np.arange(len(dem)), pub].all()


@pytest.mark.parametrize("k", [1, 2, 3])
def test_a_narrow_core_bounds_the_whole_problem_only_up_to_its_threshold(monkeypatch, k):
    # Osman & Christofides (1994) instances 1-3 from a poor start (medians and assignment
    # chosen for the longest trips): a core of the pairs at the LP bound (width 0) misses
    # pairs the optimum uses, so the core's own optimum lies above the published one; the
    # whole problem's bound must still stay at or below the published optimum
    monkeypatch.setattr(stage_module, "SCREEN_MIN_PAIRS", 0)
    monkeypatch.setattr(stage_module, "CORE_GAPS", (0.0,))
    dist, dem, p, q, opt = osman_instance(k)
    problem = capacitated(dist, dem, p, q)
    far = median_start(problem.replace(cost=problem.cost.max() - problem.cost), None, 0.2)
    far_cost = dist[np.arange(len(dem)), far].sum()
    assert far_cost > 1.5 * opt
    seen, bounds = [], []
    real = stage_module.core_plans

    def spy(st, screen, sub_solve):
        def sub(*args):
            seen.append(sub_solve(*args))
            return seen[-1]
        real(st, screen, sub)
        bounds.append(st.run.bound)  # before any later plan clips the bound it reports

    monkeypatch.setattr(stage_module, "core_plans", spy)
    plan = Session(problem).solve(gap=1e-7, time_limit=60, start=far)
    assert seen and seen[0].status == "optimal"
    assert bounds and bounds[0] <= opt + 1e-6
    assert plan.bound <= opt + 1e-6
    assert plan.status == "optimal"
    assert dist[np.arange(len(dem)), plan.assignment].sum() == pytest.approx(opt)
