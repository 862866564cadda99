"""Cheap reasons, in whole students, why the walk-zone rules leave no plan.

Two checks on arrays, run by :func:`districting.engine.precheck.precheck`: students who
live beyond walking distance of every school they may attend, above the limit on students
needing transport; and a school that must take every unit within walking distance of it
and of no other school it may use, more students than it can seat.
"""

from __future__ import annotations

import numpy as np

from ..problem import Problem
from .findings import Finding, plural, students

__all__ = ["practice_issues", "practice_finding"]


def practice_issues(problem: Problem, seats: np.ndarray | None) -> list[Finding]:
    """Findings of the two checks (``seats``: capacity x maximum utilization, 0 where
    closed; None without capacity)."""
    if problem.walk is None:
        return []
    return _transport_issues(problem) + _walker_issues(problem, seats)


def _transport_issues(problem: Problem) -> list[Finding]:
    if problem.max_transported is None:
        return []
    allowed = problem.allowed
    rides = ~(allowed & problem.walk).any(axis=1)
    least = float(problem.demand[0][rides].sum())
    if least <= problem.max_transported + 1e-9:
        return []
    year = problem.year_label(0)
    return [Finding("transport", f"In {year} at least {students(least)} students live beyond "
                    "walking distance of every school they may attend, but the limit on "
                    f"students needing transport is {students(problem.max_transported, False)}.",
                    f"raise the limit to at least {students(least).removeprefix('about ')}, "
                    "or lengthen the walking distance.", year=year)]


def _walker_issues(problem: Problem, seats: np.ndarray | None) -> list[Finding]:
    if seats is None:
        return []
    allowed = problem.allowed
    only = allowed.sum(axis=1) == 1
    site = allowed.argmax(axis=1)
    walks = problem.walk[np.arange(problem.n_units), site]
    out = []
    for j in range(problem.n_sites):
        units = only & walks & (site == j)
        if not units.any():
            continue
        for t in range(problem.n_years):
            load = float(problem.demand[t][units].sum())
            if load > seats[j] + 1e-6:
                over = load - seats[j]
                year = problem.year_label(t)
                out.append(Finding(
                    "walkers", f"{problem.site_label(j)} in {year} must take the "
                    f"{students(load)} students living within walking distance of it who may "
                    f"attend no other school, {students(over)} {plural(over, 'student')} over "
                    f"its limit of {students(seats[j], up=False)}.",
                    "turn off keep_walkers for this run, shorten the walking distance, or "
                    "raise the school's capacity.", problem.site_label(j), year=year))
                break
    return out


def practice_finding(problem: Problem, family: str, key, slack: float, fix: str
                     ) -> list[Finding]:
    """The words for a row of the transport or group family that must give ``slack``
    students in the elastic solve of :mod:`districting.engine.diagnose`."""
    if family == "transport":
        return [Finding("transport", "The limit on students needing transport of "
                        f"{students(problem.max_transported, up=False)} would have to rise to "
                        f"{students(problem.max_transported + slack)}.", fix,
                        year=problem.year_label(0))]
    g, t, j, side = key
    name = problem.group_names[g] if len(problem.group_names) > g else f"group {g + 1}"
    school, year = problem.site_label(j), problem.year_label(t)
    way = "more" if side == "low" else "fewer"
    return [Finding("groups", f"{school} in {year} would need {students(slack)} {way} {name} "
                    f"{plural(slack, 'student')} to stay within {problem.group_band * 100:g} "
                    "points of the district's share.", fix, school, year=year)]
