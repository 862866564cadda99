"""The one home of the planning rules every other module asks.

Site statuses (which sites take students today and in the plan year), usable capacity,
the open sites of a plan and the utilization band of a site. Rules here work on plain
arrays (site statuses, per-site values) or on a :class:`~districting.problem.Problem`;
they read no files and know no solver.

The stability charge (``stability_weight`` per student moved away from today's site) is
part of the objective, so it stays with :attr:`Problem.weighted_cost
<districting.problem.Problem.weighted_cost>` (the problem sits below this module);
:mod:`districting.verify` re-costs it on its own on purpose.
"""

from __future__ import annotations

import numpy as np

from .problem import Problem

__all__ = [
    "SITE_STATUSES", "OPEN_TODAY", "OPEN_IN_PLAN", "CANDIDATE", "CLOSED", "TAKES_STUDENTS",
    "NOT_OPEN_TODAY", "takes_students", "open_today", "open_in_plan", "is_candidate",
    "is_closed", "usable_capacity", "site_band", "open_sites", "TOLERANCE",
    "walkers_forbidden", "transported", "group_shares", "district_shares", "seat_limits",
    "band_excess",
]

#: open: open now and in the plan; closing: closes at the plan year (its students move);
#: new: opens at the plan year; candidate: the solver decides; closed: not in use.
SITE_STATUSES = ("open", "closing", "new", "candidate", "closed")
#: Statuses whose sites take students today (the current year).
OPEN_TODAY = ("open", "closing")
#: Statuses whose sites are open in the plan year whatever the plan.
OPEN_IN_PLAN = ("open", "new")
#: The status of a site the solver may open.
CANDIDATE = "candidate"
#: Statuses whose sites take no students in the plan year.
CLOSED = ("closing", "closed")
#: Statuses whose sites may take students in the plan year (open, new or opened candidate).
TAKES_STUDENTS = (*OPEN_IN_PLAN, CANDIDATE)
#: Statuses of sites that do not exist as schools today.
NOT_OPEN_TODAY = ("new", CANDIDATE)
#: Loads within this many students of a bound count as on it.
TOLERANCE = 1e-6


def _status(status) -> np.ndarray:
    return np.asarray(status, dtype=object)


def takes_students(status) -> np.ndarray:
    """Sites that may take students in the plan year (projected years)."""
    return np.isin(_status(status), TAKES_STUDENTS)


def open_today(status) -> np.ndarray:
    """Sites that take students today."""
    return np.isin(_status(status), OPEN_TODAY)


def open_in_plan(status) -> np.ndarray:
    """Sites open in the plan year whatever the plan (open and new)."""
    return np.isin(_status(status), OPEN_IN_PLAN)


def is_candidate(status) -> np.ndarray:
    return _status(status) == CANDIDATE


def is_closed(status) -> np.ndarray:
    """Sites that take no students in the plan year (closing and closed)."""
    return np.isin(_status(status), CLOSED)


def site_band(values, default: float) -> np.ndarray:
    """A per-site utilization bound: the site's own value, else the project's (nan = none)."""
    values = np.asarray(values, dtype=float)
    return np.where(np.isnan(values), default, values)


def usable_capacity(capacity: np.ndarray, max_util: np.ndarray, forced: np.ndarray,
                    candidate: np.ndarray, open_count: int | None) -> float:
    """The most students a level's sites can take in a year (capacity x max utilization).

    ``forced`` sites are open; of the ``candidate`` sites, all may open, or only the
    ``open_count - forced`` largest when the number of open sites is fixed.
    """
    room = np.asarray(capacity, float) * np.asarray(max_util, float)
    total = float(room[forced].sum())
    cand = np.sort(room[candidate])[::-1]
    if open_count is not None:
        cand = cand[: max(int(open_count) - int(forced.sum()), 0)]
    return total + float(cand.sum())


def seat_limits(problem: Problem) -> tuple[np.ndarray, np.ndarray]:
    """(m,) the fewest and the most students each site's zone may hold in a demand row:
    capacity x minimum and x maximum utilization (0 and inf without a capacity)."""
    m = problem.n_sites
    if problem.capacity is None:
        return np.zeros(m), np.full(m, np.inf)
    return problem.min_util * problem.capacity, problem.max_util * problem.capacity


