"""One level of a project as a problem: what a run asks for, and the arrays it becomes.

:func:`build_problem` turns validated :class:`~districting.intake.Inputs` and a
:class:`RunSettings` (level, caps, weights, locks, forbids, site status changes) into a
:class:`~districting.problem.Problem`; :func:`resolved` fills every setting left to the
project's defaults. :mod:`districting.study` solves the problem and names the outcome.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Mapping
from dataclasses import dataclass, field

import numpy as np

from . import rules
from .intake import Inputs
from .intake.feeders import neighbour
from .intake.schema import RUN_KEYS, check_run, check_value
from .problem import Problem

__all__ = ["RunSettings", "resolved", "build_problem", "level_sites", "demand_years",
           "feeder_groups", "check_practice_run", "anchor_fields", "walk_pairs",
           "group_arrays"]


@dataclass(frozen=True)
class RunSettings:
    """What one run asks for; every field is JSON-friendly so options can store it.

    ``None`` means "the project's [solve] default". ``capacity``, ``status``,
    ``max_util`` and ``min_util`` override per site id; ``locks`` and ``forbids`` map a
    unit id to a site id (forbids to a list of site ids).
    """

    level: str
    plan_year: int | None = None
    max_utilization: float | None = None
    min_utilization: float | None = None
    stability_weight: float | None = None
    max_distance: float | None = None  # metres; 0 = no limit
    max_moved: float | None = None  # 0 = no limit
    open_count: int | None = None
    gap: float | None = None
    time_limit: float | None = None
    solver: str | None = None
    travel: str | None = None  # districting.travel.MEASURES
    capacity: dict[str, float] = field(default_factory=dict)
    status: dict[str, str] = field(default_factory=dict)
    site_max_util: dict[str, float] = field(default_factory=dict)
    site_min_util: dict[str, float] = field(default_factory=dict)
    locks: dict[str, str] = field(default_factory=dict)
    forbids: dict[str, list[str]] = field(default_factory=dict)
    # feeder rule ("whole", "nested" or "": none; None: the project's [feeders]) and the
    # neighbouring level's zones it holds fixed, unit id -> site id (empty: today's zones)
    feeding: str | None = None
    given: dict[str, str] = field(default_factory=dict)
    given_name: str = ""  # where ``given`` comes from: a saved option's name, or "" (today)
    max_splits: int | None = None  # whole feeding: a lower school may feed 1 + this many
    keep_walkers: bool | None = None  # [walking] keep_walkers
    max_transported: float | None = None  # students beyond walking distance; 0 = no limit
    group_band: float | None = None  # percentage points; 0 = shares reported, no band
    transport_charge: float | None = None  # metres per student beyond walking distance
    # the option being edited, kept unless the planner asks otherwise: unit id -> site id
    # (empty: no such option), its name, and metres charged per student moved away from it
    keep_option: dict[str, str] = field(default_factory=dict)
    keep_option_name: str = ""
    keep_option_weight: float | None = None

    def to_dict(self) -> dict:
        return dataclasses.asdict(self)

    @classmethod
    def from_dict(cls, data: Mapping) -> RunSettings:
        """Settings stored by :meth:`to_dict`. Those stored before runs named a travel
        measure were measured in straight lines, and reopen so."""
        names = {f.name for f in dataclasses.fields(cls)}
        return cls(**{"travel": "straight-line", "feeding": "", "max_splits": 0,
                      **{k: v for k, v in data.items() if k in names}})

    def replace(self, **changes) -> RunSettings:
        return dataclasses.replace(self, **changes)


def resolved(inputs: Inputs, rs: RunSettings) -> RunSettings:
    """``rs`` with every ``None`` filled from the project's [solve] table and file locks."""
    s = inputs.settings
    d = s.solve
    locks = {lk.unit: lk.site for lk in s.locks if lk.level == rs.level}
    locks.update(rs.locks)
    forbids: dict[str, list[str]] = {}
    for fb in s.forbids:
        if fb.level == rs.level:
            forbids.setdefault(fb.unit, []).append(fb.site)
    for unit, sites in rs.forbids.items():
        forbids[unit] = sorted(set(forbids.get(unit, [])) | set(sites))

    def pick(value, default):
        return default if value is None else value

    full = rs.replace(
        plan_year=pick(rs.plan_year, s.plan_year),
        max_utilization=pick(rs.max_utilization, d.max_utilization),
        min_utilization=pick(rs.min_utilization, d.min_utilization),
        stability_weight=pick(rs.stability_weight, d.stability_weight),
        max_distance=pick(rs.max_distance, d.max_distance.get(rs.level, 0.0)),
        max_moved=pick(rs.max_moved, d.max_moved or 0.0),
        open_count=pick(rs.open_count, d.open_count.get(rs.level)),
        gap=pick(rs.gap, d.gap),
        time_limit=pick(rs.time_limit, d.time_limit),
        solver=pick(rs.solver, d.solver),
        travel=pick(rs.travel, d.travel),
        locks=locks,
        forbids=forbids,
        keep_walkers=pick(rs.keep_walkers, s.walking.keep_walkers),
        max_transported=pick(rs.max_transported, s.walking.max_transported.get(rs.level, 0.0)),
        group_band=pick(rs.group_band, s.groups.band_points),
        transport_charge=pick(rs.transport_charge, s.walking.transport_charge),
        keep_option_weight=pick(rs.keep_option_weight, d.keep_option_weight),
    )
    full = _resolved_feeding(inputs, full)
    check_run({key: getattr(full, key) for key in RUN_KEYS}, f"{rs.level} run settings")
    check_practice_run(full)
    return full


