"""The planning rules in districting.rules (hand-worked small cases)."""

import numpy as np
import pytest

from districting import rules
from districting.problem import Problem

STATUSES = np.array(rules.SITE_STATUSES, dtype=object)  # open closing new candidate closed


def test_statuses_that_take_students_today_and_in_the_plan_year():
    assert rules.open_today(STATUSES).tolist() == [True, True, False, False, False]
    assert rules.takes_students(STATUSES).tolist() == [True, False, True, True, False]
    assert rules.open_in_plan(STATUSES).tolist() == [True, False, True, False, False]
    assert rules.is_candidate(STATUSES).tolist() == [False, False, False, True, False]
    assert rules.is_closed(STATUSES).tolist() == [False, True, False, False, True]


def test_site_band_overrides_the_project_band_only_where_given():
    assert rules.site_band([0.8, np.nan], 1.0).tolist() == [0.8, 1.0]


def test_usable_capacity_counts_the_largest_candidates_that_may_open():
    # Hand-worked: forced 100, plus both candidates (140) or only the larger one (80).
    cap = np.array([100.0, 60.0, 80.0])
    full = np.ones(3)
    forced = np.array([True, False, False])
    cand = np.array([False, True, True])
    assert rules.usable_capacity(cap, full, forced, cand, None) == 240.0
    assert rules.usable_capacity(cap, full, forced, cand, 2) == 180.0
    assert rules.usable_capacity(cap, full * 0.5, forced, cand, 1) == 50.0


def _spare_candidate_problem() -> Problem:
    """Three units on a line; site 0 is open in unit 0; sites 1 and 2 are candidates with
    no unit of their own and far away, and two sites must open (p = 2)."""
    cost = np.array([[0.0, 50.0, 60.0], [1.0, 50.0, 60.0], [2.0, 50.0, 60.0]])
    return Problem.from_arrays(cost, [10.0, 10.0, 10.0], capacity=[100.0, 100.0, 100.0], p=2,
                               open_sites=[True, False, False], edges=[(0, 1), (1, 2)],
                               roots=[0, -1, -1])


def test_open_sites_hold_the_open_count_when_the_plan_uses_fewer_sites():
    problem = _spare_candidate_problem()
    a = np.zeros(3, np.int64)  # every unit at site 0
    opened = rules.open_sites(problem, a)
    # Hand-worked: site 0 is forced; p = 2 opens one spare candidate, the lowest index.
    assert opened.tolist() == [True, True, False]
    # The former interim-plan rule (used sites plus always-open ones) said only site 0:
    # the workbench's interim plans and reloaded options disagreed with the solver's plan.
    old = problem.always_open.copy()
    old[a] = True
    assert int(old.sum()) == 1 != int(opened.sum())
    # The independent checker takes the same plan as valid (an empty candidate may open).
    from districting.verify import check_plan, facts_of_problem

    assert check_plan(facts_of_problem(problem), a) == []


def test_a_closed_site_is_never_open_even_when_used():
    problem = Problem.from_arrays(np.ones((2, 2)), [1.0, 1.0], closed_sites=[False, True])
    assert rules.open_sites(problem, np.array([0, 1])).tolist() == [True, False]


@pytest.mark.parametrize("p", [None, 1])
def test_open_sites_without_spare_candidates_are_the_used_and_forced_sites(p):
    cost = np.ones((2, 2))
    problem = Problem.from_arrays(cost, [1.0, 1.0], p=p, open_sites=[True, False])
    expected = [True, True] if p is None else [True, False]
    assert rules.open_sites(problem, np.array([0, 0])).tolist() == expected


def test_todays_zones_under_the_plan_do_not_count_a_closing_school_as_open(tmp_path):
    """The workbench's "Today's zones" and reloaded plans are rebuilt from an assignment;
    they now say which sites are open the way the solver does: a closing school that
    still has students today is not open in the plan year (formerly: open, "under 60%")."""
    from exports_town import make_town

    from districting.outputs.tables import band_flags
    from districting.study import RunSettings, build_problem, outcome_from_assignment

    town = make_town(tmp_path, statuses=["open", "open", "closing", "open"])
    rs = RunSettings(level="elementary")
    problem, _ = build_problem(town, rs)
    today = outcome_from_assignment(town, rs, problem.current)
    j = int(np.flatnonzero(today.sites["status"].to_numpy() == "closing")[0])
    assert (problem.current == j).any()  # the closing school has students today
    assert not today.plan.open_sites[j]
    assert today.plan.open_sites.tolist() == rules.open_sites(problem, problem.current).tolist()
    met = today.metrics
    flags = band_flags(met.load, problem, problem.years, today.plan.open_sites)
    assert flags[j] == "students at a school that is not open"


def test_band_excess_by_hand():
    # two demand rows, three sites with the band [50, 100]: site 0 inside in both rows,
    # site 1 above by 10 and 5 (15), site 2 below by 20 in the first row only (20)
    load = np.array([[60.0, 110.0, 30.0], [90.0, 105.0, 50.0]])
    hi, lo = np.full(3, 100.0), np.full(3, 50.0)
    assert rules.band_excess(load, hi, lo).tolist() == [0.0, 15.0, 20.0]
