"""A HiGHS run that was interrupted must not stop the next run of the same model.

highspy 1.16 keeps the interrupt flag of its MIP callback from one run to the next: after
one interrupt (the clock guard, the user, or the bound proving the plan in hand), every
later run of that model stopped at its first check and reported "interrupted by user",
with no node searched. On the demo's elementary level this left a 60 s solve with no exact
round at all. The optimum here is checked against a second model built afresh.
"""

from __future__ import annotations

import numpy as np

from districting import Problem
from districting.engine.highs_route import HighsRoute


def tight_assignment() -> Problem:
    """40 units, 5 sites whose capacities bind (a whole-unit assignment HiGHS must search:
    its presolve does not solve it)."""
    rng = np.random.default_rng(3)
    xy = rng.uniform(0, 10, (40, 2))
    sites = rng.uniform(0, 10, (5, 2))
    cost = np.linalg.norm(xy[:, None] - sites[None], axis=2) * 100
    demand = rng.integers(5, 30, 40).astype(float)
    capacity = np.full(5, demand.sum() / 5 * 1.04)
    return Problem.from_arrays(cost, demand, capacity)


def test_a_run_after_an_interrupted_one_searches_again():
    problem = tight_assignment()
    route = HighsRoute(problem)
    stopped = route.solve(1e-9, 30.0, None, cancel=lambda: True)
    assert stopped.status == "cancelled"
    again = route.solve(1e-9, 30.0, None, cancel=None)
    fresh = HighsRoute(problem).solve(1e-9, 30.0, None, cancel=None)
    assert fresh.status == "optimal"
    assert again.status == "optimal"
    assert again.objective == fresh.objective
