"""Feeder rules in the engine, on a four-unit town worked by hand.

The town: units U0 - U1 - U2 - U3 in a row (each touching the next), 10 students each,
travel = the number of steps along the row (a unit costs 10 students x its steps). Two schools
of the level being solved stand in U0 and U3, each with 30 seats.

The neighbouring level's zones (held fixed): zone A = {U0, U1, U2}, zone B = {U3}.

- Without a feeder rule the cheapest plan sends U0, U1 to the school in U0 (0 + 10) and U2,
  U3 to the school in U3 (10 + 0): cost 20, and zone A is split between the two schools.
- Whole feeding (zone A feeds one school): A cannot go to the school in U3 (40 students,
  30 seats), so A goes to the school in U0 (0 + 10 + 20) and U3 stays (0): cost 30; the
  rule moves one unit, U2.
- Nesting (the schools solved are the lower level, A and B upper zones): the school in U3
  stands in B, so its zone stays inside B; U2 (in A) goes to the school in U0: the same
  plan, cost 30.
"""

from __future__ import annotations

import numpy as np
import pytest

import districting
from districting import Problem
from districting.engine.connectivity import plan_checks
from districting.engine.precheck import precheck
from districting.verify import check_plan, facts_of_problem

ZONES = np.array([0, 0, 0, 1])  # A = {U0, U1, U2}, B = {U3}


def town(rule: str = "", seats: float = 30.0, groups=ZONES) -> Problem:
    steps = np.abs(np.arange(4)[:, None] - np.array([0, 3])[None, :]).astype(float)
    return Problem.from_arrays(
        steps, np.full(4, 10.0), capacity=[seats, seats], edges=[(0, 1), (1, 2), (2, 3)],
        roots=[0, 3], unit_names=["U0", "U1", "U2", "U3"],
        site_names=["West (S0)", "East (S1)"], level="middle",
        feeder_groups=groups if rule else None, feeder_rule=rule,
        feeder_names=["Ash Elementary (A)", "Birch Elementary (B)"])


@pytest.mark.parametrize("solver", ["highs", "appsi_highs"])
def test_whole_feeding_moves_the_split_unit(solver):
    free = districting.solve(town(), solver=solver)
    assert free.objective == pytest.approx(20.0)  # worked above
    assert free.assignment.tolist() == [0, 0, 1, 1]  # zone A split
    whole = districting.solve(town("whole"), solver=solver)
    assert whole.status == "optimal"
    assert whole.assignment.tolist() == [0, 0, 0, 1]
    assert whole.objective == pytest.approx(30.0)


@pytest.mark.parametrize("solver", ["highs", "appsi_highs"])
def test_nesting_keeps_each_zone_inside_its_upper_zone(solver):
    plan = districting.solve(town("nested"), solver=solver)
    assert plan.assignment.tolist() == [0, 0, 0, 1]
    assert plan.objective == pytest.approx(30.0)


def test_engine_checks_refuse_a_split_feeder():
    assert plan_checks(town("whole"), np.array([0, 0, 1, 1])) == [
        "1 lower zones split between schools"]
    assert plan_checks(town("whole"), np.array([0, 0, 0, 1])) == []
    assert plan_checks(town("nested"), np.array([0, 0, 1, 1]))  # U2 may not join S1


def test_independent_checker_names_the_split_zone_and_the_stray_zone():
    split = check_plan(facts_of_problem(town("whole")), [0, 0, 1, 1])
    assert [f.rule for f in split] == ["feeder"]
    assert "Ash Elementary (A)" in split[0].message and "2 schools" in split[0].message
    assert check_plan(facts_of_problem(town("whole")), [0, 0, 0, 1]) == []
    # nesting: the zone of S1 (its own unit U3 in B) holds U2 of A
    stray = [f for f in check_plan(facts_of_problem(town("nested")), [0, 0, 1, 1])
             if f.rule == "nested"]
    assert len(stray) == 1 and stray[0].site == 1 and stray[0].unit == 2


def test_a_lower_zone_too_big_for_any_school_is_explained_with_the_amount():
    # zone A holds 30 students; with 25 seats per school neither takes it whole: 5 too many
    plan = districting.solve(town("whole", seats=25.0))
    assert not plan.feasible
    assert "Ash Elementary (A) has 30 students" in plan.message
    assert "5 too many" in plan.message
    assert "cannot go whole to one school" in plan.message.splitlines()[0]


