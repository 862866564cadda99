"""Walk zones, transport and group bands on tiny towns worked out by hand.

Every town is a line of units 0-1-2-3-4 (each touching the next), school A standing in
unit 0 and school B in unit 4; distances are metres along the line. Each case gives the
plan the rule forces, found by listing the few contiguous plans by hand (a zone is a run of
the line: A takes units 0..k, B the rest).
"""

from __future__ import annotations

import numpy as np

from districting import Problem
from districting.engine import Session
from districting.rules import district_shares, group_shares, transported, walkers_forbidden
from districting.verify import check_plan, facts_of_problem

EDGES = [(0, 1), (1, 2), (2, 3), (3, 4)]


def line_town(positions=(0, 1000, 2000, 3000, 4000), **kw) -> Problem:
    x = np.asarray(positions, float)
    dist = np.abs(x[:, None] - np.array([x[0], x[-1]])[None, :])
    demand = kw.pop("demand", [2, 5, 2, 2, 2])
    cost = kw.pop("cost", dist)
    return Problem.from_arrays(cost, demand, np.full(2, 100.0), edges=EDGES, roots=[0, 4],
                               distance=dist, **kw)


def solve(problem: Problem) -> np.ndarray:
    plan = Session(problem).solve(0.0, 30)
    assert plan.status == "optimal"
    return plan.assignment


def test_a_unit_within_walking_distance_stays_in_that_schools_zone():
    # Today unit 1 goes to B (3 km away) though A is 1 km away; each student moved costs
    # 5,000 m, so the cheapest plan keeps today's zones: cost 5*3000 + 2*2000 + 2*1000 =
    # 21,000 against 30,000 for unit 1 moved to A. Walking distance 1,500 m: unit 1 walks to
    # A, so keeping walkers forbids it B; unit 2 (2 km from both) stays with B (moving it
    # adds 2*5000), so A = {0, 1}, B = {2, 3, 4}, cost 5*1000 + 5*5000 + 4000 + 2000 = 36,000.
    base = line_town(current=[0, 1, 1, 1, 1], stability_weight=5000.0)
    walk = base.distance <= 1500
    assert solve(base).tolist() == [0, 1, 1, 1, 1]
    keep = base.replace(forbidden=walkers_forbidden(walk, np.ones(2, bool)))
    plan = Session(keep).solve(0.0, 30)
    assert plan.status == "optimal" and plan.bound == plan.objective
    assert plan.assignment.tolist() == [0, 0, 1, 1, 1]
    assert plan.objective == 36000.0


def test_walkers_forbidden_leaves_units_that_walk_nowhere_free():
    walk = np.array([[True, False], [False, False], [True, True], [False, True]])
    got = walkers_forbidden(walk, np.array([True, True]))
    assert got.tolist() == [[False, True], [False, False], [False, False], [True, False]]
    # a candidate (not open in every plan) within walking distance forbids nothing
    assert not walkers_forbidden(walk, np.array([False, True]))[0].any()


def transport_town(cap=None) -> Problem:
    # a bus line makes B cheap for unit 1 (cost 500 m) though it lies 3 km away on foot
    dist = np.abs(np.arange(5)[:, None] * 1000.0 - np.array([0.0, 4000.0])[None, :])
    cost = dist.copy()
    cost[1, 1] = 500.0
    walk = dist <= 1500
    return line_town(cost=cost, walk=walk, max_transported=cap)


def test_a_cap_on_transported_students_pulls_the_boundary():
    # Without a cap: A = {0}, B = {1..4}: 5*500 + 2*2000 + 2*1000 = 8,500, and 7 students
    # ride (unit 1: 5, unit 2: 2; unit 2 lies 2 km from both schools and always rides).
    # With at most 6: unit 1 must go to A (A = {0, 1}, or {0, 1, 2} at the same cost
    # 5*1000 + 2*2000 + 2*1000 = 11,000), and only unit 2's 2 students ride.
    free = solve(transport_town())
    assert free.tolist() == [0, 1, 1, 1, 1]
    assert transported(transport_town(), free).sum() == 7
    capped = transport_town(cap=6)
    plan = Session(capped).solve(0.0, 30)
    assert plan.status == "optimal" and plan.bound == plan.objective  # proven by the model
    assert plan.assignment[:2].tolist() == [0, 0]
    assert plan.objective == 11000.0
    assert transported(capped, plan.assignment).sum() == 2


def group_town(band=0.0) -> Problem:
    # unit 2 sits at 1.9 km from A, 2.1 km from B; 10 students in every unit
    groups = np.array([[[3, 3, 3, 6, 7]]], float)
    return line_town(positions=(0, 1000, 1900, 3000, 4000), demand=[10] * 5, groups=groups,
                     group_band=band, group_names=["meal_support"])


