"""A plan: the engine's answer, with what it proved and the numbers staff ask for.

:class:`Plan` is index-based (unit i -> site j) like :class:`~districting.problem.Problem`;
names and geometry are added downstream (:mod:`districting.study`,
:mod:`districting.outputs.zones`).
:func:`plan_metrics` computes the per-school figures from any assignment, so a plan read
back from a file is summarized by the same code as a fresh one.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from .problem import Problem

__all__ = ["Plan", "PlanMetrics", "plan_metrics", "STATUSES"]

#: optimal      proven within the requested gap (contiguity verified when required)
#: feasible     a valid plan, but its gap is above the request (e.g. a round limit)
#: time_limit   stopped by the time limit; the best valid plan found, with its gap
#: infeasible   no plan satisfies the constraints; ``message`` says why in words
#: cancelled    stopped by the user; the best valid plan found so far
STATUSES = ("optimal", "feasible", "time_limit", "infeasible", "cancelled")


@dataclass(frozen=True)
class PlanMetrics:
    """Per-site and overall figures of one assignment."""

    load: np.ndarray  # (T, m) students per site per demand row
    utilization: np.ndarray  # (T, m) load / capacity (nan without capacity)
    moved_in: np.ndarray  # (m,) plan-year students assigned here who are elsewhere today
    moved_out: np.ndarray  # (m,) plan-year students here today who are assigned elsewhere
    students_moved: float  # plan-year students whose site changes
    units_moved: int
    mean_distance: np.ndarray  # (m,) student-weighted mean travel per site (nan if empty)
    max_distance: np.ndarray  # (m,) longest travel of a unit with students, per site
    overall_mean_distance: float
    overall_max_distance: float
    out_of_band: np.ndarray  # (m,) bool: open site above u_max or below u_min in some year


def plan_metrics(problem: Problem, assignment: np.ndarray, open_sites=None) -> PlanMetrics:
    """Figures of ``assignment`` (site index per unit, -1 for unassigned) under ``problem``."""
    a = np.asarray(assignment, dtype=np.int64)
    n, m, T = problem.n_units, problem.n_sites, problem.n_years
    ok = a >= 0
    idx = np.flatnonzero(ok)
    load = np.zeros((T, m))
    for t in range(T):
        load[t] = np.bincount(a[ok], weights=problem.demand[t, ok], minlength=m)
    if problem.capacity is None:
        util = np.full((T, m), np.nan)
    else:
        with np.errstate(divide="ignore", invalid="ignore"):
            util = load / problem.capacity[None, :]
    d0 = problem.demand[0]
    cur = problem.current
    moved = ok & (cur >= 0) & (a != cur)
    moved_in = np.bincount(a[moved], weights=d0[moved], minlength=m)
    moved_out = np.bincount(cur[moved], weights=d0[moved], minlength=m)
    travel = np.full(n, np.nan)
    travel[idx] = problem.travel[idx, a[idx]]
    has = ok & (d0 > 0)
    w_sum = np.bincount(a[has], weights=d0[has], minlength=m)
    wd_sum = np.bincount(a[has], weights=d0[has] * travel[has], minlength=m)
    with np.errstate(divide="ignore", invalid="ignore"):
        mean = np.where(w_sum > 0, wd_sum / w_sum, np.nan)
    mx = np.full(m, np.nan)
    if has.any():
        order = np.argsort(travel[has])
        mx[a[has][order]] = travel[has][order]  # last write per site is the largest
    if open_sites is None:
        open_mask = np.bincount(a[ok], minlength=m) > 0
    else:
        open_mask = np.asarray(open_sites, bool)
    oob = out_of_band(problem, load, open_mask)
    total = d0[has].sum()
    return PlanMetrics(
        load=load,
        utilization=util,
        moved_in=moved_in,
        moved_out=moved_out,
        students_moved=float(d0[moved].sum()),
        units_moved=int(moved.sum()),
        mean_distance=mean,
        max_distance=mx,
        overall_mean_distance=float((d0[has] * travel[has]).sum() / total) if total else 0.0,
        overall_max_distance=float(np.nanmax(travel[has])) if has.any() else 0.0,
        out_of_band=oob,
    )


def out_of_band(problem: Problem, load: np.ndarray, open_mask: np.ndarray) -> np.ndarray:
    """(m,) bool: an open site above its cap or below its floor in any year of ``load``."""
    if problem.capacity is None:
        return np.zeros(problem.n_sites, bool)
    tol = 1e-6
    over = (load > problem.max_util * problem.capacity + tol).any(axis=0)
    under = (load < problem.min_util * problem.capacity - tol).any(axis=0)
    return open_mask & (over | under)


@dataclass(frozen=True)
class Round:
    """One round of the solve loop, as shown in progress and the benchmark."""

    number: int
    objective: float  # best valid plan so far (inf if none)
    bound: float
    gap: float
    cuts_added: int
    fragments: int  # disconnected zone pieces in the solver's answer before repair
    seconds: float  # elapsed since the solve started
    #: the best valid plan so far (site index per unit), given to progress callbacks so a
    #: caller can show it while the solve goes on; None in ``Plan.history``
    best: np.ndarray | None = field(default=None, compare=False, repr=False)


@dataclass(frozen=True)
class Plan:
    """The result of :func:`districting.solve`.

    ``assignment[i]`` is the site of unit i (-1 only when infeasible); ``open_sites`` a
    bool mask. ``objective`` is the cost of the returned plan, ``bound`` a proven lower
    bound, ``gap`` = (objective - bound) / max(|objective|, tiny).
    """

    status: str
    objective: float
    bound: float
    gap: float
    assignment: np.ndarray
    open_sites: np.ndarray
    message: str = ""
    rounds: int = 0
    cuts: int = 0
    build_seconds: float = 0.0
    solve_seconds: float = 0.0
    history: tuple[Round, ...] = field(default=())
    metrics: PlanMetrics | None = None
    route: str = "highs"

    @property
    def feasible(self) -> bool:
        return self.status in ("optimal", "feasible", "time_limit", "cancelled") and bool(
            np.all(self.assignment >= 0)
        )


def relative_gap(objective: float, bound: float) -> float:
    """(objective - bound) / |objective|, 0 when both are 0, inf without a plan."""
    if not np.isfinite(objective):
        return float("inf")
    denom = max(abs(objective), 1e-9)
    return max(0.0, (objective - bound) / denom) if abs(objective) > 1e-9 else 0.0
