"""A bound over whole zones: Dantzig-Wolfe reformulation solved by column generation.

The assignment model (:mod:`districting.engine.formulation`) is re-stated over zones: a
column is one site j with a zone Z feasible for j on its own (every unit allowed for j, the
units locked to j and j's root in Z, the students inside j's band in every demand row, Z
connected when the problem asks contiguity), costing ``c(Z, j) = sum_{i in Z} w[i, j]``.
The master chooses lambda[Z, j] >= 0 with

- cover: ``sum_{Z ni i} lambda[Z, j] = 1`` for every unit i (empty units too: every unit
  has a site in a plan), dual ``pi[i]``;
- convexity: ``sum_Z lambda[Z, j] = 1`` for an always-open site, ``<= 1`` for a candidate;
- count (p set, candidates exist): ``sum_{j cand} sum_Z lambda[Z, j] = K = p - #always
  open``, dual ``sigma``;
- ``sum moved(Z, j) lambda <= max_moved`` (plan-year students of Z whose site today is not
  j), dual ``rho <= 0``; ``sum ride(Z, j) lambda <= max_transported`` (plan-year students of
  Z beyond walking distance of j), dual ``tau <= 0``.

Pricing (per site, :func:`districting.engine.pricing.price_zone`, or the connected pricing
for contiguous problems) minimises ``sum_{i in Z} r_j[i]`` with
``r_j[i] = w[i, j] - pi[i] - rho d[0, i] moved(i, j) - tau d[0, i] ride(i, j)``; a column
enters when that minus the site's convexity dual (and sigma for a candidate) is negative.

Lagrangian bound: relax cover, moved and transport rows with any (pi, rho <= 0, tau <= 0),
keep convexity and count in the inner problem. With ``b_j`` a lower bound on
``min_Z sum_{i in Z} r_j[i]`` over all zones feasible for j (pricing's ``bound``),

    LB = sum_i pi[i] + rho max_moved + tau max_transported
         + sum_{j always open} b_j + (sum of the K smallest b_j over candidates)

is a lower bound on every plan (for a plan, the relaxed terms add ``pi (1 - 1) = 0`` and
``rho (max_moved - moved) <= 0``; the inner minimum picks one zone per open site and
exactly K candidates). It holds for any duals of those signs, so every exact pricing pass
gives a valid bound, also under a time limit and with smoothed duals (Wentges,
"Weighted Dantzig-Wolfe decomposition for linear mixed-integer programming",
International Transactions in Operational Research 4(2), 1997). Sources: Lorena & Senne,
Computers & Operations Research 31(6), 2004; Ceselli & Righini, Networks 45(3), 2005;
Mehrotra, Johnson & Nemhauser, Management Science 44(8), 1998 (districting columns).

Price-and-branch: the restricted master over the generated columns solved as a MIP gives a
plan (an upper bound), checked with :func:`~districting.engine.connectivity.plan_checks`.
Families the master cannot state (whole feeding with or without splits, group bands):
:func:`column_bound` returns None.

Not a stage of the solve session (measured, 30 s each, with 40% of the time left given to
it before HiGHS's tree: Osman & Christofides 14, 17, 20 bound 971 -> 972, 1,023 -> 1,025.3,
969 -> 973.6, but 8 803 -> 786 and SJC2 0.13% -> 0.20%, the time taken from the tree; on
the demo's elementary level with contiguity 8 minutes did not converge, bound 7,994,041
against 8,026,301 from :mod:`~districting.engine.zone_bound` at the cut LP's duals). A
measure and a building block: ``benchmarks/bench_columns.py``.
"""

from __future__ import annotations

import functools
import time
from dataclasses import dataclass

import numpy as np

from ..problem import Problem
from ..rules import open_sites
from .column_duals import COMPACT_MAX_PAIRS, compact_duals, subgradient
from .column_master import ZoneMaster
from .connected_pricing import price_connected
from .connectivity import UnitGraph, plan_checks
from .pricing import Priced, price_zone

__all__ = ["ColumnResult", "column_bound", "applies", "SMOOTHING", "EXACT_EVERY"]

#: Wentges smoothing weight on the best-bound duals (0: price at the master's own duals).
SMOOTHING = 0.5
#: An exact pricing pass (and a bound) at least every this many rounds.
EXACT_EVERY = 5
#: Share of the column generation's time the subgradient warm start may take.
WARM_SHARE = 0.5
#: Share of the time limit kept for the restricted master MIP (price-and-branch).
MIP_SHARE = 0.2
_EPS = 1e-7