def test_a_group_band_pulls_a_boundary():
    # District share 22/50 = 44 %; a band of 15 points allows 29 %..59 %.
    # Cheapest plan A = {0, 1, 2}: 9/30 = 30 % and B = {3, 4}: 13/20 = 65 % (outside).
    # A = {0, 1, 2, 3}: B = 7/10 = 70 % (outside). A = {0, 1}: 30 % and B = {2, 3, 4}:
    # 16/30 = 53.3 % (inside), costing 10 * 0.2 km more; A = {0}: 30 % and 47.5 % (inside)
    # costs 10 * 2 km more. So the band moves unit 2 from A to B.
    assert solve(group_town()).tolist() == [0, 0, 0, 1, 1]
    banded = group_town(0.15)
    plan = Session(banded).solve(0.0, 30)
    assert plan.status == "optimal" and plan.bound == plan.objective
    assert plan.assignment.tolist() == [0, 0, 1, 1, 1]
    assert plan.objective == 10 * (1000 + 2100 + 1000)
    shares = group_shares(banded, plan.assignment)[0, 0]
    np.testing.assert_allclose(shares, [6 / 20, 16 / 30])
    np.testing.assert_allclose(district_shares(banded), [[0.44]])


def test_the_independent_checker_catches_broken_walk_transport_and_group_rules():
    walkers = line_town()
    facts = facts_of_problem(walkers)
    from dataclasses import replace
    facts = replace(facts, walk=walkers.distance <= 1500, keep_walkers=True)
    rules = {f.rule: f for f in check_plan(facts, [0, 1, 1, 1, 1])}
    assert "walkers" in rules and "U" not in rules["walkers"].message
    assert rules["walkers"].unit == 1
    assert not [f for f in check_plan(facts, [0, 0, 1, 1, 1]) if f.rule == "walkers"]

    capped = facts_of_problem(transport_town(cap=6))
    found = [f for f in check_plan(capped, [0, 1, 1, 1, 1]) if f.rule == "transport"]
    assert len(found) == 1 and "7 students" in found[0].message
    assert not [f for f in check_plan(capped, [0, 0, 1, 1, 1]) if f.rule == "transport"]

    banded = facts_of_problem(group_town(0.15))
    found = [f for f in check_plan(banded, [0, 0, 0, 1, 1]) if f.rule == "group"]
    assert [(f.site, f.year) for f in found] == [(1, 0)]
    assert "65.0% meal_support" in found[0].message
    assert not check_plan(banded, [0, 0, 1, 1, 1])


def test_no_plan_names_the_transport_limit_in_whole_students():
    from districting.engine.diagnose import diagnose

    # unit 2 (2 students) lies 2 km from both schools: at least 2 students ride
    found = diagnose(transport_town(cap=1))
    assert [f.rule for f in found] == ["transport"]
    assert "at least 2 students" in found[0].text and "is 1." in found[0].text
    assert "at least 2" in found[0].fix


def test_no_plan_names_the_school_that_cannot_seat_its_walkers():
    from districting.engine.diagnose import diagnose

    # units 0 (2 students) and 1 (5) walk to A only; A seats 6: one student over
    base = line_town().replace(capacity=np.array([6.0, 100.0]))
    walk = base.distance <= 1500
    keep = base.replace(walk=walk, forbidden=walkers_forbidden(walk, np.ones(2, bool)))
    found = diagnose(keep)
    assert [f.rule for f in found] == ["walkers"]
    assert "site 0" in found[0].text and "7 students" in found[0].text
    assert "1 student over its limit of 6" in found[0].text


def test_no_plan_names_the_group_band_school_year_and_students():
    from districting.engine.diagnose import diagnose
    from districting.engine.findings import no_plan_text

    # District share 44 %, band 2 points: 42-46 %. Connected, A's zone holds at most
    # 37.5 % (A = 0..3: 15/40), so no plan (unconnected zones could meet it: the band
    # conflicts with contiguity). Least total shortfall by hand: A = {0}: 3 of 10 against
    # 4.2 (1.2 short), B = 19 of 40 against 18.4 (0.6 over): 1.8 in all; A = {0, 1}: 2.4
    # + 2.2; A = {0, 1, 2}: 3.6 + 3.8. So A needs 1.2 (about 2) more, B 0.6 (about 1) fewer.
    found = diagnose(group_town(0.02))
    assert [f.rule for f in found] == ["groups", "groups", "contiguity"]
    assert found[0].text == ("site 0 in plan year would need about 2 more meal_support "
                             "students to stay within 2 points of the district's share.")
    assert found[1].text.startswith("site 1 in plan year would need about 1 fewer")
    assert "cannot stay inside the group band" in no_plan_text(found)


def test_a_charge_per_transported_student_pulls_the_boundary():
    # 1,000 m charged per student beyond walking distance: A = {0}, B = {1..4} costs
    # 8,500 + 7 * 1,000 = 15,500; A = {0, 1} (or {0, 1, 2}) 11,000 + 2 * 1,000 = 13,000.
    charged = transport_town().replace(transport_weight=1000.0)
    plan = Session(charged).solve(0.0, 30)
    assert plan.status == "optimal" and plan.bound == plan.objective
    assert plan.assignment[:2].tolist() == [0, 0]
    assert plan.objective == 13000.0