def _resolved_feeding(inputs: Inputs, rs: RunSettings) -> RunSettings:
    """The feeder rule from [feeders] when the run leaves it open; without ``given`` zones,
    today's zones of the neighbouring level (refused when that level has none)."""
    rule = inputs.settings.feeders.rule(rs.level) if rs.feeding is None else rs.feeding
    if not rule:
        return rs.replace(feeding="", given={}, given_name="", max_splits=0)
    if rs.max_splits is None:
        rs = rs.replace(max_splits=inputs.settings.feeders.max_splits.get(rs.level, 0))
    if rule != "whole" and rs.max_splits:
        raise ValueError(f"{rs.level}: a limit on split feeders ({rs.max_splits}) applies to "
                         "whole feeding only; fix: solve with whole feeding, or without the "
                         "limit")
    other = neighbour(inputs.settings.levels, rs.level, rule)
    if other is None:
        where = "below" if rule == "whole" else "above"
        raise ValueError(f"{rs.level}: {rule} feeding needs a level {where} it, and the "
                         f"project's levels are {', '.join(inputs.settings.levels)}; fix: "
                         f"solve {rs.level} without the feeder rule")
    if rs.given:
        return rs.replace(feeding=rule)
    today = inputs.current.get(other, np.zeros(0, np.int64))
    if not (today >= 0).any():
        raise ValueError(f"{rs.level}: {rule} feeding holds the {other} zones fixed, and the "
                         f"project has no {other} zones today; fix: add a {other} column to "
                         f"[zones] columns in {inputs.settings.path}, or name a saved {other} "
                         "option in [feeders] zones")
    ids = inputs.sites["site_id"].astype(str).to_numpy()
    units = inputs.units["unit_id"].astype(str).tolist()
    given = {u: str(ids[k]) for u, k in zip(units, today.tolist(), strict=True) if k >= 0}
    return rs.replace(feeding=rule, given=given, given_name="")


def feeder_groups(inputs: Inputs, rs: RunSettings) -> tuple[np.ndarray | None, list[str]]:
    """The neighbouring level's zone of each unit as a group index (-1 none), and the
    groups' names ("Name (id)"), for a resolved run with a feeder rule (None without)."""
    if not rs.feeding:
        return None, []
    other = neighbour(inputs.settings.levels, rs.level, rs.feeding)
    rows = level_sites(inputs, other)
    sites = inputs.sites.iloc[rows]
    pos = {sid: k for k, sid in enumerate(sites["site_id"].astype(str))}
    units = inputs.units["unit_id"].astype(str).tolist()
    groups = np.array([pos.get(rs.given.get(u, ""), -1) for u in units], np.int64)
    names = [f"{n} ({s})" for n, s in zip(sites["name"], sites["site_id"], strict=True)]
    return groups, names
