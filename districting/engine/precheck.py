"""Cheap reasons, in words staff can act on, why a problem has no plan (before any solve).

:func:`precheck` runs array and graph checks; each finding is one sentence naming the level,
the year, the school or the unit and what to change. :func:`unbuildable` is the part that
leaves no model to write down (the Pyomo route refuses to build then). The harder case, an
infeasibility the solver proved, is explained by :mod:`districting.engine.diagnose`.
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp
from scipy.sparse.csgraph import breadth_first_order

from ..problem import Problem

__all__ = ["precheck", "unbuildable", "reachable", "prefix", "num", "plural"]

# ---------------------------------------------------------------------------- wording
def prefix(problem: Problem) -> str:
    """"Middle level: " before a finding (nothing without a level name)."""
    return f"{problem.level.capitalize()} level: " if problem.level else ""


def _units(problem: Problem, idx, most: int = 5) -> str:
    idx = [int(i) for i in idx]
    names = ", ".join(problem.unit_label(i) for i in idx[:most])
    return names + (f" and {len(idx) - most} more" if len(idx) > most else "")


def plural(value: float, word: str) -> str:
    """``word`` with an s unless ``value`` is one."""
    return word if abs(value - 1) < 1e-9 else word + "s"


def num(value: float) -> str:
    """A count in words: thousands separated, one decimal only when not whole."""
    return f"{value:,.0f}" if abs(value - round(value)) < 1e-9 else f"{value:,.1f}"


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


# ---------------------------------------------------------------------------- checks
def unbuildable(problem: Problem) -> list[str]:
    """Findings that leave no model to write down (the Pyomo route refuses to build then).

    A unit with no allowed school, a lock to a closed, forbidden or unreachable pair, an
    always-open school whose own unit may not join it, a move limit already broken by the
    forced moves, and an open-school count that cannot be met.
    """
    return (_count_issues(problem) + _lock_pair_issues(problem) + _no_school_issues(problem)
            + _root_pair_issues(problem) + _forced_move_issues(problem))


def precheck(problem: Problem) -> list[str]:
    """Cheap reasons, in words, why ``problem`` cannot have a plan (empty: none found).

    Besides :func:`unbuildable`: a year whose students exceed what the open schools can seat,
    a school that cannot reach its minimum utilization with every unit it may take, a locked
    unit that cannot be joined to its school's zone, a unit cut off from every school it may
    attend, and two open schools standing in the same unit.
    """
    reasons = unbuildable(problem)
    reasons += _year_capacity_issues(problem)
    reasons += _shared_root_issues(problem)
    reach = reachable(problem)
    reasons += _floor_issues(problem, reach)
    reasons += _lock_reach_issues(problem, reach)
    reasons += _island_issues(problem, reach)
    return reasons


def _count_issues(problem: Problem) -> list[str]:
    p = problem.p
    if p is None:
        return []
    forced = int(problem.open_sites.sum())
    can_open = int((~problem.closed_sites).sum())
    pre = prefix(problem)
    if forced > p:
        return [f"{pre}the run asks for {p} open {plural(p, 'school')}, but {forced} must "
                f"stay open. Raise the number of open schools to at least {forced}, or make "
                "some of them candidates."]
    if can_open < p:
        return [f"{pre}the run asks for {p} open {plural(p, 'school')}, but only {can_open} "
                f"are not closed. Lower the number of open schools to {can_open} or add "
                "candidate sites."]
    return []


def _lock_pair_issues(problem: Problem) -> list[str]:
    pre = prefix(problem)
    out = []
    for i in np.flatnonzero(problem.locks >= 0).tolist():
        j = int(problem.locks[i])
        unit, school = problem.unit_label(i), problem.site_label(j)
        if problem.closed_sites[j]:
            out.append(f"{pre}{unit} is locked to {school}, but {school} is closed in this "
                       "run. Remove the lock or reopen the school.")
        elif problem.forbidden[i, j]:
            out.append(f"{pre}{unit} is locked to {school}, but that pair is also forbidden. "
                       "Remove either the lock or the forbid.")
        elif not np.isfinite(problem.cost[i, j]):
            out.append(f"{pre}{unit} is locked to {school}, but {school} is out of reach for "
                       "it (beyond the maximum distance or missing from the travel matrix). "
                       "Raise the maximum distance or remove the lock.")
    return out


def _no_school_issues(problem: Problem) -> list[str]:
    allowed = problem.allowed & ~problem.closed_sites[None, :]
    pre = prefix(problem)
    out = []
    for i in np.flatnonzero(~allowed.any(axis=1) & (problem.locks < 0)).tolist():
        students = problem.demand[:, i].max()
        who = (f"has {num(students)} students but" if students > 0 else
               "has no students, but every unit must belong to a zone, and it")
        out.append(f"{pre}{problem.unit_label(i)} {who} cannot go to any school: every school "
                   "is closed, forbidden or out of reach for it. Raise the maximum distance, "
                   "remove a forbid, or open a school near it.")
    return out


def _root_pair_issues(problem: Problem) -> list[str]:
    if problem.roots is None:
        return []
    allowed = problem.allowed
    pre = prefix(problem)
    out = []
    for j in np.flatnonzero(problem.always_open).tolist():
        r = int(problem.roots[j])
        if r < 0 or allowed[r, j]:
            continue
        why = ("it is locked to " + problem.site_label(int(problem.locks[r]))
               if problem.locks[r] >= 0 else "the pair is forbidden or out of reach")
        out.append(f"{pre}{problem.site_label(j)} must be open, but its own unit "
                   f"{problem.unit_label(r)} may not be assigned to it ({why}). Remove that "
                   "lock or forbid, or make the school a candidate.")
    return out


def _must_move(problem: Problem) -> np.ndarray:
    """Units with students whose current site they can no longer attend."""
    cur = problem.current
    has = (cur >= 0) & (problem.demand[0] > 0)
    idx = np.flatnonzero(has)
    stay_ok = problem.allowed[idx, cur[idx]]
    return idx[~stay_ok]


def _forced_move_issues(problem: Problem) -> list[str]:
    if problem.max_moved is None:
        return []
    idx = _must_move(problem)
    forced = float(problem.demand[0, idx].sum())
    if forced <= problem.max_moved + 1e-9:
        return []
    return [f"{prefix(problem)}at least {num(forced)} students in {problem.year_label(0)} must "
            "change school because their current school is closed or no longer allowed for "
            f"their unit ({_units(problem, idx)}), but the move limit is "
            f"{num(problem.max_moved)}. Raise the move limit to at least {num(forced)}."]


def _seats(problem: Problem) -> np.ndarray:
    cap = problem.capacity
    seats = problem.max_util * cap
    return np.where(problem.closed_sites, 0.0, seats)


def _year_capacity_issues(problem: Problem) -> list[str]:
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
        students = problem.demand[t].sum()
        if students > best + 1e-6:
            out.append(f"{prefix(problem)}in {problem.year_label(t)} there are "
                       f"{num(students)} students, but the open schools can seat at most "
                       f"{num(best)} (capacity x maximum utilization{how}). Raise capacity or "
                       "the maximum utilization, or open more schools.")
    return out


def _shared_root_issues(problem: Problem) -> list[str]:
    if problem.roots is None:
        return []
    out = []
    always = np.flatnonzero(problem.always_open & (problem.roots >= 0))
    roots = problem.roots[always]
    values, counts = np.unique(roots, return_counts=True)
    for r in values[counts > 1].tolist():
        sites = always[roots == r]
        names = " and ".join(problem.site_label(int(j)) for j in sites)
        out.append(f"{prefix(problem)}{names} all stand in {problem.unit_label(r)}, but a "
                   "unit belongs to one zone, so they cannot all be open. Give each school "
                   "its own unit, or close all but one.")
    return out


def _floor_issues(problem: Problem, reach: np.ndarray) -> list[str]:
    if problem.capacity is None:
        return []
    out = []
    for j in np.flatnonzero(problem.always_open & (problem.min_util > 0)).tolist():
        floor = problem.min_util[j] * problem.capacity[j]
        for t in range(problem.n_years):
            most = problem.demand[t, reach[:, j]].sum()
            if most < floor - 1e-6:
                out.append(
                    f"{prefix(problem)}{problem.site_label(j)} cannot reach its minimum "
                    f"utilization in {problem.year_label(t)}: even with every unit it may take "
                    f"it would have {num(most)} students, below its floor of {num(floor)} "
                    f"({problem.min_util[j]:.0%} of {num(problem.capacity[j])} seats). Lower "
                    "its minimum utilization, allow it more units (maximum distance, forbids), "
                    "or close it.")
                break
    return out


def _lock_reach_issues(problem: Problem, reach: np.ndarray) -> list[str]:
    if not problem.contiguous or problem.roots is None:
        return []
    out = []
    allowed = problem.allowed
    for i in np.flatnonzero(problem.locks >= 0).tolist():
        j = int(problem.locks[i])
        r = int(problem.roots[j])
        if r < 0 or reach[i, j] or not allowed[i, j] or problem.closed_sites[j]:
            continue
        school = problem.site_label(j)
        out.append(f"{prefix(problem)}{problem.unit_label(i)} is locked to {school}, but it "
                   f"cannot be joined to {school}'s zone: every path from the school's unit "
                   f"{problem.unit_label(r)} runs through units that may not go to {school} "
                   "(locked elsewhere, forbidden or out of reach). Remove the lock, or allow a "
                   f"connecting unit to go to {school}.")
    return out


def _island_issues(problem: Problem, reach: np.ndarray) -> list[str]:
    if not problem.contiguous:
        return []
    allowed = problem.allowed & ~problem.closed_sites[None, :]
    cut_off = allowed.any(axis=1) & ~reach.any(axis=1) & (problem.locks < 0)
    out = []
    for i in np.flatnonzero(cut_off).tolist():
        out.append(f"{prefix(problem)}{problem.unit_label(i)} cannot be joined to any "
                   "school's zone: in the unit adjacency it is cut off from every school it "
                   "may attend (an island, or surrounded by units that may not go there). Add "
                   "a link across the gap in the adjacency, or allow it a school it can reach.")
    return out
