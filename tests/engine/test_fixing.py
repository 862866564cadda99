"""Reduced-cost fixing of pairs and candidate sites (engine.fixing, HighsRoute).

Checked against references written apart from the code under test:

- Osman & Christofides (1994) instances 1-20 with their published optimal plans (copied to
  tests/data with the citation): fixing against the published optimum keeps every pair
  of the published plan, closes none of its sites and opens only sites it uses, while it
  does close candidate sites on some of them (so the check can fail); the same with the LP
  the pair screen priced (instances 11-20);
- hand-made tiny instances, every plan enumerated: no plan costing at most the value fixed
  against uses a fixed pair or a closed site, or leaves out a site opened by the proof
  while it could open one more; with the model's own LP and with the screen's.
"""

from __future__ import annotations

import numpy as np
import pytest
from test_pair_screen import brute_force, published

from districting import Problem
from districting.engine.fixing import fixable
from districting.engine.greedy import median_start
from districting.engine.highs_route import HighsRoute
from districting.engine.pair_screen import screen_pairs


def site_bounds(route: HighsRoute) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(candidate sites, closed by the proof, opened by the proof)."""
    sites = np.flatnonzero(route.ycol >= 0)
    y = route.ycol[sites]
    return sites, route.upper[y] < 0.5, route.lower0[y] > 0.5


def test_fixing_against_the_published_optima_keeps_the_published_plans():
    closed_any = 0
    for k in range(1, 21):
        problem, _dist, dem, opt, pub = published(k)
        route = HighsRoute(problem)
        assert route.relaxation() is not None
        route.fix_by_reduced_cost(opt)
        n = len(dem)
        assert (route.upper[route.column(np.arange(n), pub)] == 1).all(), k
        sites, closed, opened = site_bounds(route)
        used = np.isin(sites, pub)
        assert not (closed & used).any(), k
        assert used[opened].all(), k
        closed_any += int(closed.sum())
    assert closed_any > 0  # the proof closes sites: the checks above can fail


def test_the_screens_site_costs_keep_the_published_plans():
    # the same check with the LP priced by the pair screen and adopted by the model (the
    # sites' reduced costs at the screen's multipliers), Osman & Christofides 11-20
    closed_any = 0
    for k in range(11, 21):
        problem, _dist, _dem, opt, pub = published(k)
        route = lp_route(problem, True, median_start(problem, None, 0.5))
        route.fix_by_reduced_cost(opt)
        sites, closed, opened = site_bounds(route)
        used = np.isin(sites, pub)
        assert not (closed & used).any(), k
        assert used[opened].all(), k
        closed_any += int(closed.sum())
    assert closed_any > 0


def tiny(seed: int, clustered: bool) -> Problem:
    """A hand-made capacitated instance small enough to enumerate (7 units, p = 2): random
    points, or points around three centres (where closing a cluster's only site costs so
    much that the proof opens it)."""
    rng = np.random.default_rng(seed)
    n, m, p = 7, (4 if clustered else 5), 2
    if clustered:
        centres = rng.uniform(0, 30, (3, 2))
        xy = centres[rng.integers(0, 3, n)] + rng.normal(0, 1.0, (n, 2))
    else:
        xy = rng.uniform(0, 10, (n, 2))
    sites = rng.choice(n, m, replace=False)
    dist = np.hypot(*(xy[:, None, :] - xy[None, sites, :]).transpose(2, 0, 1))
    dem = rng.integers(1, 6, (2, n)).astype(float)
    cap = np.full(m, np.ceil(dem.sum(axis=1).max() / p * (1.3 if clustered else 1.1)))
    return Problem.from_arrays(dist, dem, capacity=cap, p=p)


def lp_route(problem: Problem, priced: bool, start: np.ndarray) -> HighsRoute:
    """The model with its own LP, or with the LP the pair screen priced (from one pair per
    unit and the pairs of ``start``) adopted."""
    route = HighsRoute(problem)
    if priced:
        screen = screen_pairs(problem, None, start, np.inf, nearest=1)
        assert screen is not None
        route.adopt_relaxation(screen.bound, screen.value, screen.floor, screen.unit_duals,
                               screen.site_rc)
    else:
        assert route.relaxation() is not None
    return route


# seeds 10, 17, 23 and 30 of the clustered kind are those of the first 40 where the proof
# opens a site: the opening is checked there, the closing on the others
@pytest.mark.parametrize("priced", [False, True])
@pytest.mark.parametrize("seed,clustered", [(100 + s, False) for s in range(8)]
                         + [(s, True) for s in (10, 17, 23, 30)])
def test_no_plan_at_or_below_the_value_loses_its_pairs_or_sites(seed, clustered, priced):
    problem = tiny(seed, clustered)
    n, p = problem.n_units, problem.p
    plans = brute_force(problem)
    assert plans
    start = np.array(plans[len(plans) // 2][1])
    for ub in (plans[0][0], plans[min(3, len(plans) - 1)][0], plans[len(plans) // 4][0]):
        route = lp_route(problem, priced, start)
        route.fix_by_reduced_cost(ub)
        cand, closed, opened = site_bounds(route)
        if clustered and ub == plans[0][0]:
            assert opened.any()
        for cost, a in plans:
            if cost > ub:
                break
            a = np.array(a)
            assert (route.upper[route.column(np.arange(n), a)] == 1).all(), (ub, cost)
            used = np.isin(cand, a)
            assert not (closed & used).any(), (ub, cost)
            # a site opened by the proof is open in the model's copy of every such plan:
            # used, or free to open beside fewer than p used sites
            assert used[opened].all() or len(set(a.tolist())) < p, (ub, cost)


def test_fixable_by_hand():
    # a hand-worked LP: z = 10; column 0 at 0 with rc 3, column 1 at 1 with rc -4,
    # column 2 at 0 with rc 0.5, column 3 already fixed
    value = np.array([0.0, 1.0, 0.0, 0.0])
    rc = np.array([3.0, -4.0, 0.5, 9.0])
    free = np.array([True, True, True, False])
    zero, one = fixable(10.0, value, rc, 12.0, free)
    assert zero.tolist() == [True, False, False, False]  # 10 + 3 > 12; 10 + 0.5 is not
    assert one.tolist() == [False, True, False, False]  # 10 + 4 > 12
    zero, one = fixable(10.0, value, rc, 13.5, free)
    assert zero.tolist() == [False] * 4 and one.tolist() == [False, True, False, False]
    zero, one = fixable(10.0, value, rc, 14.0, free)  # at the value exactly: not fixed
    assert not zero.any() and not one.any()
    zero, one = fixable(10.0, value, rc, np.inf, free)
    assert not zero.any() and not one.any()