def check_practice_run(rs: RunSettings) -> None:
    """Refuse a run's transport limit or group band that the project file would refuse."""
    problems = []
    for table, key, value in (("walking", "max_transported", {rs.level: rs.max_transported}),
                              ("groups", "band_points", rs.group_band),
                              ("walking", "transport_charge", rs.transport_charge)):
        _v, problem, fix = check_value(table, key, value)
        if problem is not None:
            problems.append(f"{problem}; fix: {fix}")
    if problems:
        raise ValueError(f"{rs.level} run settings: " + "; ".join(problems))


def level_sites(inputs: Inputs, level: str) -> np.ndarray:
    """Row indices into ``inputs.sites`` of the level's sites (the problem's site order)."""
    if level not in inputs.settings.levels:
        raise ValueError(
            f"level {level!r} is not in the project (levels: {', '.join(inputs.settings.levels)})"
        )
    return np.flatnonzero((inputs.sites["level"] == level).to_numpy())


def demand_years(inputs: Inputs, plan_year: int) -> tuple[int, ...]:
    """Demand rows of a problem: the plan year first, then the other projected years."""
    years = inputs.settings.years
    if plan_year not in years:
        raise ValueError(f"plan year {plan_year} is not one of the projected years {years}")
    return (plan_year, *[y for y in years if y != plan_year])


