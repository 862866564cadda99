"""The independent plan checker (districting.verify) refuses each kind of broken plan.

Every case is a hand-made plan on a small hand-drawn town; the expected finding (rule,
school, year, unit) is read off the drawing in the comment. The CLI verb runs it on a
saved option of the demo town.
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest
from test_cli import run_cli

from districting import Problem
from districting.verify import PlanFacts, check_plan, facts_of_problem, report

# A 2 x 3 grid of units, numbered
#   0 1 2
#   3 4 5
# rook edges; schools A (site 0) stands in unit 0, B (site 1) in unit 2.
EDGES = [(0, 1), (1, 2), (3, 4), (4, 5), (0, 3), (1, 4), (2, 5)]
GOOD = [0, 0, 1, 0, 1, 1]  # A: 0,1,3 (connected); B: 2,4,5 (connected)


def facts(**changes) -> PlanFacts:
    base = dict(
        demand=np.array([[10, 10, 10, 10, 10, 10],     # plan year 2027
                         [10, 10, 10, 10, 10, 10],     # 2028
                         [10, 10, 10, 30, 10, 10]], float),  # 2029: unit 3 grows to 30
        capacity=np.array([60.0, 40.0]),
        max_util=np.array([1.0, 1.0]),
        min_util=np.array([0.5, 0.5]),
        must_open=np.array([True, True]),
        closed=np.array([False, False]),
        edges=np.array(EDGES),
        roots=np.array([0, 2]),
        years=(2027, 2028, 2029),
        unit_ids=("U0", "U1", "U2", "U3", "U4", "U5"),
        site_ids=("A", "B"),
    )
    base.update(changes)
    return PlanFacts(**base)


def rules(found) -> list[tuple]:
    return sorted((f.rule, f.site, f.year, f.unit) for f in found)


def test_a_valid_plan_has_no_findings():
    # loads A: 30/30/50 of 60 (floor 30), B: 30/30/30 of 40 (floor 20): inside every year
    assert check_plan(facts(), GOOD) == []


def test_a_zone_in_two_pieces_is_refused():
    # A takes 0, 3 and 5; 5 touches only 2 and 4 (both B): A is in two pieces, 5 cut off
    found = check_plan(facts(min_util=np.zeros(2)), [0, 1, 1, 0, 1, 0])
    assert rules(found) == [("connected", 0, None, 5)]
    assert found[0].message == "the zone of A is in 2 pieces: U5 cut off from the rest"


def test_the_piece_holding_the_school_is_the_zone_others_are_cut_off():
    # A 1 x 8 path; A stands in unit 0 and takes 0 and 2-7; unit 1 is B's (B stands in 1).
    # A's piece {0} is the smaller one, yet it holds the school: the six units 2-7 are the
    # ones cut off, named three at a time.
    f = PlanFacts(demand=np.ones((1, 8)), capacity=None, max_util=np.ones(2),
                  min_util=np.zeros(2), must_open=np.ones(2, bool), closed=np.zeros(2, bool),
                  edges=np.array([(k, k + 1) for k in range(7)]), roots=np.array([0, 1]))
    found = check_plan(f, [0, 1, 0, 0, 0, 0, 0, 0])
    assert rules(found) == [("connected", 0, None, 2)]
    assert found[0].message == ("the zone of school 0 is in 2 pieces: unit 2, unit 3, unit 4 "
                                "and 3 more cut off from the rest")
    # the same with the school at the other end (unit 7, B in unit 6)
    g = dataclasses.replace(f, roots=np.array([7, 6]))
    assert rules(check_plan(g, [0, 0, 0, 0, 0, 0, 1, 0])) == [("connected", 0, None, 0)]
    # without roots the largest piece is the zone: the smaller one is cut off
    no_roots = dataclasses.replace(f, roots=None)
    assert rules(check_plan(no_roots, [0, 1, 0, 0, 0, 0, 0, 0])) == [("connected", 0, None, 0)]
    assert rules(check_plan(no_roots, [0, 0, 1, 0, 0, 0, 0, 0])) == [("connected", 0, None, 0)]


def test_edges_in_either_direction_never_join_a_zone_through_another():
    # path 0-1-2 written as (0, 1) and (2, 1): A takes 0 and 2, B takes 1, so A is in two
    # pieces whichever way round the edges are written
    f = PlanFacts(demand=np.ones((1, 3)), capacity=None, max_util=np.ones(2),
                  min_util=np.zeros(2), must_open=np.ones(2, bool), closed=np.zeros(2, bool),
                  edges=np.array([(0, 1), (2, 1)]))
    assert rules(check_plan(f, [0, 1, 0])) == [("connected", 0, None, 2)]
    assert rules(check_plan(f, [1, 0, 1])) == [("connected", 1, None, 2)]


def test_a_zone_without_its_school_unit_is_refused():
    # unit 2 (B's own unit) goes to A: A stays connected (0,1,2,3), B holds 4,5 only
    found = check_plan(facts(min_util=np.zeros(2)), [0, 0, 0, 0, 1, 1])
    assert ("root", 1, None, 2) in rules(found)


def test_capacity_in_a_later_year_is_refused():
    # A takes 0,1,3,4: 40 students in 2027 and 2028 (limit 45 at 75% of 60), 60 in 2029
    found = check_plan(facts(max_util=np.array([0.75, 1.0]), min_util=np.zeros(2)),
                       [0, 0, 1, 0, 0, 1])
    assert rules(found) == [("capacity", 0, 2, None)]
    assert "2029" in found[0].message and "60 students" in found[0].message
    assert "limit of 45" in found[0].message


def test_a_floor_in_a_later_year_is_refused():
    # B takes 2 and 5: 10 + 14 = 24 students in 2027 and 2028, 10 + 4 = 14 in 2029; its
    # floor is 60% of 40 = 24, so only 2029 breaks it.
    d = np.array([[10, 10, 10, 10, 10, 14], [10, 10, 10, 10, 10, 14],
                  [10, 10, 10, 10, 10, 4]], float)
    found = check_plan(facts(demand=d, min_util=np.array([0.0, 0.6])), [0, 0, 1, 0, 0, 1])
    assert rules(found) == [("floor", 1, 2, None)]
    assert "2029" in found[0].message and "below its floor of 24" in found[0].message


def test_closed_school_taking_students_is_refused():
    f = facts(must_open=np.array([True, False]), closed=np.array([False, True]),
              min_util=np.zeros(2), capacity=np.array([200.0, 40.0]), edges=None)
    found = check_plan(f, GOOD)
    assert ("closed", 1, None, 2) in rules(found)
    # closing A instead: its units 0, 1 and 3 are the finding (B's are not)
    f = dataclasses.replace(f, must_open=np.array([False, True]), closed=np.array([True, False]))
    assert [r for r in rules(check_plan(f, GOOD)) if r[0] == "closed"] == [("closed", 0, None, 0)]
    assert "takes 3 unit(s)" in check_plan(f, GOOD)[0].message


def test_open_count_is_checked():
    # two candidates, one to open; the plan uses both
    f = facts(must_open=np.zeros(2, bool), open_count=1, min_util=np.zeros(2),
              capacity=np.array([80.0, 40.0]))
    assert rules(check_plan(f, GOOD)) == [("open_count", None, None, None)]
    assert check_plan(f, [0] * 6) == []  # one school open, its zone the whole grid
    # fewer open than asked is a finding too
    assert rules(check_plan(dataclasses.replace(f, open_count=2), [0] * 6)) == [
        ("open_count", None, None, None)]
    # a school with no unit of its own (-1) needs none in its zone
    g = dataclasses.replace(f, open_count=None, roots=np.array([0, -1]))
    assert check_plan(g, [0, 0, 0, 1, 1, 0]) == []


def test_open_count_may_be_met_by_a_school_opened_without_students():
    # Hand-worked, p-median semantics: p = 2 and the plan uses only A; B may open empty
    # when it has no unit of its own to hold and no floor, so the count is met. With a
    # unit of its own, or with a floor, an empty B cannot be open: one school short.
    one_zone = [0] * 6
    base = dict(must_open=np.zeros(2, bool), open_count=2, capacity=np.array([80.0, 40.0]))
    assert check_plan(facts(**base, min_util=np.zeros(2), roots=np.array([0, -1])),
                      one_zone) == []
    assert rules(check_plan(facts(**base, min_util=np.zeros(2)), one_zone)) == [
        ("open_count", None, None, None)]
    assert ("open_count", None, None, None) in rules(check_plan(
        facts(**base, min_util=np.array([0.0, 0.5]), roots=np.array([0, -1])), one_zone))


def test_a_broken_lock_is_refused():
    found = check_plan(facts(locks={4: 0}), GOOD)
    assert rules(found) == [("lock", 0, None, 4)]
    assert "U4 is locked to A" in found[0].message
    assert rules(check_plan(facts(locks={1: 1}), GOOD)) == [("lock", 1, None, 1)]


def test_a_forbidden_pair_is_refused():
    forbidden = np.zeros((6, 2), bool)
    forbidden[1, 0] = True
    found = check_plan(facts(forbidden=forbidden), GOOD)
    assert rules(found) == [("forbid", 0, None, 1)]


def test_max_distance_spares_school_units_and_locks():
    # distances as if the units stood on a line at 0..5 km; A at 0, B at 2; limit 2 km.
    x = np.arange(6.0)
    dist = np.abs(x[:, None] - np.array([0.0, 2.0])[None, :])
    f = facts(distance=dist, max_distance=2.0, min_util=np.zeros(2))
    # GOOD sends unit 3 (3 km) to A and unit 5 (3 km) to B: both too far; unit 4 is 2 km
    assert rules(check_plan(f, GOOD)) == [("distance", 0, None, 3), ("distance", 1, None, 5)]
    # a lock keeps the board's decision: unit 3 locked to A is not a distance finding
    assert rules(check_plan(dataclasses.replace(f, locks={3: 0}), GOOD)) == [
        ("distance", 1, None, 5)]


def test_max_distance_applies_to_schools_without_a_unit():
    # A school's own unit may stand far from its point (a large unit): it is never a
    # finding. A school with no unit of its own (-1) spares nobody, the last unit included.
    dist = np.array([[5.0, 1.0], [1.0, 1.0], [1.0, 5.0]])
    f = PlanFacts(demand=np.ones((1, 3)), capacity=None, max_util=np.ones(2),
                  min_util=np.zeros(2), must_open=np.ones(2, bool), closed=np.zeros(2, bool),
                  roots=np.array([0, -1]), distance=dist, max_distance=2.0)
    assert rules(check_plan(f, [0, 0, 1])) == [("distance", 1, None, 2)]
    # the same with school 1 standing in unit 2: its own unit is spared
    assert check_plan(dataclasses.replace(f, roots=np.array([0, 2])), [0, 0, 1]) == []


def test_students_moved_over_the_limit_is_refused():
    # today everyone is at A; GOOD moves units 2, 4, 5 = 30 students in the plan year
    f = facts(current=np.zeros(6, np.int64), max_moved=29.0)
    found = check_plan(f, GOOD)
    assert rules(found) == [("moved", None, 0, None)]
    assert "30 students" in found[0].message
    assert check_plan(facts(current=np.zeros(6, np.int64), max_moved=30.0), GOOD) == []
    # today unit 0 is at B and unit 2 at A: GOOD moves both (20 students)
    f = facts(current=np.array([1, 0, 0, 0, 1, 1]), max_moved=15.0)
    assert "20 students" in check_plan(f, GOOD)[0].message
    # students moved are counted in the plan year: later years' counts do not matter
    d = facts().demand.copy()
    d[1:, [2, 4, 5]] = 50.0
    assert check_plan(facts(demand=d, capacity=None, current=np.zeros(6, np.int64),
                            max_moved=30.0), GOOD) == []
    # a unit with no school today (-1, new housing) is not a student moved
    today = np.array([0, 0, -1, 0, -1, -1])
    assert check_plan(facts(current=today, max_moved=0.0), GOOD) == []


def test_report_lists_findings_or_what_was_checked():
    f = facts(current=np.zeros(6, np.int64), max_moved=29.0, distance=np.zeros((6, 2)),
              max_distance=9.0)
    text = report(check_plan(f, GOOD), f, label="option X")
    assert text == ("option X breaks 1 rule(s):\n"
                    "  - 30 students change school in 2027, above the limit of 29")
    ok = report([], dataclasses.replace(f, max_moved=30.0), label="option X")
    assert ok == ("option X is valid: every unit has an allowed school; closed schools take "
                  "nobody; locks are kept; every zone is connected and holds its school's "
                  "unit; every open school is inside its band in 2027, 2028, 2029; no trip "
                  "is longer than 9; the limit on students moved holds.")


def test_an_unassigned_unit_is_refused():
    found = check_plan(facts(), [0, 0, 1, -1, 1, 1])
    assert rules(found) == [("assigned", None, None, 3)]
    # a school number the problem does not have
    assert rules(check_plan(facts(), [0, 0, 1, 2, 1, 1])) == [("assigned", None, None, 3)]
    assert rules(check_plan(facts(), [0, 0, 1, 5, 1, 1])) == [("assigned", None, None, 3)]


def test_a_plan_of_the_wrong_length_is_refused():
    assert rules(check_plan(facts(), [0, 0, 1])) == [("assigned", None, None, None)]
    assert rules(check_plan(facts(), [0] * 7)) == [("assigned", None, None, None)]


def test_a_zone_in_three_pieces_is_refused():
    # path 0-1-2-3-4: A takes 0, 2 and 4, B takes 1 and 3 (B is in two pieces as well)
    f = PlanFacts(demand=np.ones((1, 5)), capacity=None, max_util=np.ones(2),
                  min_util=np.zeros(2), must_open=np.ones(2, bool), closed=np.zeros(2, bool),
                  edges=np.array([(k, k + 1) for k in range(4)]), roots=np.array([0, 1]))
    found = check_plan(f, [0, 1, 0, 1, 0])
    assert rules(found) == [("connected", 0, None, 2), ("connected", 1, None, 3)]
    assert found[0].message.startswith("the zone of school 0 is in 3 pieces: unit 2, unit 4")


def test_facts_of_problem_reads_forbids_from_cost_and_locks():
    # an infinite cost is a pair the plan may not use; a lock allows its own pair
    cost = np.array([[0.0, np.inf], [1.0, 1.0], [np.inf, 0.0]])
    forbidden = np.zeros((3, 2), bool)
    forbidden[0, 1] = True  # forbidden and out of reach at once: still not allowed
    p = Problem.from_arrays(cost, np.ones(3), capacity=[3, 3], edges=[(0, 1), (1, 2)],
                            roots=[0, 2], forbidden=forbidden)
    f = facts_of_problem(p)
    assert check_plan(f, [0, 0, 1]) == []
    assert rules(check_plan(f, [1, 1, 1])) == [("forbid", 1, None, 0), ("root", 0, None, 0)]
    # locks are read to any school, not only the first
    assert facts_of_problem(p.replace(locks=np.array([1, -1, -1]))).locks == {0: 1}
    # a lock allows its own pair though the cost table lacks it (the board decided)
    locked = facts_of_problem(p.replace(locks=np.array([-1, -1, 0])))
    assert rules(check_plan(locked, [0, 0, 0])) == [("root", 1, None, 2)]
    # the capacities come along: A seating 1 with 2 students is a finding
    small = facts_of_problem(p.replace(capacity=np.array([1.0, 3.0])))
    assert rules(check_plan(small, [0, 0, 1])) == [("capacity", 0, 0, None)]


# ------------------------------------------------------------------------ the CLI verb
def test_facts_of_an_option_keep_forbids_and_the_maximum_distance(tmp_path):
    # the invented grid town of tests/ui_town.py (200 m cells, schools M1-M4 in units 30,
    # 39, 100, 109); a forbid of G000 at M1 and a 1,000 m limit from the run's settings
    from ui_town import grid_inputs

    from districting.study import RunSettings, outcome_from_assignment
    from districting.verify import facts_of_outcome

    inputs = grid_inputs(tmp_path)
    rs = RunSettings(level="middle", forbids={"G000": ["M1"]}, max_distance=1000.0)
    today = inputs.current["middle"]
    f = facts_of_outcome(outcome_from_assignment(inputs, rs, today))
    assert f.max_distance == 1000.0 and f.forbidden[0, 0] and f.forbidden.sum() == 1
    found = check_plan(f, today)
    assert ("forbid", 0, None, 0) in rules(found)
    # G000 is 2 cells across and 2 up from M1's point (566 m), within the limit; today's
    # zones are vertical bands 3-4 cells wide and 10 tall, so some units lie farther
    assert ("distance", 0, None, 0) not in rules(found)
    assert any(r[0] == "distance" for r in rules(found))


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    from districting.demo import copy_demo
    from districting.intake import load_project

    toml = copy_demo(tmp_path_factory.mktemp("verify") / "demo")
    return toml, load_project(toml)


def test_verify_command_accepts_a_solved_option_and_refuses_a_broken_one(demo):
    from districting.outputs.store import save_option
    from districting.study import RunSettings, outcome_from_assignment, run

    toml, inputs = demo
    good = run(inputs, RunSettings(level="high", time_limit=60))
    save_option(inputs, good, "high-a")
    code, out, _ = run_cli("verify", str(toml), "--option", "high-a")
    assert code == 0, out
    assert "high-a" in out and "is valid" in out and "connected" in out

    # move one unit on the far edge of zone 0 into zone 1's numbering, leaving it an
    # island of zone 1 inside zone 0 (it touches no unit of zone 1)
    a = good.plan.assignment.copy()
    edges = inputs.adjacency.edges
    zone0 = np.flatnonzero(a == 0)
    inner = [i for i in zone0 if i not in set(good.problem.roots.tolist())
             and not np.any(a[edges[(edges == i).any(axis=1)].ravel()] == 1)]
    a[inner[0]] = 1
    bad = outcome_from_assignment(inputs, good.settings, a)
    save_option(inputs, bad, "high-broken")
    code, out, _ = run_cli("verify", str(toml), "--option", "high-broken")
    assert code == 1
    assert "pieces" in out and inputs.units["unit_id"].astype(str).iloc[inner[0]] in out


def test_verify_command_names_an_unknown_option(demo):
    toml, _ = demo
    code, out, err = run_cli("verify", str(toml), "--option", "nope")
    assert code != 0
    assert "nope" in out + err
