"""The charge per student moved away from the option being edited (Problem.anchor).

Hand-worked town (no contiguity): three units, three schools A, B, C of capacity 20 and
10, 12 and 14 students, so each school holds exactly one unit (any two units make 22 or
more). Cost per student, metres:

          A    B    C
    u0  100  300  900
    u1  900  100  200
    u2  200  900  100

The option before the lock is (A, B, C): 100*10 + 100*12 + 100*14 = 3,600 m, the smallest
(it takes every 100). Locking u0 to B leaves u1 and u2 the schools A and C:
- keep the rest, (B, A, C): 300*10 + 900*12 + 100*14 = 15,200 m; moves u0 and u1 against
  the option, 10 + 12 = 22 students;
- reshuffle, (B, C, A): 3,000 + 200*12 + 200*14 = 8,200 m; moves all three, 36 students.
Without a charge the reshuffle wins (8,200 < 15,200). With W metres per student moved
against the option the keeping plan wins when 15,200 + 22 W < 8,200 + 36 W, i.e. W > 500:
at W = 1,000 it costs 37,200 against 44,200.
"""

from __future__ import annotations

import numpy as np
import pytest

from districting import Problem
from districting.engine import Session
from districting.outputs.option_edit import plan_edit_figures

COST = np.array([[100.0, 300.0, 900.0], [900.0, 100.0, 200.0], [200.0, 900.0, 100.0]])
DEMAND = np.array([10.0, 12.0, 14.0])
OPTION = np.array([0, 1, 2])


def town(**kw) -> Problem:
    return Problem.from_arrays(COST, DEMAND, capacity=20.0, **kw)


def test_option_is_the_free_optimum():
    plan = Session(town()).solve(0.0)
    assert plan.assignment.tolist() == OPTION.tolist()
    assert plan.objective == pytest.approx(3600.0)


def test_lock_without_charge_reshuffles_the_rest():
    plan = Session(town(locks={0: 1}, anchor=OPTION)).solve(0.0)
    assert plan.assignment.tolist() == [1, 2, 0]
    assert plan.objective == pytest.approx(8200.0)


def test_lock_with_charge_keeps_the_rest():
    plan = Session(town(locks={0: 1}, anchor=OPTION, anchor_weight=1000.0)).solve(0.0)
    assert plan.assignment.tolist() == [1, 0, 2]
    assert plan.objective == pytest.approx(15200.0 + 1000.0 * 22)


def test_charge_below_the_break_even_still_reshuffles():
    # W = 400 < 500: 15,200 + 8,800 = 24,000 against 8,200 + 14,400 = 22,600
    plan = Session(town(locks={0: 1}, anchor=OPTION, anchor_weight=400.0)).solve(0.0)
    assert plan.assignment.tolist() == [1, 2, 0]
    assert plan.objective == pytest.approx(22600.0)


def test_anchor_checked_and_treated_as_a_different_objective():
    with pytest.raises(ValueError, match="anchor"):
        town(anchor=[0, 1])
    with pytest.raises(ValueError, match="anchor"):
        town(anchor_weight=5.0)
    free = town(locks={0: 1})
    # a charge against an option changes the objective: a bound proven without it is not
    # reused; without a weight the anchor changes nothing
    assert not town(locks={0: 1}, anchor=OPTION, anchor_weight=1000.0).is_restriction_of(free)
    assert town(locks={0: 1}, anchor=OPTION).is_restriction_of(free)


@pytest.mark.parametrize(("weight", "plan", "vs_option", "vs_today", "objective"), [
    # today's zones are (C, B, A): the option moves u0 (10) and u2 (14), 24 students.
    # kept (B, A, C): u0 C->B, u1 B->A, u2 A->C move against today, 10 + 12 + 14 = 36
    (1000.0, [1, 0, 2], 22.0, 36.0, 15200.0),
    # reshuffled (B, C, A): u0 C->B, u1 B->C move, u2 stays on A: 10 + 12 = 22
    (0.0, [1, 2, 0], 36.0, 22.0, 8200.0),
])
def test_the_edit_price_counted_by_hand(weight, plan, vs_option, vs_today, objective):
    p = town(locks={0: 1}, anchor=OPTION, anchor_weight=weight, current=[2, 1, 0])
    found = Session(p).solve(0.0)
    assert found.assignment.tolist() == plan
    f = plan_edit_figures(p, found.assignment, "A")
    assert (f.moved_vs_option, f.moved_vs_today, f.option_moved_vs_today) == (
        vs_option, vs_today, 24.0)
    # the price leaves the keep charge out: the travel the lock costs, against 3,600
    assert (f.objective, f.option_objective) == (objective, 3600.0)
    assert f.objective_change == objective - 3600.0


def test_neighbourhood_subproblem_keeps_the_charge():
    # the large-neighbourhood search solves sites {B, C} of the kept plan (B, A, C) alone:
    # u0 and u2; moving u2 from C to B costs it the charge as in the whole problem, while
    # u0 (anchored on A, outside) is moved in every sub-plan: a constant, left out
    from districting.engine.neighbourhood import subproblem

    p = town(locks={0: 1}, anchor=OPTION, anchor_weight=1000.0)
    sub, units = subproblem(p, np.array([1, 0, 2]), np.array([1, 2]))
    assert units.tolist() == [0, 2]
    assert sub.anchor.tolist() == [-1, 1]
    # u2 at B: 900 * 14 + 1000 * 14 in both; at C: 100 * 14
    assert sub.weighted_cost[1].tolist() == p.weighted_cost[2, [1, 2]].tolist()


def test_a_bound_carries_over_to_a_charged_rerun_by_the_hand_worked_shift():
    # Solved free (3,600, proven), then u0 locked to B with 1,000 m per student moved against
    # the option: every plan now pays u0's 10 students (its only school is not its option
    # school) and nothing less elsewhere, so the old bound rises by 10,000 to 13,600, below
    # the new optimum 37,200.
    free = town()
    rerun = town(locks={0: 1}, anchor=OPTION, anchor_weight=1000.0)
    assert rerun.bound_shift(free) == pytest.approx(10_000.0)
    session = Session(free)
    assert session.solve(0.0).bound == pytest.approx(3600.0)
    session.update(rerun)
    plan = session.solve(0.0)
    assert plan.objective == pytest.approx(37_200.0) and plan.bound <= 37_200.0 + 1e-6


def test_moving_the_anchor_lowers_a_carried_bound_by_the_students_whose_option_changed():
    # Anchor (A, B, C) -> (B, A, C) at 1,000 m: u0 (10) and u1 (12) change option school, so
    # a plan may save up to 1,000 x 22 = 22,000 m of charge; u2 nothing.
    before = town(anchor=OPTION, anchor_weight=1000.0)
    after = town(anchor=[1, 0, 2], anchor_weight=1000.0)
    assert after.bound_shift(before) == pytest.approx(-22_000.0)
    assert before.bound_shift(before) == 0.0
    # not a restriction (a lock removed): nothing carries
    assert town().bound_shift(town(locks={0: 1})) is None
