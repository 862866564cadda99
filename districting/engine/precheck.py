"""Cheap reasons, in words staff can act on, why a problem has no plan (before any solve).

:func:`precheck` runs array and graph checks; each finding is one sentence naming the level,
the year, the school or the unit and what to change. :func:`unbuildable` is the part that
leaves no model to write down (the Pyomo route refuses to build then). The harder case, an
infeasibility the solver proved, is explained by :mod:`districting.engine.diagnose`.
"""

from __future__ import annotations

import math

import numpy as np
import scipy.sparse as sp
from scipy.sparse.csgraph import breadth_first_order

from ..problem import Problem
from .feeding import nested_findings, nested_seat_findings, whole_findings
from .findings import Finding, plural, students
from .precheck_locks import (
    blocking_locks,
    lock_pair_issues,
    lock_reach_issues,
    locked_seat_issues,
    locks_named,
)
from .precheck_practice import practice_issues

__all__ = ["precheck", "unbuildable", "reachable"]


# ---------------------------------------------------------------------------- wording
def _units(problem: Problem, idx, most: int = 5) -> str:
    idx = [int(i) for i in idx]
    names = ", ".join(problem.unit_label(i) for i in idx[:most])
    return names + (f" and {len(idx) - most} more" if len(idx) > most else "")


# ---------------------------------------------------------------------------- graph
def reachable(problem: Problem) -> np.ndarray:
    """(n, m) bool: unit i can be in site j's zone.

    The pair is allowed and, when zones must be connected and j has a root unit, i is
    reachable from that root through units that may all go to j (breadth-first search in the
    unit graph restricted to them). A closed site reaches nothing.
    """
    ok = problem.allowed.copy()
    ok[:, problem.closed_sites] = False
    if not problem.contiguous or problem.roots is None:
        return ok
    n = problem.n_units
    e = problem.edges
    reach = np.zeros_like(ok)
    for j in range(problem.n_sites):
        r = int(problem.roots[j])
        if r < 0:
            reach[:, j] = ok[:, j]
            continue
        if not ok[r, j]:
            continue
        keep = ok[e[:, 0], j] & ok[e[:, 1], j]
        sub = e[keep]
        graph = sp.coo_matrix((np.ones(len(sub)), (sub[:, 0], sub[:, 1])), shape=(n, n)).tocsr()
        order = breadth_first_order(graph, r, directed=False, return_predecessors=False)
        reach[order, j] = True
    return reach


def unlocked_reach(problem: Problem) -> np.ndarray:
    """(n, m) bool: :func:`reachable` with no unit locked (to tell what the locks cut off)."""
    return reachable(problem.replace(locks=np.full(problem.n_units, -1, np.int64)))


# ---------------------------------------------------------------------------- checks
def unbuildable(problem: Problem) -> list[Finding]:
    """Findings that leave no model to write down (the Pyomo route refuses to build then).

    A unit with no allowed school, a lock to a closed, forbidden or unreachable pair, an
    always-open school whose own unit may not join it, a move limit already broken by the
    forced moves, and an open-school count that cannot be met.
    """
    return (_count_issues(problem) + lock_pair_issues(problem) + nested_findings(problem)
            + _no_school_issues(problem) + _root_pair_issues(problem)
            + _forced_move_issues(problem))


def precheck(problem: Problem) -> list[Finding]:
    """Cheap reasons why ``problem`` cannot have a plan (empty: none found); each names the
    school or unit, the year and the fix (:func:`.findings.no_plan_text` words them).

    Besides :func:`unbuildable`: a year whose students exceed what the open schools can seat,
    a school that cannot reach its minimum utilization with every unit it may take, a locked
    unit that cannot be joined to its school's zone, a unit cut off from every school it may
    attend, two open schools standing in the same unit, and the feeder rules: a lower zone
    that no school may take whole, an upper zone whose students its schools cannot seat.
    """
    reasons = unbuildable(problem)
    reasons += _year_capacity_issues(problem) + locked_seat_issues(problem)
    reasons += _shared_root_issues(problem)
    reach = reachable(problem)
    reasons += _floor_issues(problem, reach)
    reasons += lock_reach_issues(problem, reach)
    reasons += _island_issues(problem, reach)
    reasons += whole_findings(problem, reach) + nested_seat_findings(problem)
    reasons += practice_issues(problem, None if problem.capacity is None else _seats(problem))
    return reasons