@dataclass(frozen=True)
class ColumnResult:
    """What the column generation proved and found."""

    bound: float  # Lagrangian lower bound on every plan (-inf: no exact pass finished)
    master_lp: float  # the restricted master LP value at the end
    build_seconds: float  # master built, first columns, the assignment LP's duals
    rounds: int  # master LP solves
    exact_passes: int  # exact pricing passes (each gave a bound)
    columns: int  # columns generated (start zones included, artificials not)
    seconds: float
    converged: bool  # exact pricing found no improving column: bound = master LP
    plan: np.ndarray | None  # best plan of the restricted master MIP (checked), or None
    plan_cost: float  # its cost (inf without a plan)


def applies(problem: Problem) -> bool:
    """The master states every rule of ``problem`` exactly (see the module docstring)."""
    if problem.feeder_rule == "whole":
        return False
    return not (problem.groups is not None and problem.group_band > 0)


@dataclass
class _State:
    """The loop's running figures."""

    best: float = -np.inf  # best Lagrangian bound so far
    center: np.ndarray | None = None  # the duals that gave it (the smoothing centre)
    lp: float = np.inf  # the last master LP value
    rounds: int = 0
    exact_passes: int = 0


def _left(until: float | None) -> float | None:
    return None if until is None else until - time.monotonic()


def _duals(master: ZoneMaster, y: np.ndarray) -> tuple[np.ndarray, float, float]:
    """(pi, rho, tau) from a row dual vector, rho and tau clipped to their sign."""
    n = master.problem.n_units
    rho = min(float(y[master.moved_row]), 0.0) if master.moved_row >= 0 else 0.0
    tau = min(float(y[master.ride_row]), 0.0) if master.ride_row >= 0 else 0.0
    return y[:n], rho, tau


def _reduced(master: ZoneMaster, y: np.ndarray, allowed: np.ndarray) -> np.ndarray:
    """(n, m) per-unit reduced cost r_j[i] under dual vector ``y`` (inf: pair not allowed)."""
    pi, rho, tau = _duals(master, y)
    r = master.problem.weighted_cost - pi[:, None] - rho * master.moved
    if master.ride is not None:
        r = r - tau * master.ride
    return np.where(allowed, r, np.inf)


def lagrangian_bound(problem: Problem, y: np.ndarray, master: ZoneMaster,
                     bounds: np.ndarray) -> float:
    """LB of the module docstring from duals ``y`` and per-site pricing bounds ``bounds``."""
    pi, rho, tau = _duals(master, y)
    lb = float(pi.sum())
    if master.moved_row >= 0:
        lb += rho * float(problem.max_moved)
    if master.ride_row >= 0:
        lb += tau * float(problem.max_transported)
    chosen = _chosen(master, bounds)
    return lb + float(bounds[chosen].sum()) if chosen is not None else np.inf


def _chosen(master: ZoneMaster, bounds: np.ndarray) -> np.ndarray | None:
    """The sites of the Lagrangian's inner minimum: every always-open site and the K
    candidates of smallest bound (None: fewer than K candidates)."""
    p = master.problem
    always = np.flatnonzero(p.always_open)
    if master.k_open is None or master.k_open <= 0:
        return always
    cand = np.flatnonzero(master.cand)
    if len(cand) < master.k_open:
        return None
    pick = cand[np.argsort(bounds[cand], kind="stable")[:master.k_open]]
    return np.concatenate([always, pick])


