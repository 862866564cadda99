"""The independent plan check every engine plan in the tests goes through.

``assert_plan_valid`` hands a plan to :mod:`districting.verify` (scipy components, plain
sums; no engine code) and re-costs it with plain array arithmetic. ``tests/conftest.py``
applies it to every plan :class:`districting.engine.Session` returns in any test.
"""

from __future__ import annotations

import numpy as np

from districting.verify import check_plan, facts_of_problem


def plain_cost(problem, assignment) -> float:
    """sum_i d[0, i] * c[i, a_i] (+ the stability charge per student moved, + the transport
    charge per student beyond walking distance, + the charge per student moved away from the
    option being edited), by hand."""
    a = np.asarray(assignment, np.int64)
    rows = np.arange(len(a))
    d0 = np.asarray(problem.demand)[0]
    c = np.asarray(problem.cost)[rows, a]
    total = float(np.sum(np.where(d0 > 0, d0 * c, 0.0)))
    cur = np.asarray(problem.current)
    moved = (cur >= 0) & (cur != a)
    total += float(problem.stability_weight) * float(d0[moved].sum())
    if getattr(problem, "transport_weight", 0.0) and problem.walk is not None:
        rides = ~np.asarray(problem.walk)[rows, a]
        total += float(problem.transport_weight) * float(d0[rides].sum())
    anchor = getattr(problem, "anchor", None)
    if anchor is not None and problem.anchor_weight:
        left = (np.asarray(anchor) >= 0) & (np.asarray(anchor) != a)
        total += float(problem.anchor_weight) * float(d0[left].sum())
    return total


def assert_plan_valid(problem, plan) -> None:
    """Fail with the checker's findings when ``plan`` (a Plan or an assignment) breaks a rule."""
    assignment = getattr(plan, "assignment", plan)
    facts = facts_of_problem(problem)
    findings = check_plan(facts, assignment)
    assert not findings, "plan refused by the independent check:\n" + "\n".join(
        f"  [{f.rule}] {f.message}" for f in findings)
    if not hasattr(plan, "assignment"):
        return
    a = np.asarray(plan.assignment)
    used = np.zeros(problem.n_sites, bool)
    used[a] = True
    needed = used | facts.must_open
    opened = np.asarray(plan.open_sites, bool)
    assert not (needed & ~opened).any(), "a school the plan uses is not open"
    extra = opened & ~needed
    if extra.any():  # the p-median model may open a site empty to meet the count (p)
        assert facts.open_count is not None and int(opened.sum()) == facts.open_count, (
            "the plan opens schools it does not use, beyond the count")
        assert not np.asarray(facts.closed)[extra].any(), "an empty open school is closed"
        if facts.roots is not None:
            assert (np.asarray(facts.roots)[extra] < 0).all(), "an empty open school has a root"
    if np.isfinite(plan.objective):
        want = plain_cost(problem, a)
        assert abs(plan.objective - want) <= 1e-6 * max(1.0, abs(want)), (
            f"the plan's objective {plan.objective} is not its cost {want}")
        assert plan.bound <= plan.objective + 1e-6 * max(1.0, abs(want)), (
            f"the bound {plan.bound} is above the plan's cost {plan.objective}")
