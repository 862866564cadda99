"""Locks checked in seconds, before any solve: which lock breaks which rule, in words.

A lock (unit i goes to school j) can fail on its own (the school is closed, the pair is
forbidden or out of reach), by filling the school past its band (the locked units' students
exceed its seats in a year), or by the zones it cuts: units locked to another school may stand
between a locked unit and its school's own unit, or between a unit and every school it may
attend. Each finding names the units, the schools and the locks standing in the way, and the
lock to remove. The checks are array sums and breadth-first searches in the unit graph
(:func:`scipy.sparse.csgraph.breadth_first_order`, :class:`.connectivity.UnitGraph`), a few
milliseconds on a town.
"""

from __future__ import annotations

import math

import numpy as np

from ..problem import Problem
from .connectivity import UnitGraph
from .findings import Finding, plural, students

__all__ = ["lock_pair_issues", "locked_seat_issues", "lock_reach_issues", "blocking_locks",
           "locks_named"]


def locks_named(problem: Problem, units, most: int = 4) -> str:
    """ "U7 (locked to Aspen), U9 (locked to Birch)" for locked unit indices."""
    idx = [int(i) for i in units]
    words = [f"{problem.unit_label(i)} (locked to {problem.site_label(int(problem.locks[i]))})"
             for i in idx[:most]]
    more = len(idx) - most
    return ", ".join(words) + (f" and {more} more" if more > 0 else "")


def lock_pair_issues(problem: Problem) -> list[Finding]:
    """A lock to a closed school, to a forbidden pair, or to a school out of the unit's reach."""
    out = []
    for i in np.flatnonzero(problem.locks >= 0).tolist():
        j = int(problem.locks[i])
        unit, school = problem.unit_label(i), problem.site_label(j)
        lock = f"{unit} is locked to {school}, but "
        if problem.closed_sites[j]:
            out.append(Finding("lock", f"{lock}{school} is closed in this run.",
                               "remove the lock or reopen the school.", school, unit))
        elif problem.forbidden[i, j]:
            out.append(Finding("lock", f"{lock}that pair is also forbidden.",
                               "remove either the lock or the forbid.", school, unit))
        elif not np.isfinite(problem.cost[i, j]):
            out.append(Finding("lock", f"{lock}{school} is out of reach for it (beyond the "
                               "maximum distance or missing from the travel matrix).",
                               "raise the maximum distance or remove the lock.", school, unit))
    return out


def locked_seat_issues(problem: Problem) -> list[Finding]:
    """Schools whose locked units alone hold more students than the school may seat.

    For school j and year t: ``sum_{i locked to j} d[t, i] > u_max[j] Q[j]``. One finding per
    school, for its first such year (the others follow from the same locks).
    """
    if problem.capacity is None:
        return []
    locks = problem.locks
    out = []
    for j in np.unique(locks[locks >= 0]).tolist():
        if problem.closed_sites[j]:
            continue  # told by lock_pair_issues
        mine = np.flatnonzero(locks == j)
        seats = problem.max_util[j] * problem.capacity[j]
        held = problem.demand[:, mine].sum(axis=1)
        over = np.flatnonzero(held > seats + 1e-6)
        if not len(over):
            continue
        t = int(over[0])
        school, year = problem.site_label(j), problem.year_label(t)
        excess = held[t] - seats
        order = mine[np.argsort(-problem.demand[t, mine], kind="stable")]
        names = ", ".join(f"{problem.unit_label(int(i))} ({students(problem.demand[t, i])})"
                          for i in order[:5])
        more = f" and {len(order) - 5} more" if len(order) > 5 else ""
        out.append(Finding(
            "band", f"The {len(mine)} {plural(len(mine), 'unit')} locked to {school} hold "
            f"{students(held[t])} students in {year} ({names}{more}), but {school} may seat "
            f"at most {students(seats, up=False)} ({problem.max_util[j]:.0%} of "
            f"{students(problem.capacity[j], up=False)} seats): {students(excess)} "
            f"{plural(math.ceil(excess - 1e-9), 'student')} too many.",
            f"remove a lock to {school} (the largest first), or raise its capacity or "
            "maximum utilization.", school, year=year))
    return out


def blocking_locks(problem: Problem, reach: np.ndarray, j: int, unit: int) -> np.ndarray:
    """Units locked to other schools that stand between school j's unit and ``unit``.

    Those that border both the part of the town school j can reach and the patch of units
    around ``unit`` that may go to j (when none borders both, those bordering the reachable
    part). Empty when no lock is in the way.
    """
    graph = UnitGraph.of(problem)
    elsewhere = (problem.locks >= 0) & (problem.locks != j)
    ok = problem.allowed[:, j]
    patch = np.zeros(problem.n_units, bool)
    if ok[unit]:
        labels = graph.components(ok)
        patch = labels == labels[unit]
    patch[unit] = True
    region = reach[:, j]
    near_root = graph.touching(region) & ~region & elsewhere
    near_unit = graph.touching(patch) & ~patch & elsewhere
    both = near_root & near_unit
    return np.flatnonzero(both if both.any() else near_root)


def lock_reach_issues(problem: Problem, reach: np.ndarray) -> list[Finding]:
    """A locked unit that cannot be joined to its school's zone, naming what stands between."""
    if not problem.contiguous or problem.roots is None:
        return []
    out = []
    allowed = problem.allowed
    for i in np.flatnonzero(problem.locks >= 0).tolist():
        j = int(problem.locks[i])
        r = int(problem.roots[j])
        if r < 0 or reach[i, j] or not allowed[i, j] or problem.closed_sites[j]:
            continue
        school, unit = problem.site_label(j), problem.unit_label(i)
        block = blocking_locks(problem, reach, j, i)
        if len(block):
            why = (f"the {plural(len(block), 'lock')} of {locks_named(problem, block)} "
                   f"{'cuts' if len(block) == 1 else 'cut'} it off from {school}'s unit "
                   f"{problem.unit_label(r)}")
            fix = f"remove one of these locks, or the lock of {unit}."
        else:
            why = (f"every path from the school's unit {problem.unit_label(r)} runs through "
                   f"units that may not go to {school} (forbidden or out of reach)")
            fix = f"remove the lock, or allow a connecting unit to go to {school}."
        out.append(Finding("lock", f"{unit} is locked to {school}, but it cannot be joined "
                           f"to {school}'s zone: {why}.", fix, school, unit))
    return out