def band_excess(load: np.ndarray, hi: np.ndarray, lo: np.ndarray) -> np.ndarray:
    """Students above the cap plus students missing below the floor, summed over the demand
    rows (axis 0): how far ``load`` lies outside the band [``lo``, ``hi``]; 0 inside it."""
    return (np.maximum(load - hi, 0.0) + np.maximum(lo - load, 0.0)).sum(axis=0)


def open_sites(problem: Problem, assignment: np.ndarray) -> np.ndarray:
    """The open sites of a plan: always-open sites plus the sites that take a unit.

    A closed site never counts as open, even when a (broken) assignment uses it. When the
    problem fixes the number of open sites ``p`` and the plan uses fewer, unused
    candidates that may stay empty (no site unit of their own, no utilization floor) are
    opened, lowest index first, so that the count holds: the plan the solver returns has
    exactly ``p`` open sites, and every copy of it (interim plans, reloaded options) must
    say the same.
    """
    a = np.asarray(assignment, dtype=np.int64)
    opened = problem.always_open.copy()
    used = np.zeros(problem.n_sites, bool)
    used[a[a >= 0]] = True
    opened |= used & ~problem.closed_sites
    if problem.p is not None and opened.sum() < problem.p:
        spare = problem.candidates & ~opened
        if problem.roots is not None:
            spare &= problem.roots < 0
        if problem.capacity is not None:
            spare &= problem.min_util * problem.capacity <= TOLERANCE
        extra = np.flatnonzero(spare)[: problem.p - int(opened.sum())]
        opened[extra] = True
    return opened


def walkers_forbidden(walk: np.ndarray, always_open: np.ndarray) -> np.ndarray:
    """(n, m) bool: pairs the keep-walkers rule forbids.

    A unit within walking distance of a school open in every plan stays in the zone of one
    such school, so its pairs beyond walking distance are forbidden. Candidate sites do not
    count (a unit near a candidate that stays shut may still ride elsewhere). Written as
    forbidden pairs, the rule needs no rows of its own and every move a heuristic makes on
    allowed pairs keeps it.
    """
    walk = np.asarray(walk, bool)
    near = (walk & np.asarray(always_open, bool)[None, :]).any(axis=1)
    return near[:, None] & ~walk


def transported(problem: Problem, assignment: np.ndarray) -> np.ndarray:
    """(m,) plan-year students of each zone living beyond walking distance of its school
    (zeros without a walk zone; a unit without a site counts nowhere)."""
    a = np.asarray(assignment, np.int64)
    m = problem.n_sites
    if problem.walk is None:
        return np.zeros(m)
    ok = a >= 0
    rides = ok.copy()
    rides[ok] = ~problem.walk[np.flatnonzero(ok), a[ok]]
    return np.bincount(a[rides], weights=problem.demand[0][rides], minlength=m)


def group_shares(problem: Problem, assignment: np.ndarray) -> np.ndarray:
    """(G, T, m) each zone's share of each group per demand row (NaN: no students, or no
    group count that year); ``district_shares`` gives the level's share to compare with."""
    a = np.asarray(assignment, np.int64)
    m = problem.n_sites
    if problem.groups is None:
        return np.zeros((0, problem.n_years, m))
    ok = a >= 0
    out = np.full(problem.groups.shape[:2] + (m,), np.nan)
    for t in range(problem.n_years):
        total = np.bincount(a[ok], weights=problem.demand[t][ok], minlength=m)
        for g in range(problem.groups.shape[0]):
            row = problem.groups[g, t]
            if np.isnan(row).any():
                continue
            part = np.bincount(a[ok], weights=row[ok], minlength=m)
            with np.errstate(invalid="ignore", divide="ignore"):
                out[g, t] = np.where(total > 0, part / total, np.nan)
    return out


def district_shares(problem: Problem) -> np.ndarray:
    """(G, T) the level's share of each group per demand row (NaN: no count that year)."""
    if problem.groups is None:
        return np.zeros((0, problem.n_years))
    total = problem.demand.sum(axis=1)
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(total[None, :] > 0, problem.groups.sum(axis=2) / total[None, :],
                        np.nan)