def test_a_unit_whose_upper_zone_holds_no_school_is_named():
    # U1 alone in upper zone 2, where no school stands: nesting leaves it without a school
    # (and so U2, in A, is cut off from the school in U0 behind it)
    groups = np.array([0, 2, 0, 1])
    findings = precheck(town("nested", groups=groups))
    assert [f.rule for f in findings] == ["nested", "island"]
    assert "U1" in findings[0].text and "U2" in findings[1].text


def test_an_upper_zone_its_schools_cannot_seat_is_explained_with_the_amount():
    # nesting: zone A (U0-U2, 30 students) may use only the school in U0 (25 seats): 5 too
    # many; zone B (U3, 10 students) fits the school in U3
    plan = districting.solve(town("nested", seats=25.0))
    assert not plan.feasible
    lead, *causes = plan.message.splitlines()
    assert "cannot all stay inside the zones of the level above" in lead
    assert any("Ash Elementary (A) holds 30 middle students" in c and "5 too many" in c
               for c in causes)


def line_town(splits: int, rule: str = "whole", seats: float = 40.0) -> Problem:
    """Seven units U0 - ... - U6 in a row, 10 students each, schools in U0, U3 and U6 with
    40 seats each; lower zone A = U0-U5, B = U6.

    By hand: without a rule, each unit goes to its nearest school: U0, U1 -> S0; U2-U4 ->
    S1; U5, U6 -> S2 (steps 1 + 1 + 1 + 1: cost 40), and A feeds three schools (2 splits).
    With at most 1 split A feeds two schools; S0 and S1 hold their own units (U0, U3, both
    in A), so U5 goes to S1 (2 steps instead of 1): cost 50, one split left.
    """
    steps = np.abs(np.arange(7)[:, None] - np.array([0, 3, 6])[None, :]).astype(float)
    return Problem.from_arrays(
        steps, np.full(7, 10.0), capacity=[seats, seats, seats],
        edges=[(k, k + 1) for k in range(6)], roots=[0, 3, 6], level="middle",
        feeder_groups=np.array([0, 0, 0, 0, 0, 0, 1]) if rule else None, feeder_rule=rule,
        feeder_splits=splits, feeder_names=["Ash Elementary (A)", "Birch Elementary (B)"])


@pytest.mark.parametrize("solver", ["highs", "appsi_highs"])
def test_at_most_one_split_keeps_a_zone_to_two_schools(solver):
    free = districting.solve(line_town(0, rule=""), solver=solver)
    assert free.assignment.tolist() == [0, 0, 1, 1, 1, 2, 2]
    assert free.objective == pytest.approx(40.0)
    one = districting.solve(line_town(1), solver=solver)
    assert one.status == "optimal"
    assert one.assignment.tolist() == [0, 0, 1, 1, 1, 1, 2]
    assert one.objective == pytest.approx(50.0)
    # two splits allowed: the free plan stands
    assert districting.solve(line_town(2), solver=solver).objective == pytest.approx(40.0)


def test_checks_count_the_schools_a_zone_feeds_against_the_limit():
    three = np.array([0, 0, 1, 1, 1, 2, 2])
    assert plan_checks(line_town(1), three) == ["1 lower zones feed more than 2 schools"]
    assert plan_checks(line_town(2), three) == []
    (finding,) = check_plan(facts_of_problem(line_town(1)), three)
    assert finding.rule == "feeder" and "3 schools" in finding.message
    assert "at most 2 are allowed" in finding.message
    assert check_plan(facts_of_problem(line_town(2)), three) == []


def test_a_zone_too_big_for_its_allowed_schools_is_explained_with_the_amount():
    # 25 seats each (75 in all for 70 students), zone A has 60 students: with one split it
    # may use two schools, 50 seats: 10 too many
    plan = districting.solve(line_town(1, seats=25.0))
    assert not plan.feasible
    assert any("The zone of Ash Elementary (A) has 60 students" in line and "the 2 largest "
               "middle schools it may feed seat at most 50: 10 too many" in line
               for line in plan.message.splitlines())


def test_a_lock_outside_the_upper_zone_is_named_as_the_lock():
    # U2 (in A) locked to the school in U3, which stands in B: nesting keeps it out
    plan = districting.solve(town("nested").replace(locks=np.array([-1, -1, 1, -1])))
    assert not plan.feasible
    lead, *causes = plan.message.splitlines()
    assert "locked unit" in lead
    assert causes == ["- U2 is locked to East (S1), which stands outside the zone of Ash "
                      "Elementary (A) that U2 lies in, so nesting keeps it out. To fix: "
                      "remove the lock, or solve this level without nesting."]
