"""Hand-worked cases: each small problem's answer is reasoned in its comment."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from districting import Problem, solve
from districting.engine import Session
from districting.plan import relative_gap

LINE = np.array([0.0, 1.0, 2.0, 3.0])  # four units on a line, one student each


def line_cost(sites):
    return np.abs(LINE[:, None] - np.asarray(sites, float)[None, :])


def test_lock_forces_unit_away_from_nearest():
    # sites at x=0 and x=3; unit 1 (x=1) is nearest to site 0 but locked to site 1.
    # Free optimum: 0,0,1,1 cost 0+1+1+0 = 2; with the lock: 0,1,1,1 cost 0+2+1+0 = 3.
    p = Problem.from_arrays(line_cost([0, 3]), np.ones(4), locks={1: 1})
    plan = solve(p)
    assert plan.status == "optimal"
    assert plan.assignment.tolist() == [0, 1, 1, 1]
    assert plan.objective == pytest.approx(3.0)


def test_closing_school_moves_all_its_students():
    # three sites at x=0, 1.5, 3; the middle one closes: units 1 and 2 go to their nearest
    # remaining site (x=0 for unit 1, x=3 for unit 2); cost 0+1+1+0 = 2.
    p = Problem.from_arrays(line_cost([0, 1.5, 3]), np.ones(4),
                            closed_sites=[False, True, False])
    plan = solve(p)
    assert plan.assignment.tolist() == [0, 0, 2, 2]
    assert not plan.open_sites[1]
    assert plan.objective == pytest.approx(2.0)


def test_minimum_utilization_pulls_a_boundary():
    # sites at x=0 (capacity 10) and x=3 (capacity 4, floor 75% = 3 students).
    # Nearest assignment gives site 1 only units 2 and 3 (2 students < 3), so unit 1 must
    # move too: 0,1,1,1 cost 0+2+1+0 = 3 instead of 2.
    p = Problem.from_arrays(line_cost([0, 3]), np.ones(4), capacity=[10, 4],
                            min_util=[0.0, 0.75])
    plan = solve(p)
    assert plan.assignment.tolist() == [0, 1, 1, 1]
    assert plan.objective == pytest.approx(3.0)
    assert plan.metrics.load[0, 1] >= 3


def test_capacity_in_a_later_year_binds():
    # plan year: 1 student per unit, site 0 capacity 2 holds units 0 and 1. In the second
    # year unit 1 grows to 2 students: units 0+1 = 3 > 2, so unit 1 goes to site 1 even
    # though the plan year alone would allow 0,0,1,1.
    demand = np.array([[1, 1, 1, 1], [1, 2, 1, 1]], float)
    p = Problem.from_arrays(line_cost([0, 3]), demand, capacity=[2, 10])
    plan = solve(p)
    assert plan.assignment.tolist() == [0, 1, 1, 1]
    assert plan.metrics.load[1].tolist() == [1.0, 4.0]
    # the same problem with only the plan year keeps the nearest split
    only_first = solve(Problem.from_arrays(line_cost([0, 3]), demand[0], capacity=[2, 10]))
    assert only_first.assignment.tolist() == [0, 0, 1, 1]


def test_stability_weight_keeps_unit_at_todays_school():
    # unit 2 (x=2) is today at site 0 (x=0): staying costs 2, moving to site 1 costs 1 plus
    # the stability charge 1.5 per student moved = 2.5 > 2, so it stays. With weight 0.5
    # moving costs 1.5 < 2 and it moves.
    cur = np.array([0, 0, 0, 1])
    keep = solve(Problem.from_arrays(line_cost([0, 3]), np.ones(4), current=cur,
                                     stability_weight=1.5))
    assert keep.assignment.tolist() == [0, 0, 0, 1]
    assert keep.objective == pytest.approx(0 + 1 + 2 + 0)
    move = solve(Problem.from_arrays(line_cost([0, 3]), np.ones(4), current=cur,
                                     stability_weight=0.5))
    assert move.assignment.tolist() == [0, 0, 1, 1]
    assert move.metrics.students_moved == 1


def test_max_moved_limits_changes():
    # today everyone is at site 0 (x=0); site 1 opens at x=3. Free optimum moves units 2
    # and 3 (2 students). With max_moved=1 only the unit that saves most moves: unit 3
    # (saves 3) -> 0,0,0,1 cost 0+1+2+0 = 3.
    cur = np.zeros(4, np.int64)
    p = Problem.from_arrays(line_cost([0, 3]), np.ones(4), current=cur, max_moved=1)
    plan = solve(p)
    assert plan.assignment.tolist() == [0, 0, 0, 1]
    assert plan.metrics.students_moved <= 1
    assert plan.objective == pytest.approx(3.0)


def test_time_limit_returns_best_plan_with_its_gap():
    # Osman & Christofides (1994) instance 8 (OR-Library pmedcap1) needs tens of seconds to
    # prove; with a 1 s limit the engine must still hand back a valid plan and its gap.
    path = Path(__file__).parents[1] / "data" / "orlib_pmedcap" / "pmedcap1_08.txt"
    rows = [ln.split() for ln in path.read_text().splitlines() if ln.strip()]
    n, pp, q = int(rows[1][0]), int(rows[1][1]), float(rows[1][2])
    pts = np.array(rows[2:2 + n], float)
    dist = np.floor(np.hypot(*(pts[:, None, 1:3] - pts[None, :, 1:3]).transpose(2, 0, 1)))
    dem = pts[:, 3]
    p = Problem.from_arrays(dist / dem[:, None], dem, capacity=q, p=pp)
    plan = solve(p, gap=0.0, time_limit=1.0)
    assert plan.status in ("time_limit", "optimal")
    assert plan.feasible  # and valid: tests/conftest.py hands it to the independent checker
    # the proven bound may never pass the published optimum 820; optimal means reaching it
    assert plan.bound <= 820 + 1e-6
    if plan.status == "optimal":
        assert plan.objective == pytest.approx(820)
    assert plan.gap == pytest.approx(relative_gap(plan.objective, plan.bound))
    assert plan.gap > 0 or plan.status == "optimal"


def test_infeasible_capacity_is_reported_not_solved():
    # four students, total capacity 3: no plan exists
    p = Problem.from_arrays(line_cost([0, 3]), np.ones(4), capacity=[1, 2])
    plan = solve(p)
    assert plan.status == "infeasible"
    assert plan.message
    assert np.all(plan.assignment == -1)


def test_session_resolve_honours_new_locks_and_reuses_plan():
    rng = np.random.default_rng(3)
    xy = rng.random((60, 2))
    sites = xy[:4]
    cost = np.hypot(*(xy[:, None, :] - sites[None, :, :]).transpose(2, 0, 1))
    dem = rng.integers(1, 5, 60).astype(float)
    p1 = Problem.from_arrays(cost, dem, capacity=dem.sum() / 4 * 1.2)
    s = Session(p1)
    first = s.solve(gap=1e-6)
    assert first.status == "optimal"
    # lock two units to a site they do not use now
    locks = {}
    for i in (10, 20):
        locks[i] = int((first.assignment[i] + 1) % 4)
    p2 = p1.replace(locks=np.array([locks.get(i, -1) for i in range(60)]))
    s.update(p2)
    second = s.solve(gap=1e-6)
    assert second.status == "optimal"
    for i, j in locks.items():
        assert second.assignment[i] == j
    assert second.objective >= first.objective - 1e-9
    # the same answer from scratch
    assert solve(p2, gap=1e-6).objective == pytest.approx(second.objective, rel=1e-6)


def test_restriction_is_recognised_only_when_it_removes_plans():
    # a lock, a forbid, a closure and a lower cap only remove plans; an unlock, a higher
    # cap or a new stability weight may add plans or change costs
    base = Problem.from_arrays(line_cost([0, 3]), np.ones(4), capacity=[3, 3],
                               locks={1: 0})
    assert base.replace(locks=np.array([-1, 0, 1, -1])).is_restriction_of(base)
    assert base.replace(capacity=np.array([3.0, 2.0])).is_restriction_of(base)
    forbidden = np.zeros((4, 2), bool)
    forbidden[2, 0] = True
    assert base.replace(forbidden=forbidden).is_restriction_of(base)
    assert base.replace(closed_sites=np.array([False, True])).is_restriction_of(base)
    assert not base.replace(locks=np.full(4, -1)).is_restriction_of(base)
    assert not base.replace(capacity=np.array([3.0, 4.0])).is_restriction_of(base)
    today = base.replace(current=np.array([0, 0, 1, 1]))
    assert not today.replace(stability_weight=1.0).is_restriction_of(today)
    assert base.replace(min_util=np.array([0.5, 0.0])).is_restriction_of(base)


def test_resolve_after_a_lock_on_the_same_side_is_proven_at_once():
    # line of four units, sites at x=0 and x=3, optimum 0,0,1,1 (cost 2). Locking unit 0
    # to site 0 (where it is) removes plans but not the optimum: the carried bound 2 and
    # the adapted start (cost 2) prove it without a new model. Locking unit 1 to site 1
    # costs 3 (hand-worked in test_lock_forces_unit_away_from_nearest): the carried bound
    # stays a valid lower bound and the re-solve proves 3.
    p = Problem.from_arrays(line_cost([0, 3]), np.ones(4))
    s = Session(p)
    first = s.solve()
    assert first.objective == pytest.approx(2.0) and first.bound == pytest.approx(2.0)
    s.update(p.replace(locks=np.array([0, -1, -1, -1])))
    second = s.solve()
    assert second.status == "optimal" and second.objective == pytest.approx(2.0)
    assert second.rounds == 0  # proven before any integer round
    s.update(p.replace(locks=np.array([0, 1, -1, -1])))
    third = s.solve()
    assert third.status == "optimal" and third.objective == pytest.approx(3.0)
    assert third.bound <= 3.0 + 1e-9
    s.update(p)  # unlocking may make plans cheaper: the bound must not carry over
    fourth = s.solve()
    assert fourth.objective == pytest.approx(2.0) and fourth.bound <= 2.0 + 1e-9
    # two updates without a solve between: solved with unit 1 locked to site 1 (cost 3),
    # then unlocked, then unit 0 locked to site 0. The last problem restricts the one before
    # it, not the one solved, so the bound 3 must not carry: the optimum is 2 (0,0,1,1),
    # although the previous plan (0,1,1,1) is valid and costs 3.
    s.update(p.replace(locks=np.array([-1, 1, -1, -1])))
    assert s.solve().objective == pytest.approx(3.0)
    s.update(p)
    s.update(p.replace(locks=np.array([0, -1, -1, -1])))
    fifth = s.solve()
    assert fifth.objective == pytest.approx(2.0)


def test_a_cut_through_a_unit_left_out_of_the_model_is_not_added():
    # Path 0-1-2-3-4, sites at units 0 and 4, unit 2 has no students. The separator cut
    # "unit 3 in zone 0 needs unit 2 in zone 0" is valid on the full model. A rebuilt
    # model that leaves unit 2 out (it is handed a zone after the solve) must not add it:
    # without unit 2's column the row would read x[3,0] <= 0, and that cuts off the
    # optimum, which (hand-worked) puts units 0-3 in zone 0 and unit 4 in zone 1 at cost
    # 1+1+0+1+1 = 4, against 1+1+0+5+1 = 8 with unit 3 in zone 1.
    from districting.engine.connectivity import Cut
    from districting.engine.highs_route import HighsRoute

    cost = np.array([[1, 9], [1, 9], [1, 9], [1, 5], [9, 1]], float)
    d = np.array([1, 1, 0, 1, 1], float)
    p = Problem.from_arrays(cost, d, edges=[(0, 1), (1, 2), (2, 3), (3, 4)], roots=[0, 4])
    cut = Cut(site=0, units=np.array([3]), separator=np.array([2]))
    full = HighsRoute(p)
    assert full.add_cuts([cut]) == 1
    relaxed = HighsRoute(p, drop=np.array([False, False, True, False, False]))
    assert relaxed.add_cuts([cut]) == 0
    z, _, _ = relaxed.relaxation()
    assert z <= 4 + 1e-9
    assert solve(p, gap=0.0).objective == pytest.approx(4.0)