def build_problem(inputs: Inputs, rs: RunSettings) -> tuple[Problem, np.ndarray]:
    """The :class:`Problem` for one level, and the site rows it uses (into ``inputs.sites``).

    Site status in the plan year: ``open`` and ``new`` sites are open; ``closing`` and
    ``closed`` sites take no students; ``candidate`` sites are opened by the solver when
    ``open_count`` is set (the total number of open sites), otherwise all open.
    Travel (the reports' distance, the cost unless the project gives a travel table, and
    what ``max_distance`` limits) is measured by the run's ``travel`` measure.
    """
    rs = resolved(inputs, rs)
    rows = level_sites(inputs, rs.level)
    sites = inputs.sites.iloc[rows]
    site_ids = sites["site_id"].astype(str).tolist()
    unit_ids = inputs.units["unit_id"].astype(str).tolist()
    unit_pos = {u: i for i, u in enumerate(unit_ids)}
    site_pos = {s: j for j, s in enumerate(site_ids)}

    def unit_index(uid: str, what: str) -> int:
        if uid not in unit_pos:
            raise ValueError(f"{what}: unit {uid!r} is not in the project's units")
        return unit_pos[uid]

    def site_index(sid: str, what: str) -> int:
        if sid not in site_pos:
            raise ValueError(
                f"{what}: site {sid!r} is not a {rs.level} site (sites: {', '.join(site_ids)})"
            )
        return site_pos[sid]

    def per_site(overrides: Mapping, column: str, dtype=float) -> np.ndarray:
        """The site column, with per-run overrides by site id."""
        values = sites[column].tolist()
        return np.array([overrides.get(s, v) for s, v in zip(site_ids, values, strict=True)],
                        dtype=dtype)

    status = per_site(rs.status, "status", dtype=object).astype(str)
    cap = per_site(rs.capacity, "capacity")
    max_u = per_site(rs.site_max_util, "max_util")
    min_u = per_site(rs.site_min_util, "min_util")
    max_u = rules.site_band(max_u, rs.max_utilization)
    min_u = rules.site_band(min_u, rs.min_utilization)

    closed = rules.is_closed(status)
    forced = rules.open_in_plan(status)
    candidate = rules.is_candidate(status)
    p = None
    if candidate.any() and rs.open_count:
        p = int(rs.open_count)
    elif candidate.any():
        forced = forced | candidate
    if p is not None:
        open_sites = forced
    else:
        open_sites = forced
        closed = closed | ~(forced | candidate)

    distance = inputs.travel_metres(rs.travel)[:, rows]
    cost = distance if inputs.travel is None else inputs.travel[:, rows]

    forbidden = np.zeros(distance.shape, bool)
    if rs.max_distance:
        forbidden |= distance > float(rs.max_distance)
    roots = sites["unit_index"].to_numpy(dtype=np.int64)
    forbidden[roots, np.arange(len(rows))] = False  # a site's own unit may always join it
    for uid, sids in rs.forbids.items():
        for sid in sids:
            forbidden[unit_index(uid, "forbid"), site_index(sid, "forbid")] = True
    walk = walk_pairs(inputs, rs, distance)
    if walk is not None and rs.keep_walkers:
        forbidden |= rules.walkers_forbidden(walk, open_sites if p is not None else ~closed)
        forbidden[roots, np.arange(len(rows))] = False
    locks = {
        unit_index(u, "lock"): site_index(s, f"lock of unit {u}") for u, s in rs.locks.items()
    }
    for i, j in locks.items():
        forbidden[i, j] = False

    years = demand_years(inputs, int(rs.plan_year))
    counts = inputs.counts[rs.level]
    demand = np.stack([counts[inputs.year_row(y)] for y in years])
    global_to_local = np.full(len(inputs.sites), -1, dtype=np.int64)
    global_to_local[rows] = np.arange(len(rows))
    cur_global = inputs.current[rs.level]
    current = np.where(cur_global >= 0, global_to_local[np.maximum(cur_global, 0)], -1)
    groups, group_names = feeder_groups(inputs, rs)

    problem = Problem.from_arrays(
        cost,
        demand,
        capacity=cap,
        p=p,
        open_sites=open_sites,
        edges=inputs.adjacency.edges,
        roots=roots,
        locks=locks,
        max_util=max_u,
        min_util=min_u,
        closed_sites=closed,
        forbidden=forbidden,
        current=current,
        stability_weight=float(rs.stability_weight or 0.0),
        max_moved=float(rs.max_moved) if rs.max_moved else None,
        distance=distance,
        years=years,
        unit_names=unit_ids,
        site_names=[f"{n} ({s})" for n, s in zip(sites["name"], site_ids, strict=True)],
        level=rs.level,
        feeder_groups=groups,
        feeder_rule=rs.feeding or "",
        feeder_names=group_names,
        feeder_splits=int(rs.max_splits or 0),
        walk=walk,
        max_transported=float(rs.max_transported) if rs.max_transported and walk is not None
        else None,
        transport_weight=float(rs.transport_charge or 0.0) if walk is not None else 0.0,
        **group_arrays(inputs, rs.level, years, float(rs.group_band or 0.0)),
        **anchor_fields(rs, unit_ids, site_ids),
    )
    return problem, rows


def anchor_fields(rs: RunSettings, unit_ids: list[str], site_ids: list[str]) -> dict:
    """The Problem's anchor: the edited option's site per unit (a unit it leaves out or a
    school no longer of this level: -1, never charged) and the charge per student moved."""
    if not rs.keep_option:
        return {}
    site_pos = {sid: j for j, sid in enumerate(site_ids)}
    anchor = np.array([site_pos.get(rs.keep_option.get(u, ""), -1) for u in unit_ids],
                      np.int64)
    return {"anchor": anchor, "anchor_weight": float(rs.keep_option_weight or 0.0)}


def walk_pairs(inputs: Inputs, rs: RunSettings, distance: np.ndarray) -> np.ndarray | None:
    """(n, m) bool: pairs within the level's walking distance along the run's travel
    measure; None when the level has no walk zone."""
    metres = inputs.settings.walking.distance.get(rs.level, 0.0)
    return distance <= metres if metres > 0 else None


def group_arrays(inputs: Inputs, level: str, years: tuple, band_points: float) -> dict:
    """The Problem's group fields: counts per demand row, band as a share, names."""
    counts = inputs.groups.get(level)
    if counts is None or not len(counts):
        return {}
    rows = [inputs.year_row(y) for y in years]
    return {"groups": counts[:, rows, :], "group_band": band_points / 100.0,
            "group_names": inputs.settings.groups.names}
