"""A HiGHS run that was interrupted must not stop the next run of the same model, an LP run
after MIP runs gets the time it is given, and a MIP whose limit is shorter than its presolve
would take runs without presolve.

highspy 1.16 keeps the interrupt flag of its MIP callback from one run to the next: after
one interrupt (the clock guard, the user, or the bound proving the plan in hand), every
later run of that model stopped at its first check and reported "interrupted by user",
with no node searched. On the demo's elementary level this left a 60 s solve with no exact
round at all. The optimum here is checked against a second model built afresh.
"""

from __future__ import annotations

import numpy as np
import pytest

from districting import Problem
from districting.engine.flow_route import FlowRoute
from districting.engine.highs_route import HighsRoute


def tight_assignment(contiguous: bool = False) -> Problem:
    """40 units on an 8 x 5 grid, 5 sites whose capacities bind (a whole-unit assignment
    HiGHS must search: its presolve does not solve it); with zones contiguous on the grid
    and rooted at 5 units when ``contiguous``."""
    rng = np.random.default_rng(3)
    xy = np.array([(i % 8, i // 8) for i in range(40)], float) + rng.uniform(-.3, .3, (40, 2))
    roots = [0, 7, 19, 32, 39]
    cost = np.linalg.norm(xy[:, None] - xy[roots][None], axis=2) * 100
    demand = rng.integers(5, 30, 40).astype(float)
    capacity = np.full(5, demand.sum() / 5 * 1.04)
    if not contiguous:
        return Problem.from_arrays(cost, demand, capacity)
    edges = [(i, i + 1) for i in range(40) if i % 8 < 7] + [(i, i + 8) for i in range(32)]
    return Problem.from_arrays(cost, demand, capacity, edges=edges, roots=roots)


@pytest.mark.parametrize("route_of, contiguous", [
    (HighsRoute, False), (HighsRoute, True), (FlowRoute, True),
], ids=["cut route", "cut route, contiguous", "flow route"])
def test_a_run_after_an_interrupted_one_searches_again(route_of, contiguous):
    problem = tight_assignment(contiguous)
    route = route_of(problem)
    stopped = route.solve(1e-9, 30.0, None, lambda: True)
    assert stopped.status == "cancelled"
    again = route.solve(1e-9, 30.0, None, None)
    fresh = route_of(problem).solve(1e-9, 30.0, None, None)
    assert fresh.status == "optimal"
    assert again.status == "optimal"
    assert again.objective == pytest.approx(fresh.objective, rel=1e-9)


def test_an_lp_after_mip_runs_gets_its_own_time():
    # HiGHS holds an LP run against the model's run time summed over all its runs (MIP runs
    # included); the LP relaxation asked for after MIP runs must still get its 0.1 s
    problem = tight_assignment()
    route = HighsRoute(problem)
    for _ in range(500):  # MIP runs until their summed run time passes the LP's limit
        if route.h.getRunTime() >= 0.3:
            break
        assert route.solve(1e-9, 30.0, None, None).status == "optimal"
    assert route.h.getRunTime() >= 0.3
    lp = route.relaxation(0.1)
    assert lp is not None
    # the LP bound is at most the optimum (a second model built afresh)
    assert lp[0] <= HighsRoute(problem).solve(1e-9, 30.0, None, None).objective + 1e-6


def test_a_mip_whose_limit_is_shorter_than_its_presolve_runs_without_it(monkeypatch):
    # HiGHS's MIP presolve rarely looks at the clock: on Lorena & Senne's SJC4b (149,400
    # rows) an exact round given 7.0 s took 13.8 s. A time-limited MIP whose rows times
    # tuning.MIP_PRESOLVE_PER_ROW exceed its limit runs without presolve; a restricted model
    # (most columns held at 0; it presolves fast) and a run without a limit keep it.
    from contextlib import contextmanager

    from districting.engine import highs_route, tuning

    seen: list[str] = []
    inner = HighsRoute._presolve_for

    @contextmanager
    def watched(self, *args):
        with inner(self, *args):
            seen.append(self.h.getOptionValue("presolve")[1])
            yield

    monkeypatch.setattr(highs_route.HighsRoute, "_presolve_for", watched)
    problem = tight_assignment()
    route = HighsRoute(problem)
    fresh = HighsRoute(problem).solve(1e-9, None, None, None)
    rows = route.h.getNumRow()
    monkeypatch.setattr(tuning, "MIP_PRESOLVE_PER_ROW", 30.0 / rows * 2)  # 60 s expected
    short = route.solve(1e-9, 30.0, None, None)
    assert seen[-1] == "off"
    assert short.status == "optimal"
    assert short.objective == pytest.approx(fresh.objective, rel=1e-9)
    assert route.h.getOptionValue("presolve")[1] == "on"  # put back after the run
    route.solve(1e-9, 90.0, None, None)
    assert seen[-1] == "on"
    route.solve(1e-9, None, None, None)
    assert seen[-1] == "on"
    route.restrict(np.array([0]))
    route.solve(1e-9, 30.0, None, None)
    assert seen[-1] == "on"
    route.unrestrict()
