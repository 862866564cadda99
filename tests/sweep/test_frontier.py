"""The frontier equals a brute-force non-dominated filter written here on its own: option
a dominates b when a is no worse on both figures and better on one (the usual definition
of Pareto dominance, stated here from memory)."""

from __future__ import annotations

import math

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from districting.sweep.frontier import non_dominated


def brute_force(points: list[tuple[float, float]]) -> list[bool]:
    def dominates(a, b) -> bool:
        return a[0] <= b[0] and a[1] <= b[1] and (a[0] < b[0] or a[1] < b[1])

    ok = [math.isfinite(p[0]) and math.isfinite(p[1]) for p in points]
    return [ok[i] and not any(ok[j] and dominates(points[j], points[i])
                              for j in range(len(points)) if j != i)
            for i in range(len(points))]


# Small integers make ties (equal moves, equal travel, equal points) common; nan is a
# combination without a plan.
coordinate = st.one_of(st.integers(0, 6).map(float), st.just(float("nan")))


@settings(max_examples=300, deadline=None)
@given(st.lists(st.tuples(coordinate, coordinate), max_size=14))
def test_frontier_equals_brute_force(points):
    x = [p[0] for p in points]
    y = [p[1] for p in points]
    assert non_dominated(x, y).tolist() == brute_force(points)


def test_hand_worked_case():
    # (moves, km): (0, 3) and (10, 1) trade off; (10, 2) is beaten by (10, 1); (5, 3) by
    # (0, 3); two equal points (20, 0.5) both stay; the nan point has no plan.
    x = [0, 10, 10, 5, 20, 20, np.nan]
    y = [3, 1, 2, 3, 0.5, 0.5, 1]
    assert non_dominated(x, y).tolist() == [True, True, False, False, True, True, False]
