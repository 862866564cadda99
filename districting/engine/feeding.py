"""The feeder rule on a plan: which lower zones are split, which zones leave their upper zone.

Two forms, against the neighbouring level's zones held fixed (``Problem.feeder_groups``):

- ``whole`` (solving the upper level): every unit of one lower zone goes to the same site;
  a lower zone whose units go to two or more sites is a split feeder.
- ``nested`` (solving the lower level): each zone lies inside one upper zone, the one its
  site's root unit lies in; the rule removes every other pair (``Problem.allowed``).

Units without a neighbouring zone (group -1) are free. Pure numpy; the model's rows are in
:func:`districting.engine.formulation.feeder_rows`.
"""

from __future__ import annotations

import numpy as np

from ..problem import Problem
from ..rules import seat_limits
from .findings import Finding, plural, students

__all__ = ["split_groups", "stray_sites", "feeder_breaks", "whole_findings", "nested_findings",
           "nested_seat_findings"]


def split_groups(groups: np.ndarray, assignment: np.ndarray, splits: int = 0) -> np.ndarray:
    """Groups (>= 0) whose units take more than ``splits`` + 1 different sites."""
    g = np.asarray(groups, np.int64)
    a = np.asarray(assignment, np.int64)
    keep = g >= 0
    pairs = np.unique(np.column_stack([g[keep], a[keep]]), axis=0)
    ids, counts = np.unique(pairs[:, 0], return_counts=True)
    return ids[counts > 1 + splits]


def stray_sites(problem: Problem, assignment: np.ndarray) -> np.ndarray:
    """Sites (with a root) whose zone holds a unit of another group than the root's."""
    g, r = problem.feeder_groups, problem.roots
    if g is None or r is None:
        return np.zeros(0, np.int64)
    a = np.asarray(assignment, np.int64)
    root_g = np.where(r >= 0, g[np.maximum(r, 0)], -1)
    ok = (a >= 0) & (a < problem.n_sites)
    off = ok & (g >= 0) & (root_g[np.where(ok, a, 0)] >= 0) & (g != root_g[np.where(ok, a, 0)])
    return np.unique(a[off])


def feeder_breaks(problem: Problem, assignment: np.ndarray) -> str:
    """What ``assignment`` breaks of the problem's feeder rule, in short words ("" if none)."""
    if problem.feeder_groups is None:
        return ""
    if problem.feeder_rule == "whole":
        n = problem.feeder_splits
        bad = split_groups(problem.feeder_groups, assignment, n)
        if not len(bad):
            return ""
        return (f"{len(bad)} lower zones split between schools" if not n else
                f"{len(bad)} lower zones feed more than {n + 1} schools")
    if problem.feeder_rule == "nested":
        bad = stray_sites(problem, assignment)
        return f"{len(bad)} zones reach outside their upper zone" if len(bad) else ""
    return ""


# ---------------------------------------------------------------------- why no plan
def _group_name(problem: Problem, g: int) -> str:
    names = problem.feeder_names
    return str(names[g]) if 0 <= g < len(names) else f"lower zone {g}"


def whole_findings(problem: Problem, reach: np.ndarray) -> list[Finding]:
    """Lower zones that cannot go whole to one school: no school every unit of the zone may
    join (``reach``: the pairs a zone may hold), or more students in some year than the
    largest such school's upper limit (by how many)."""
    g = problem.feeder_groups
    if problem.feeder_rule != "whole" or g is None:
        return []
    level = problem.level or "upper-level"
    seats = seat_limits(problem)[1]
    if problem.feeder_splits > 0:
        return _shared_findings(problem, reach, seats)
    out = []
    for k in np.unique(g[g >= 0]).tolist():
        units = np.flatnonzero(g == k)
        common = np.logical_and.reduce(reach[units], axis=0)
        name = _group_name(problem, k)
        if not common.any():
            out.append(Finding(
                "feeder", f"No {level} school may take every unit of the zone of {name} "
                f"({len(units)} {plural(len(units), 'unit')}): forbids, locks, the maximum "
                "distance or the zones' connection keep them apart.",
                "lift the forbid, lock or distance limit that splits it, or solve this "
                "level without whole feeding.", school=name))
            continue
        load = problem.demand[:, units].sum(axis=1)
        room = float(seats[common].max())
        t = int(np.argmax(load))
        if load[t] > room + 1e-6:
            best = problem.site_label(int(np.flatnonzero(common)[np.argmax(seats[common])]))
            out.append(Finding(
                "feeder", f"The zone of {name} has {students(load[t])} students in "
                f"{problem.year_label(t)}, and the largest {level} school it may feed whole, "
                f"{best}, takes at most {students(room, up=False)}: "
                f"{students(load[t] - room)} too many.",
                "raise that school's capacity or highest utilization, or solve this level "
                "without whole feeding.", school=name, year=problem.year_label(t)))
    return out


