"""Every projected year counts: caps, floors, out-of-band flags and pre-checks, each on a
hand-worked case whose binding year is not the first (the plan year is demand row 0)."""

from __future__ import annotations

import numpy as np
import pytest

from districting import Problem, solve
from districting.engine.diagnose import explain
from districting.engine.precheck import precheck
from districting.plan import plan_metrics

LINE = np.array([0.0, 1.0, 2.0, 3.0])  # four units on a line


def line_cost(sites):
    return np.abs(LINE[:, None] - np.asarray(sites, float)[None, :])


def test_floor_binding_only_in_the_second_year_moves_a_unit():
    # Sites at x=0 (capacity 10) and x=3 (capacity 4, floor 75% = 3 students).
    # 2027 (plan year) counts 1,1,2,1: the nearest split 0,0,1,1 gives site 1 2+1 = 3, its
    # floor. 2028 counts 1,1,1,1: that split leaves site 1 with 2 < 3, so unit 1 joins it:
    # 0,1,1,1. Cost in 2027 counts: 0 + 1x2 + 2x1 + 0 = 4 (the nearest split would cost 3).
    # Site 1 then holds 1+2+1 = 4 <= 4 in 2027 and 3 in 2028.
    demand = np.array([[1, 1, 2, 1], [1, 1, 1, 1]], float)
    p = Problem.from_arrays(line_cost([0, 3]), demand, capacity=[10, 4], min_util=[0, 0.75],
                            years=(2027, 2028))
    plan = solve(p, gap=0.0)
    assert plan.status == "optimal"
    assert plan.assignment.tolist() == [0, 1, 1, 1]
    assert plan.objective == pytest.approx(4.0)
    # with the plan year alone the nearest split is the optimum
    alone = solve(Problem.from_arrays(line_cost([0, 3]), demand[:1], capacity=[10, 4],
                                      min_util=[0, 0.75]), gap=0.0)
    assert alone.assignment.tolist() == [0, 0, 1, 1] and alone.objective == pytest.approx(3)


def test_capacity_binding_only_in_the_third_year():
    # Site 0 (x=0) seats 3. 2027 and 2028: one student per unit, so 0,0,1,1 fits (2 <= 3).
    # 2029: unit 1 has 3 students: units 0+1 = 4 > 3, so unit 1 goes to site 1 (x=3):
    # 0,1,1,1 at cost 0 + 2 + 1 + 0 = 3 (2027 counts).
    demand = np.array([[1, 1, 1, 1], [1, 1, 1, 1], [1, 3, 1, 1]], float)
    plan = solve(Problem.from_arrays(line_cost([0, 3]), demand, capacity=[3, 10]), gap=0.0)
    assert plan.assignment.tolist() == [0, 1, 1, 1]
    assert plan.objective == pytest.approx(3.0)
    assert plan.metrics.load[2].tolist() == [1.0, 5.0]


def test_floor_in_a_later_year_on_a_connected_line():
    # The floor case above with contiguity (path 0-1-2-3, schools in units 0 and 3): the
    # same answer, 0,1,1,1, since it is connected.
    demand = np.array([[1, 1, 2, 1], [1, 1, 1, 1]], float)
    p = Problem.from_arrays(line_cost([0, 3]), demand, capacity=[10, 4], min_util=[0, 0.75],
                            edges=[(0, 1), (1, 2), (2, 3)], roots=[0, 3])
    plan = solve(p, gap=0.0)
    assert plan.status == "optimal" and plan.assignment.tolist() == [0, 1, 1, 1]


def test_out_of_band_flag_holds_when_any_year_is_out():
    # Plan 0,0,1,1. Site 0 seats 2: loads 2, 2, 3 -> over only in the third year.
    # Site 1 seats 4, floor 50% = 2: loads 2, 1.5, 2 -> under only in the second year.
    demand = np.array([[1, 1, 1, 1], [1, 1, 0.5, 1], [1, 2, 1, 1]])
    p = Problem.from_arrays(line_cost([0, 3]), demand, capacity=[2, 4], min_util=[0, 0.5])
    m = plan_metrics(p, np.array([0, 0, 1, 1]))
    assert m.out_of_band.tolist() == [True, True]
    np.testing.assert_allclose(m.load, [[2, 2], [2, 1.5], [3, 2]])
    # one school under its floor in one year and over its cap in another is flagged too:
    # site 1 seats 3, floor 50% = 1.5; loads 2, 0.5, 4 (under in the second, over in the
    # third); site 0 holds 2 each year, inside its 3 seats
    swing = np.array([[1, 1, 1, 1], [1, 1, 0.2, 0.3], [1, 1, 2, 2]])
    q = Problem.from_arrays(line_cost([0, 3]), swing, capacity=[3, 3], min_util=[0, 0.5])
    both = plan_metrics(q, np.array([0, 0, 1, 1]))
    np.testing.assert_allclose(both.load[:, 1], [2, 0.5, 4])
    assert both.out_of_band.tolist() == [False, True]
    # inside the band in every year: no flag
    ok = plan_metrics(p.replace(capacity=np.array([3.0, 3.0])), np.array([0, 0, 1, 1]))
    assert ok.out_of_band.tolist() == [False, False]


def test_precheck_seats_use_the_maximum_utilization_in_every_year():
    # Two schools of 12 seats at 90%: at most 21.6 students. 2027 has 15, 2028 has 22.
    p = Problem.from_arrays([[1, 2], [2, 1], [1, 1]], [[5, 5, 5], [8, 7, 7]],
                            capacity=[12, 12], max_util=0.9, years=(2027, 2028))
    found = [str(f) for f in precheck(p)]
    assert len(found) == 1
    # whole students: the 21.6 seats are "at most about 21", so 1 seat short is about 1
    assert "In 2028 there are 22 students" in found[0] and "at most about 21 " in found[0]
    # at 100% the same schools seat 24: nothing to report
    assert precheck(p.replace(max_util=np.ones(2))) == []


def test_precheck_floor_in_a_later_year():
    # Birch may take only U1; its floor is 50% of 20 = 10 seats. U1 has 11 students in
    # 2027 (enough) and 6 in 2028 (not).
    forb = np.array([[False, True], [False, False], [False, True]])
    p = Problem.from_arrays([[1, 2], [2, 1], [1, 2]], [[5, 11, 5], [5, 6, 5]],
                            capacity=[30, 20], min_util=0.5, forbidden=forb,
                            years=(2027, 2028), site_names=["Aspen", "Birch"])
    found = [str(f) for f in precheck(p)]
    assert len(found) == 1
    assert "Birch cannot reach its minimum utilization in 2028" in found[0]
    assert "6 students, below its floor of 10" in found[0]


def test_explain_names_the_later_year_of_a_floor_conflict():
    # Aspen (x=0) and Birch (x=3) seat 4 each, floor 75% = 3. 2027: 6 students, 3 each
    # fits. 2028: unit 3 leaves (5 students): one school must fall below 3, no cut-off
    # is in a pre-check (each school alone could reach 3), so explain solves elastically:
    # the smallest change is 1 student short of a floor of 3 in 2028.
    demand = np.array([[1, 2, 2, 1], [1, 2, 2, 0]], float)
    p = Problem.from_arrays(line_cost([0, 3]), demand, capacity=[4, 4], min_util=0.75,
                            years=(2027, 2028), site_names=["Aspen", "Birch"])
    assert precheck(p) == []
    plan = solve(p)
    assert plan.status == "infeasible"
    text = explain(p, time_limit=10)
    assert "minimum utilization" in text
    assert "in 2028 would be 1 student short of its floor of 3" in text
    assert "2027" not in text
