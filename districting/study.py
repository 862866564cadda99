"""One level of a project, as a problem and as an outcome with names.

:func:`build_problem` (:mod:`districting.level_problem`) turns validated
:class:`~districting.intake.Inputs` and a :class:`RunSettings` (level, caps, weights, locks,
forbids, site status changes) into a :class:`~districting.problem.Problem`; :func:`run`
solves it and wraps the
:class:`~districting.plan.Plan` in an :class:`Outcome` that knows unit ids, site ids and
names. Options, exports, the packet and the workbench all work on Outcomes.
"""

from __future__ import annotations

import dataclasses
import datetime as _dt
from collections.abc import Callable, Mapping
from dataclasses import dataclass

import numpy as np

from . import rules
from .engine import Session
from .intake import Inputs
from .level_problem import (
    RunSettings,
    anchor_fields,
    build_problem,
    check_practice_run,
    demand_years,
    feeder_groups,
    group_arrays,
    level_sites,
    resolved,
    walk_pairs,
)
from .plan import Plan, PlanMetrics, plan_metrics
from .problem import Problem
from .travel.measures import distance_note, measure_line

__all__ = ["RunSettings", "Outcome", "build_problem", "resolved", "run", "outcome_from_assignment",
           "now_iso", "level_sites", "demand_years", "feeder_groups", "check_practice_run",
           "anchor_fields", "walk_pairs", "group_arrays"]


@dataclass(frozen=True, eq=False)
class Outcome:
    """A plan for one level of a project, with the names staff know it by."""

    inputs: Inputs
    settings: RunSettings  # resolved: no None left
    site_rows: np.ndarray  # problem site j -> row of inputs.sites
    problem: Problem
    plan: Plan
    name: str = ""
    created: str = ""  # ISO 8601, UTC

    @property
    def level(self) -> str:
        return self.settings.level

    @property
    def sites(self):
        """The level's sites (GeoDataFrame), in problem order."""
        return self.inputs.sites.iloc[self.site_rows].reset_index(drop=True)

    @property
    def site_ids(self) -> list[str]:
        return self.sites["site_id"].astype(str).tolist()

    @property
    def unit_ids(self) -> list[str]:
        return self.inputs.units["unit_id"].astype(str).tolist()

    @property
    def assignment(self) -> np.ndarray:
        return self.plan.assignment

    @property
    def current(self) -> np.ndarray:
        return self.problem.current

    def site_id_of(self, assignment: np.ndarray) -> np.ndarray:
        """Site id per unit for an index assignment ('' where -1)."""
        ids = np.array(self.site_ids + [""], dtype=object)
        return ids[np.where(assignment >= 0, assignment, len(self.site_ids))]

    @property
    def metrics(self) -> PlanMetrics:
        return self.plan.metrics or plan_metrics(self.problem, self.plan.assignment,
                                                 self.plan.open_sites)

    @property
    def current_metrics(self) -> PlanMetrics:
        """Figures of today's zones under the same problem (students, utilization...)."""
        cur = self.problem.current
        return plan_metrics(self.problem.replace(current=cur), cur)

    @property
    def travel_line(self) -> str:
        """How travel was measured, in one line ("Travel: along streets")."""
        return measure_line(self.settings.travel, table=self.inputs.travel is not None)

    @property
    def distance_note(self) -> str:
        """The packet's sentence on what its distances are."""
        return distance_note(self.settings.travel, table=self.inputs.travel is not None)

    def renamed(self, name: str) -> Outcome:
        return dataclasses.replace(self, name=name)


def now_iso() -> str:
    return _dt.datetime.now(_dt.UTC).replace(microsecond=0).isoformat()


def run(
    inputs: Inputs,
    rs: RunSettings,
    *,
    name: str = "",
    progress: Callable | None = None,
    cancel: Callable[[], bool] | None = None,
    previous: Plan | None = None,
    sessions: dict | None = None,
    on_plan: Callable[[Outcome], None] | None = None,
) -> Outcome:
    """Solve one level; ``progress`` gets each :class:`~districting.plan.Round`.

    ``sessions`` is a dict the caller keeps between runs (the workbench keeps one per
    planner): it holds a :class:`~districting.engine.Session` per level and solver, so a
    rerun after a lock or a cap reuses the cuts found so far and, when the change only
    removes plans, the bound already proven. ``on_plan`` gets an interim Outcome (status
    ``feasible``, its gap so far) each time the solver finds a better valid plan, so a
    caller can show it while the solve goes on.
    """
    full = resolved(inputs, rs)
    problem, rows = build_problem(inputs, full)
    solver = full.solver or "highs"
    key = (full.level, solver)
    session = None if sessions is None else sessions.get(key)
    if session is None:
        session = Session(problem, solver=solver)
        if sessions is not None:
            sessions[key] = session
    else:
        session.update(problem)
    relay = progress
    if on_plan is not None:
        shown: list = [None]

        def relay(rnd) -> None:
            if progress is not None:
                progress(rnd)
            if rnd.best is not None and rnd.best is not shown[0]:
                shown[0] = rnd.best
                a = np.asarray(rnd.best, np.int64)
                opened = rules.open_sites(problem, a)
                interim = Plan("feasible", float(rnd.objective), float(rnd.bound),
                               float(rnd.gap), a, opened, rounds=rnd.number,
                               solve_seconds=rnd.seconds, route=solver,
                               metrics=plan_metrics(problem, a, opened))
                on_plan(Outcome(inputs, full, rows, problem, interim, name=name,
                                created=now_iso()))

    plan = session.solve(
        float(full.gap),
        full.time_limit,
        progress=relay,
        cancel=cancel,
        start=None if previous is None else previous.assignment,
    )
    return Outcome(inputs, full, rows, problem, plan, name=name, created=now_iso())


def outcome_from_assignment(
    inputs: Inputs, rs: RunSettings, assignment, plan_fields: Mapping | None = None,
    *, name: str = "", created: str = "",
) -> Outcome:
    """Rebuild an Outcome from a stored assignment (site index per unit), e.g. an option."""
    full = resolved(inputs, rs)
    problem, rows = build_problem(inputs, full)
    a = np.asarray(assignment, dtype=np.int64)
    opened = rules.open_sites(problem, a)
    fields = dict(plan_fields or {})
    plan = Plan(
        status=fields.pop("status", "feasible"),
        objective=float(fields.pop("objective", float((problem.weighted_cost[
            np.arange(len(a)), a]).sum()))),
        bound=float(fields.pop("bound", float("nan"))),
        gap=float(fields.pop("gap", float("nan"))),
        assignment=a,
        open_sites=opened,
        metrics=plan_metrics(problem, a, opened),
        **{k: v for k, v in fields.items() if k in {"message", "rounds", "cuts", "route",
                                                    "build_seconds", "solve_seconds"}},
    )
    return Outcome(inputs, full, rows, problem, plan, name=name, created=created or now_iso())