def _shared_findings(problem: Problem, reach: np.ndarray, seats: np.ndarray
                     ) -> list[Finding]:
    """With at most N splits: lower zones whose students, in some year, outnumber the
    seats of the N + 1 largest schools any of their units may join."""
    g, most = problem.feeder_groups, problem.feeder_splits + 1
    level = problem.level or "upper-level"
    out = []
    for k in np.unique(g[g >= 0]).tolist():
        units = np.flatnonzero(g == k)
        near = np.sort(seats[reach[units].any(axis=0)])[::-1]
        room = float(near[:most].sum())
        out += _too_many(problem, "feeder", k, problem.demand[:, units].sum(axis=1), room,
                         "has {load} students in {year}, and the "
                         f"{most} largest {level} schools it may feed seat at most "
                         "{room}: {over} too many.", "allow more splits, raise a capacity, or "
                         "solve this level without a feeder rule.")
    return out


def _too_many(problem: Problem, rule: str, k: int, load: np.ndarray, room: float,
              words: str, fix: str) -> list[Finding]:
    """A finding when ``load`` (students per year) of zone ``k`` exceeds ``room`` seats in
    some year, the worst year named; ``words`` follow "The zone of <name> " with {load},
    {year}, {room} and {over} filled in."""
    t = int(np.argmax(load))
    if load[t] <= room + 1e-6:
        return []
    name = _group_name(problem, k)
    text = words.format(load=students(load[t]), year=problem.year_label(t),
                        room=students(room, up=False), over=students(load[t] - room))
    return [Finding(rule, f"The zone of {name} {text}", fix.format(name=name), school=name,
                    year=problem.year_label(t))]


def nested_seat_findings(problem: Problem) -> list[Finding]:
    """Upper zones whose students outnumber, in some year, the seats of the schools that
    may take them under nesting: the schools standing in that zone (every school that is
    not closed, candidates included) and those standing in no upper zone."""
    g, roots = problem.feeder_groups, problem.roots
    if problem.feeder_rule != "nested" or g is None or roots is None or problem.capacity is None:
        return []
    seats = np.where(problem.closed_sites, 0.0, seat_limits(problem)[1])
    root_g = np.where(roots >= 0, g[np.maximum(roots, 0)], -1)
    free_seats = float(seats[root_g < 0].sum())
    level = problem.level or "lower-level"
    out = []
    for k in np.unique(g[g >= 0]).tolist():
        if not ((root_g == k) & ~problem.closed_sites).any():
            continue  # no school inside it at all: nested_findings names its units
        room = float(seats[root_g == k].sum()) + free_seats
        out += _too_many(problem, "nested", k, problem.demand[:, g == k].sum(axis=1), room,
                         f"holds {{load}} {level} students in {{year}}, and the {level} "
                         "schools inside it seat at most {room}: {over} too many to stay "
                         "inside it.", f"raise the capacity of a {level} school inside the "
                         "zone of {name}, or solve this level without nesting.")
    return out


def _lock_finding(problem: Problem, i: int) -> Finding:
    """A locked unit whose school stands outside the unit's upper zone."""
    j, unit = int(problem.locks[i]), problem.unit_label(i)
    name = _group_name(problem, int(problem.feeder_groups[i]))
    return Finding("lock", f"{unit} is locked to {problem.site_label(j)}, which stands outside "
                   f"the zone of {name} that {unit} lies in, so nesting keeps it out.",
                   "remove the lock, or solve this level without nesting.",
                   school=problem.site_label(j), unit=unit)


def nested_findings(problem: Problem) -> list[Finding]:
    """Units that the nested rule leaves without a school: their upper zone holds no open
    or candidate school of this level."""
    g = problem.feeder_groups
    if problem.feeder_rule != "nested" or g is None:
        return []
    plain = problem.replace(feeder_rule="").allowed
    lost = np.flatnonzero(~problem.allowed.any(axis=1) & plain.any(axis=1))
    locked = lost[problem.locks[lost] >= 0]
    out = [_lock_finding(problem, int(i)) for i in locked.tolist()]
    lost = lost[problem.locks[lost] < 0]
    for k in np.unique(g[lost]).tolist():
        units = lost[g[lost] == k]
        name = _group_name(problem, k)
        shown = ", ".join(problem.unit_label(int(i)) for i in units[:5])
        more = f" and {len(units) - 5} more" if len(units) > 5 else ""
        out.append(Finding(
            "nested", f"{len(units)} {plural(len(units), 'unit')} ({shown}{more}) lie in the "
            f"zone of {name}, where no {problem.level or 'lower-level'} school stands that "
            "may take them, so they cannot stay inside it.",
            f"open a school inside the zone of {name}, or solve this level without nesting.",
            school=name, unit=problem.unit_label(int(units[0]))))
    return out