def column_bound(problem: Problem, graph: UnitGraph | None = None, *,
                 start: np.ndarray | None, time_limit: float | None,
                 smoothing: float = SMOOTHING) -> ColumnResult | None:
    """Column generation over zones: the Lagrangian bound, the master LP and a plan from
    the restricted master MIP (see the module docstring). None when the master cannot
    state every rule of ``problem``. ``start``, a valid plan, gives the first columns."""
    if not applies(problem):
        return None
    t0 = time.monotonic()
    if problem.contiguous and graph is None:
        graph = UnitGraph.of(problem)
    if problem.contiguous:
        # the separator cuts a site's pricing finds carry over to its next calls
        pricer = functools.partial(price_connected, pool={})
    else:
        pricer = price_zone
    allowed = problem.allowed
    if start is not None and plan_checks(problem, start, graph):
        start = None
    w = np.where(allowed, problem.weighted_cost, 0.0)
    big = None if start is not None else 10.0 * (1.0 + float(np.abs(w).max(axis=1).sum()))
    master = ZoneMaster(problem, big)
    if start is not None:
        a = np.asarray(start, np.int64)
        for j in np.flatnonzero(open_sites(problem, a)).tolist():
            master.add(j, np.flatnonzero(a == j))
    n_start = len(master.zones)
    deadline = None if time_limit is None else t0 + time_limit
    cg_end = None if time_limit is None else t0 + (1 - MIP_SHARE) * time_limit
    sites = np.flatnonzero(~problem.closed_sites)
    state = _State()
    n = problem.n_units

    def step(y: np.ndarray) -> tuple[float, np.ndarray]:
        """Exact pricing at ``y``: the Lagrangian bound and a subgradient of the cover rows;
        the inner minimum's zones join the master."""
        r = _reduced(master, y, allowed)
        bounds, zone = np.full(problem.n_sites, np.inf), {}
        for j in sites.tolist():
            rem = _left(cg_end)
            pr = pricer(problem, graph, j, r[:, j], exact=True,
                        time_limit=None if rem is None else max(rem / len(sites), 0.01))
            bounds[j] = pr.bound
            if pr.zones:
                zone[j] = pr.zones[0]
        state.exact_passes += 1
        cover = np.zeros(n)
        chosen = _chosen(master, bounds)
        for j in ([] if chosen is None else chosen.tolist()):
            if j in zone:
                cover[zone[j]] += 1
                master.add(j, zone[j])
        g = np.zeros(master.nrow)
        g[:n] = 1 - cover
        return lagrangian_bound(problem, y, master, bounds), g

    if smoothing > 0:
        rem = _left(cg_end)
        if int(allowed.sum()) <= COMPACT_MAX_PAIRS:
            state.center = compact_duals(problem, master.nrow, master.moved_row,
                                         master.ride_row, None if rem is None else rem / 4)
        if state.center is None and start is not None:
            y0 = np.zeros(master.nrow)
            y0[:n] = w[np.arange(n), start]  # each unit's cost in the start plan
            upper = float(y0.sum())
            until = None if rem is None else time.monotonic() + WARM_SHARE * rem
            lb, y_best = subgradient(step, y0, upper, until)
            if np.isfinite(lb):
                state.best, state.center = lb, y_best
    build = time.monotonic() - t0

    def price(y: np.ndarray, ys: np.ndarray, exact: bool) -> int:
        """One pricing pass at duals ``ys``; columns enter when improving under ``y``."""
        r_lp, r_s = _reduced(master, y, allowed), _reduced(master, ys, allowed)
        conv = y[problem.n_units:problem.n_units + problem.n_sites] + (
            y[master.count_row] * master.cand if master.count_row >= 0 else 0.0)
        bounds = np.full(problem.n_sites, np.inf)
        added = 0
        for j in sites.tolist():
            rem = _left(cg_end)
            per_site = None if rem is None else max(rem / len(sites), 0.01)
            pr: Priced = pricer(problem, graph, j, r_s[:, j], exact=exact,
                                time_limit=per_site)
            bounds[j] = pr.bound
            for z in pr.zones:
                if float(r_lp[z, j].sum()) - conv[j] < -_EPS * (1 + abs(state.lp)):
                    added += master.add(j, z)
        if exact:
            state.exact_passes += 1
            lb = lagrangian_bound(problem, ys, master, bounds)
            if np.isfinite(lb) and lb > state.best:
                state.best, state.center = lb, ys.copy()
        return added

    while _left(cg_end) is None or _left(cg_end) > 0:
        lp = master.solve_lp(_left(cg_end))
        if lp is None:
            break
        state.lp, y = lp
        state.rounds += 1
        smooth = state.center is not None and smoothing > 0
        exact = state.rounds % EXACT_EVERY == 1 % EXACT_EVERY
        if smooth and not np.isfinite(state.best):
            ys = state.center  # the first centre's own bound first
        elif smooth:
            ys = smoothing * state.center + (1 - smoothing) * y
        else:
            ys = y
        added = price(y, ys, exact)
        if not added and not exact:  # heuristic pricing found nothing: prove or find
            added = price(y, ys, True)
        if not added and smooth:  # a mispricing at the smoothed duals
            added = price(y, y, True)
        if not added or state.best >= state.lp - 1e-9 * max(1.0, abs(state.lp)):
            break
    converged = state.best >= state.lp - 1e-6 * max(1.0, abs(state.lp))
    plan, cost = None, np.inf
    rem = _left(deadline)
    if rem is None or rem > 0:
        start_x = None
        if start is not None:
            start_x = np.zeros(len(master.zones))
            start_x[:n_start] = 1.0
        a = master.solve_mip(rem, start_x)
        if a is not None and not plan_checks(problem, a, graph):
            plan = a
            cost = float(problem.weighted_cost[np.arange(problem.n_units), a].sum())
    return ColumnResult(state.best, state.lp, build, state.rounds, state.exact_passes,
                        len(master.zones), time.monotonic() - t0, converged, plan, cost)