def _count_issues(problem: Problem) -> list[Finding]:
    p = problem.p
    if p is None:
        return []
    forced = int(problem.open_sites.sum())
    can_open = int((~problem.closed_sites).sum())
    if forced > p:
        return [Finding("open_count", f"The run asks for {p} open {plural(p, 'school')}, but "
                        f"{forced} must stay open.", f"raise the number of open schools to at "
                        f"least {forced}, or make some of them candidates.")]
    if can_open < p:
        return [Finding("open_count", f"The run asks for {p} open {plural(p, 'school')}, but "
                        f"only {can_open} are not closed.", f"lower the number of open schools "
                        f"to {can_open} or add candidate sites.")]
    return []


def _no_school_issues(problem: Problem) -> list[Finding]:
    # units the nesting alone leaves without a school are told by nested_findings
    plain = problem.replace(feeder_rule="") if problem.feeder_rule == "nested" else problem
    allowed = plain.allowed & ~problem.closed_sites[None, :]
    out = []
    for i in np.flatnonzero(~allowed.any(axis=1) & (problem.locks < 0)).tolist():
        most = problem.demand[:, i].max()
        who = (f"has {students(most)} {plural(math.ceil(most), 'student')} but" if most > 0
               else "has no students, but every unit must belong to a zone, and it")
        unit = problem.unit_label(i)
        out.append(Finding("no_school", f"{unit} {who} cannot go to any school: every school "
                           "is closed, forbidden or out of reach for it.", "raise the maximum "
                           "distance, remove a forbid, or open a school near it.", unit=unit))
    return out


def _root_pair_issues(problem: Problem) -> list[Finding]:
    if problem.roots is None:
        return []
    allowed = problem.allowed
    out = []
    for j in np.flatnonzero(problem.always_open).tolist():
        r = int(problem.roots[j])
        if r < 0 or allowed[r, j]:
            continue
        why = ("it is locked to " + problem.site_label(int(problem.locks[r]))
               if problem.locks[r] >= 0 else "the pair is forbidden or out of reach")
        school = problem.site_label(j)
        out.append(Finding("own_unit", f"{school} must be open, but its own unit "
                           f"{problem.unit_label(r)} may not be assigned to it ({why}).",
                           "remove that lock or forbid, or make the school a candidate.",
                           school))
    return out


def _must_move(problem: Problem) -> np.ndarray:
    """Units with students whose current site they can no longer attend."""
    cur = problem.current
    has = (cur >= 0) & (problem.demand[0] > 0)
    idx = np.flatnonzero(has)
    stay_ok = problem.allowed[idx, cur[idx]]
    return idx[~stay_ok]


def _forced_move_issues(problem: Problem) -> list[Finding]:
    if problem.max_moved is None:
        return []
    idx = _must_move(problem)
    forced = float(problem.demand[0, idx].sum())
    if forced <= problem.max_moved + 1e-9:
        return []
    year = problem.year_label(0)
    return [Finding("moves", f"At least {students(forced)} students in {year} must change "
                    "school because their current school is closed or no longer allowed for "
                    f"their unit ({_units(problem, idx)}), but the move limit is "
                    f"{students(problem.max_moved, up=False)}.", "raise the move limit to at "
                    f"least {students(forced).removeprefix('about ')}.", year=year)]


def _seats(problem: Problem) -> np.ndarray:
    cap = problem.capacity
    seats = problem.max_util * cap
    return np.where(problem.closed_sites, 0.0, seats)


