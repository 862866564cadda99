"""An independent check of a finished plan, on plain data.

Written apart from the engine on purpose: it reads no solver, model or local-search code
(neither :mod:`districting.engine` nor :mod:`districting.plan`), so a bug there cannot
hide itself here. Zones are tested for connectivity with
``scipy.sparse.csgraph.connected_components`` on the sub-graph each zone induces; loads are
plain sums per projected year. :func:`check_plan` returns one :class:`Finding` per broken
rule, each naming the zone, school, year or unit, in words.

:func:`facts_of_problem` turns an engine :class:`~districting.problem.Problem` into the
plain :class:`PlanFacts` (reading only its stored arrays, none of its derived views), and
:func:`facts_of_outcome` does the same for a saved option of a project, adding the
maximum distance it was run with. ``districting verify PROJECT --option NAME`` prints the
findings for a saved option.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field, replace

import numpy as np
import scipy.sparse as sp
from scipy.sparse.csgraph import connected_components

__all__ = ["Finding", "PlanFacts", "check_plan", "facts_of_problem", "facts_of_outcome"]

TOL = 1e-6  # students; loads are sums of counts, compared with a little slack for rounding


@dataclass(frozen=True)
class Finding:
    """One broken rule: ``rule`` is a short key, ``message`` says it in words."""

    #: assigned, closed, open_count, root, connected, capacity, floor, lock, forbid,
    #: distance, moved, feeder (a lower zone split), nested (a zone outside its upper zone),
    #: walkers, transport or group
    rule: str
    message: str
    site: int | None = None
    unit: int | None = None
    year: int | None = None  # demand row

    def __str__(self) -> str:
        return self.message


@dataclass(frozen=True)
class PlanFacts:
    """What a plan must satisfy, as plain arrays (n units, m sites, T projected years).

    ``must_open`` sites are open in every plan; sites neither closed nor must-open are
    candidates, opened by taking units, and ``open_count`` (if given) fixes how many sites
    are open in all. ``max_distance`` applies to ``distance`` except for a school's own unit
    and locked units (the board's decision stands).
    """

    demand: np.ndarray  # (T, n)
    capacity: np.ndarray | None  # (m,)
    max_util: np.ndarray  # (m,)
    min_util: np.ndarray  # (m,)
    must_open: np.ndarray  # (m,) bool
    closed: np.ndarray  # (m,) bool
    open_count: int | None = None
    edges: np.ndarray | None = None  # (k, 2); given: every zone connected, holds its root
    roots: np.ndarray | None = None  # (m,) unit of each site, -1 none
    locks: dict[int, int] = field(default_factory=dict)  # unit -> site
    forbidden: np.ndarray | None = None  # (n, m) bool
    distance: np.ndarray | None = None  # (n, m)
    max_distance: float | None = None
    current: np.ndarray | None = None  # (n,) today's site, -1 none
    max_moved: float | None = None  # plan-year students (row 0)
    unit_ids: Sequence[str] = ()
    site_ids: Sequence[str] = ()
    years: Sequence = ()
    #: the neighbouring level's zone of each unit (-1 none) and the feeder rule against it:
    #: "whole" (one school per lower zone) or "nested" (each zone inside the upper zone of
    #: its school's own unit); names of those zones for messages
    feeder_groups: np.ndarray | None = None
    feeder_rule: str = ""
    feeder_names: Sequence[str] = ()
    feeder_splits: int = 0  # whole feeding: a lower zone may feed 1 + this many schools
    walk: np.ndarray | None = None  # (n, m) bool: pair within walking distance
    keep_walkers: bool = False  # a unit that can walk to a must-open school walks
    max_transported: float | None = None  # plan-year students beyond walking distance
    groups: np.ndarray | None = None  # (G, T, n) group students; NaN rows: no band
    group_band: float = 0.0  # share of a group around the district's share; 0: none
    group_names: Sequence[str] = ()

    @property
    def n_units(self) -> int:
        return self.demand.shape[1]

    @property
    def n_sites(self) -> int:
        return len(self.max_util)

    def unit(self, i: int) -> str:
        return str(self.unit_ids[i]) if len(self.unit_ids) else f"unit {i}"

    def site(self, j: int) -> str:
        return str(self.site_ids[j]) if len(self.site_ids) else f"school {j}"

    def year(self, t: int) -> str:
        return str(self.years[t]) if len(self.years) else f"year row {t}"


def _num(v: float) -> str:
    return f"{v:,.0f}" if abs(v - round(v)) < 1e-9 else f"{v:,.2f}"


def check_plan(facts: PlanFacts, assignment) -> list[Finding]:
    """Every rule ``assignment`` (site index per unit) breaks under ``facts``; [] if valid."""
    a = np.asarray(assignment, dtype=np.int64)
    n, m = facts.n_units, facts.n_sites
    if a.shape != (n,):
        return [Finding("assigned", f"the plan has {a.size} units, the problem {n}")]
    bad = np.flatnonzero((a < 0) | (a >= m))
    if bad.size:
        return [Finding("assigned", f"{facts.unit(i)} has no school", unit=int(i))
                for i in bad.tolist()]
    used = np.zeros(m, bool)
    used[a] = True
    opened = used | facts.must_open
    out: list[Finding] = []
    out += _closed(facts, a)
    out += _count(facts, opened)
    out += _roots(facts, a, opened)
    out += _connected(facts, a)
    out += _bands(facts, a, opened)
    out += _locks(facts, a)
    out += _forbids(facts, a)
    out += _distance(facts, a)
    out += _moved(facts, a)
    out += _feeding(facts, a)
    out += _walkers(facts, a)
    out += _transport(facts, a)
    out += _groups(facts, a, opened)
    return out


def _closed(facts: PlanFacts, a: np.ndarray) -> list[Finding]:
    out = []
    for j in np.flatnonzero(facts.closed).tolist():
        units = np.flatnonzero(a == j)
        if units.size:
            out.append(Finding("closed", f"{facts.site(j)} is closed but takes {units.size} "
                               f"unit(s), e.g. {facts.unit(int(units[0]))}", site=j,
                               unit=int(units[0])))
    return out


def _count(facts: PlanFacts, opened: np.ndarray) -> list[Finding]:
    """``open_count`` sites open: those in use or bound to open, plus, when fewer, sites
    that may open without students (not closed, no unit of their own to hold, no floor):
    the p-median model opens such a site empty to meet the count."""
    k = int(opened.sum())
    p = facts.open_count
    if p is None or k == p:
        return []
    if k < p:
        empty_ok = ~opened & ~facts.closed
        if facts.roots is not None:
            empty_ok &= np.asarray(facts.roots) < 0
        if facts.capacity is not None:
            empty_ok &= facts.min_util * facts.capacity <= TOL
        if k + int(empty_ok.sum()) >= p:
            return []
    return [Finding("open_count", f"{k} schools are open, the run asks for {p}")]


def _roots(facts: PlanFacts, a: np.ndarray, opened: np.ndarray) -> list[Finding]:
    if facts.roots is None or facts.edges is None:
        return []
    out = []
    for j in np.flatnonzero(opened).tolist():
        r = int(facts.roots[j])
        if r >= 0 and a[r] != j:
            out.append(Finding("root", f"{facts.site(j)} is open but its own unit "
                               f"{facts.unit(r)} is in the zone of {facts.site(int(a[r]))}",
                               site=j, unit=r))
    return out


def _connected(facts: PlanFacts, a: np.ndarray) -> list[Finding]:
    if facts.edges is None:
        return []
    e = np.asarray(facts.edges, dtype=np.int64).reshape(-1, 2)
    n = facts.n_units
    same = a[e[:, 0]] == a[e[:, 1]]  # keep only edges inside one zone
    inside = e[same]
    g = sp.coo_matrix((np.ones(len(inside)), (inside[:, 0], inside[:, 1])), shape=(n, n))
    _, label = connected_components(g, directed=False)
    out = []
    for j in np.unique(a).tolist():
        units = np.flatnonzero(a == j)
        pieces, sizes = np.unique(label[units], return_counts=True)
        if len(pieces) < 2:
            continue
        root = -1 if facts.roots is None else int(facts.roots[j])
        main = label[root] if root >= 0 and a[root] == j else pieces[np.argmax(sizes)]
        stray = units[label[units] != main]
        names = ", ".join(facts.unit(int(i)) for i in stray[:3])
        more = f" and {stray.size - 3} more" if stray.size > 3 else ""
        out.append(Finding("connected", f"the zone of {facts.site(j)} is in {len(pieces)} "
                           f"pieces: {names}{more} cut off from the rest", site=j,
                           unit=int(stray[0])))
    return out


def _bands(facts: PlanFacts, a: np.ndarray, opened: np.ndarray) -> list[Finding]:
    if facts.capacity is None:
        return []
    out = []
    for t in range(facts.demand.shape[0]):
        for j in np.flatnonzero(opened).tolist():
            load = float(facts.demand[t][a == j].sum())
            cap = float(facts.capacity[j])
            top, floor = facts.max_util[j] * cap, facts.min_util[j] * cap
            if load > top + TOL:
                out.append(Finding("capacity", f"{facts.site(j)} has {_num(load)} students in "
                                   f"{facts.year(t)}, above its limit of {_num(top)} "
                                   f"({facts.max_util[j]:.0%} of {_num(cap)} seats)",
                                   site=j, year=t))
            if load < floor - TOL:
                out.append(Finding("floor", f"{facts.site(j)} has {_num(load)} students in "
                                   f"{facts.year(t)}, below its floor of {_num(floor)} "
                                   f"({facts.min_util[j]:.0%} of {_num(cap)} seats)",
                                   site=j, year=t))
    return out


def _locks(facts: PlanFacts, a: np.ndarray) -> list[Finding]:
    return [Finding("lock", f"{facts.unit(i)} is locked to {facts.site(j)} but is in the zone "
                    f"of {facts.site(int(a[i]))}", site=j, unit=i)
            for i, j in sorted(facts.locks.items()) if a[i] != j]


def _forbids(facts: PlanFacts, a: np.ndarray) -> list[Finding]:
    if facts.forbidden is None:
        return []
    hit = np.flatnonzero(facts.forbidden[np.arange(facts.n_units), a])
    return [Finding("forbid", f"{facts.unit(i)} is in the zone of {facts.site(int(a[i]))}, a "
                    "pair that is forbidden", site=int(a[i]), unit=i) for i in hit.tolist()]


def _distance(facts: PlanFacts, a: np.ndarray) -> list[Finding]:
    if facts.max_distance is None or facts.distance is None:
        return []
    far = facts.distance[np.arange(facts.n_units), a] > facts.max_distance + TOL
    if facts.roots is not None:
        far[facts.roots[facts.roots >= 0]] = False
    far[list(facts.locks)] = False
    return [Finding("distance", f"{facts.unit(i)} is {_num(facts.distance[i, a[i]])} from "
                    f"{facts.site(int(a[i]))}, beyond the maximum distance of "
                    f"{_num(facts.max_distance)}", site=int(a[i]), unit=i)
            for i in np.flatnonzero(far).tolist()]


def _moved(facts: PlanFacts, a: np.ndarray) -> list[Finding]:
    if facts.max_moved is None or facts.current is None:
        return []
    cur = np.asarray(facts.current)
    moved = float(facts.demand[0][(cur >= 0) & (a != cur)].sum())
    if moved <= facts.max_moved + TOL:
        return []
    return [Finding("moved", f"{_num(moved)} students change school in {facts.year(0)}, above "
                    f"the limit of {_num(facts.max_moved)}", year=0)]


def _group(facts: PlanFacts, g: int) -> str:
    return str(facts.feeder_names[g]) if g < len(facts.feeder_names) else f"zone {g}"


def _feeding(facts: PlanFacts, a: np.ndarray) -> list[Finding]:
    """Whole feeding: the schools each lower zone's units go to (one at most); nesting:
    the upper zones each school's zone reaches (only that of its own unit)."""
    if facts.feeder_groups is None or facts.feeder_rule not in ("whole", "nested"):
        return []
    groups = [int(g) for g in facts.feeder_groups]
    out = []
    if facts.feeder_rule == "whole":
        schools: dict[int, set[int]] = {}
        for i, g in enumerate(groups):
            if g >= 0:
                schools.setdefault(g, set()).add(int(a[i]))
        most = 1 + max(int(facts.feeder_splits), 0)
        for g, js in sorted(schools.items()):
            if len(js) > most:
                names = ", ".join(facts.site(j) for j in sorted(js))
                rule = ("whole feeding sends it to one" if most == 1 else
                        f"at most {most} are allowed")
                out.append(Finding("feeder", f"the zone of {_group(facts, g)} is split between "
                                   f"{len(js)} schools ({names}); {rule}"))
        return out
    if facts.roots is None:
        return [Finding("nested", "nesting needs each school's own unit, and none is given")]
    for j in range(facts.n_sites):
        r = int(facts.roots[j])
        if r < 0 or groups[r] < 0:
            continue
        away = [i for i in range(facts.n_units)
                if int(a[i]) == j and groups[i] >= 0 and groups[i] != groups[r]]
        if away:
            out.append(Finding("nested", f"the zone of {facts.site(j)} reaches outside the zone "
                               f"of {_group(facts, groups[r])} ({len(away)} units, e.g. "
                               f"{facts.unit(away[0])})", site=j, unit=away[0]))
    return out


def _walkers(facts: PlanFacts, a: np.ndarray) -> list[Finding]:
    if not facts.keep_walkers or facts.walk is None:
        return []
    walk = np.asarray(facts.walk, bool)
    can = (walk & facts.must_open[None, :] & ~facts.closed[None, :]).any(axis=1)
    rides = can & ~walk[np.arange(facts.n_units), a]
    if facts.roots is not None:
        rides[facts.roots[facts.roots >= 0]] = False
    rides[list(facts.locks)] = False
    return [Finding("walkers", f"{facts.unit(i)} lies within walking distance of an open "
                    f"school but is in the zone of {facts.site(int(a[i]))}, beyond it",
                    site=int(a[i]), unit=i) for i in np.flatnonzero(rides).tolist()]


def _transport(facts: PlanFacts, a: np.ndarray) -> list[Finding]:
    if facts.max_transported is None or facts.walk is None:
        return []
    rides = ~np.asarray(facts.walk, bool)[np.arange(facts.n_units), a]
    count = float(facts.demand[0][rides].sum())
    if count <= facts.max_transported + TOL:
        return []
    return [Finding("transport", f"{_num(count)} students live beyond walking distance of "
                    f"their school in {facts.year(0)}, above the limit of "
                    f"{_num(facts.max_transported)}", year=0)]


def _groups(facts: PlanFacts, a: np.ndarray, opened: np.ndarray) -> list[Finding]:
    if facts.groups is None or not facts.group_band > 0:
        return []
    out = []
    for g in range(facts.groups.shape[0]):
        name = facts.group_names[g] if len(facts.group_names) > g else f"group {g}"
        for t in range(facts.demand.shape[0]):
            counts = facts.groups[g, t]
            if np.isnan(counts).any() or not facts.demand[t].sum() > 0:
                continue
            district = counts.sum() / facts.demand[t].sum()
            for j in np.flatnonzero(opened).tolist():
                students = float(facts.demand[t][a == j].sum())
                if students <= 0:
                    continue
                share = float(counts[a == j].sum()) / students
                if abs(share - district) > facts.group_band + TOL:
                    out.append(Finding("group", f"{facts.site(j)} has {share:.1%} {name} "
                                       f"students in {facts.year(t)}, outside "
                                       f"{district:.1%} +- {facts.group_band * 100:g} points",
                                       site=j, year=t))
    return out


# ------------------------------------------------------------------------------ adapters
def facts_of_problem(problem) -> PlanFacts:
    """The rules of an engine :class:`~districting.problem.Problem`, as plain data.

    Reads the stored arrays only. A pair with no finite cost (beyond a maximum distance, or
    missing from a travel table) counts as forbidden, unless the unit is locked there.
    """
    n, m = problem.cost.shape
    forbidden = np.array(problem.forbidden, bool) | ~np.isfinite(problem.cost)
    locks = {int(i): int(problem.locks[i]) for i in np.flatnonzero(problem.locks >= 0)}
    for i, j in locks.items():
        forbidden[i, j] = bool(problem.forbidden[i, j])
    closed = np.array(problem.closed_sites, bool)
    must = ~closed if problem.p is None else np.array(problem.open_sites, bool)
    cap = None if problem.capacity is None else np.array(problem.capacity, float)
    return PlanFacts(
        demand=np.array(problem.demand, float),
        capacity=cap,
        max_util=np.array(problem.max_util, float),
        min_util=np.array(problem.min_util, float),
        must_open=must,
        closed=closed,
        open_count=problem.p,
        edges=None if problem.edges is None else np.array(problem.edges),
        roots=None if problem.roots is None else np.array(problem.roots),
        locks=locks,
        forbidden=forbidden,
        current=np.array(problem.current),
        max_moved=problem.max_moved,
        walk=None if problem.walk is None else np.array(problem.walk, bool),
        max_transported=problem.max_transported,
        groups=None if problem.groups is None else np.array(problem.groups, float),
        group_band=float(problem.group_band),
        group_names=tuple(problem.group_names),
        unit_ids=tuple(problem.unit_names),
        site_ids=tuple(problem.site_names),
        years=tuple(problem.years),
        feeder_groups=(None if problem.feeder_groups is None
                       else np.array(problem.feeder_groups)),
        feeder_rule=problem.feeder_rule,
        feeder_names=tuple(problem.feeder_names),
        feeder_splits=int(problem.feeder_splits),
    )


def facts_of_outcome(outcome) -> PlanFacts:
    """The rules of a project option (:class:`~districting.study.Outcome`), as plain data.

    Forbids are the run's explicit ones by unit and site id; the maximum distance is checked
    on its own against travel by the run's measure (along streets, around barriers or in a
    straight line), so a finding says which rule a unit breaks.
    """
    facts = facts_of_problem(outcome.problem)
    rs = outcome.settings
    unit_pos = {u: i for i, u in enumerate(outcome.unit_ids)}
    site_pos = {s: j for j, s in enumerate(outcome.site_ids)}
    forbidden = ~np.isfinite(outcome.problem.cost)  # missing from a travel table
    for uid, sids in (rs.forbids or {}).items():
        for sid in sids:
            if uid in unit_pos and sid in site_pos:
                forbidden[unit_pos[uid], site_pos[sid]] = True
    forbidden[list(facts.locks), list(facts.locks.values())] = False  # the board's lock wins
    travel = outcome.problem.distance
    limit = float(rs.max_distance) if rs.max_distance else None
    metres = outcome.inputs.settings.walking.distance.get(outcome.level, 0.0)
    walk = None if not metres or travel is None else np.asarray(travel) <= metres
    return replace(facts, forbidden=forbidden, distance=travel, max_distance=limit, walk=walk,
                   keep_walkers=bool(getattr(rs, "keep_walkers", False)) and walk is not None)


def report(findings: list[Finding], facts: PlanFacts, label: str = "the plan") -> str:
    """A few lines for people: every finding, or what was checked when there is none."""
    if findings:
        lines = [f"{label} breaks {len(findings)} rule(s):"]
        lines += [f"  - {f.message}" for f in findings]
        return "\n".join(lines)
    years = ", ".join(facts.year(t) for t in range(facts.demand.shape[0]))
    checked = ["every unit has an allowed school", "closed schools take nobody",
               "locks are kept"]
    if facts.edges is not None:
        checked.append("every zone is connected and holds its school's unit")
    if facts.capacity is not None:
        checked.append(f"every open school is inside its band in {years}")
    if facts.max_distance is not None:
        checked.append(f"no trip is longer than {_num(facts.max_distance)}")
    if facts.max_moved is not None:
        checked.append("the limit on students moved holds")
    if facts.feeder_groups is not None and facts.feeder_rule == "whole":
        checked.append("every lower zone goes whole to one school" if not facts.feeder_splits
                       else f"no lower zone feeds more than {facts.feeder_splits + 1} schools")
    if facts.feeder_groups is not None and facts.feeder_rule == "nested":
        checked.append("every zone lies inside one upper zone")
    if facts.keep_walkers:
        checked.append("units within walking distance of an open school walk")
    if facts.max_transported is not None:
        checked.append("the limit on students needing transport holds")
    if facts.groups is not None and facts.group_band > 0:
        checked.append(f"every school's group shares are within {facts.group_band * 100:g} "
                       "points of the district's")
    return f"{label} is valid: " + "; ".join(checked) + "."