def _year_capacity_issues(problem: Problem) -> list[Finding]:
    if problem.capacity is None:
        return []
    seats = _seats(problem)
    always = problem.always_open
    best = seats[always].sum()
    extra = 0
    if problem.p is not None:
        extra = max(0, problem.p - int(always.sum()))
        cand = np.sort(seats[problem.candidates])[::-1]
        best += cand[:extra].sum()
    how = f", with the {extra} largest candidate sites opened" if extra else ""
    out = []
    for t in range(problem.n_years):
        total = problem.demand[t].sum()
        if total > best + 1e-6:
            year = problem.year_label(t)
            short = total - best
            out.append(Finding("seats", f"In {year} there are {students(total)} students, but "
                               f"the open schools can seat at most {students(best, up=False)} "
                               f"(capacity x maximum utilization{how}): {students(short)} "
                               f"{plural(math.ceil(short - 1e-9), 'seat')} short.",
                               "raise capacity or the maximum utilization, or open more "
                               "schools.", year=year))
    return out


def _shared_root_issues(problem: Problem) -> list[Finding]:
    if problem.roots is None:
        return []
    out = []
    always = np.flatnonzero(problem.always_open & (problem.roots >= 0))
    roots = problem.roots[always]
    values, counts = np.unique(roots, return_counts=True)
    for r in values[counts > 1].tolist():
        sites = always[roots == r]
        names = " and ".join(problem.site_label(int(j)) for j in sites)
        out.append(Finding("shared_unit", f"{names} all stand in {problem.unit_label(r)}, but "
                           "a unit belongs to one zone, so they cannot all be open.",
                           "give each school its own unit, or close all but one.",
                           unit=problem.unit_label(r)))
    return out


def _floor_issues(problem: Problem, reach: np.ndarray) -> list[Finding]:
    if problem.capacity is None:
        return []
    out = []
    free = None
    for j in np.flatnonzero(problem.always_open & (problem.min_util > 0)).tolist():
        floor = problem.min_util[j] * problem.capacity[j]
        for t in range(problem.n_years):
            most = problem.demand[t, reach[:, j]].sum()
            if most >= floor - 1e-6:
                continue
            school, year = problem.site_label(j), problem.year_label(t)
            text = (f"{school} cannot reach its minimum utilization in {year}: even with "
                    f"every unit it may take it would have {students(most, up=False)} "
                    f"students, below its floor of {students(floor)} "
                    f"({problem.min_util[j]:.0%} of {students(problem.capacity[j], up=False)} "
                    "seats).")
            fix = "lower its minimum utilization, allow it more units (maximum distance, " \
                  "forbids), or close it."
            if free is None and (problem.locks >= 0).any():
                free = unlocked_reach(problem)
            taken = (np.flatnonzero(free[:, j] & ~reach[:, j] & (problem.locks >= 0)
                                    & (problem.locks != j)) if free is not None else [])
            if len(taken) and problem.demand[t, free[:, j]].sum() >= floor - 1e-6:
                text += (f" Without the locks of {locks_named(problem, taken)} it could.")
                fix = "remove some of those locks, or " + fix
            out.append(Finding("band", text, fix, school, year=year))
            break
    return out


def _island_issues(problem: Problem, reach: np.ndarray) -> list[Finding]:
    if not problem.contiguous:
        return []
    allowed = problem.allowed & ~problem.closed_sites[None, :]
    cut_off = allowed.any(axis=1) & ~reach.any(axis=1) & (problem.locks < 0)
    free = unlocked_reach(problem) if cut_off.any() and (problem.locks >= 0).any() else None
    out = []
    for i in np.flatnonzero(cut_off).tolist():
        unit = problem.unit_label(i)
        by_locks = np.flatnonzero(free[i] & allowed[i]) if free is not None else []
        block = blocking_locks(problem, reach, int(by_locks[0]), i) if len(by_locks) else []
        if len(block):
            school = problem.site_label(int(by_locks[0]))
            out.append(Finding("island", f"{unit} cannot be joined to any school's zone: the "
                               f"{plural(len(block), 'lock')} of {locks_named(problem, block)} "
                               f"cut it off from {school}, the school it could otherwise join.",
                               "remove one of these locks, or lock the unit to the school "
                               "whose zone surrounds it.", unit=unit))
            continue
        out.append(Finding("island", f"{unit} cannot be joined to any school's zone: in the "
                           "unit adjacency it is cut off from every school it may attend (an "
                           "island, or surrounded by units that may not go there).", "add a "
                           "link across the gap in the adjacency, or allow it a school it can "
                           "reach.", unit=unit))
    return out
