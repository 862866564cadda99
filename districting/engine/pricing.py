"""Zone pricing without contiguity: the cheapest zone one site may take on its own.

Given a per-unit reduced cost ``r[i]`` for one site j (inf where the pair is not allowed),
pricing finds a zone Z minimising ``sum_{i in Z} r[i]`` among the zones feasible for j on
its own: the units locked to j and j's root unit in Z, every unit allowed for j, and the
students of Z inside j's band in every demand row t,
``u_min[j] Q[j] <= sum_{i in Z} d[t, i] <= u_max[j] Q[j]`` (no capacity: no band). That is
a multi-row 0-1 knapsack with a floor and a cap, the pricing problem of the capacitated
p-median column generation (Lorena & Senne, "A column generation approach to capacitated
p-median problems", Computers & Operations Research 31(6), 2004; Ceselli & Righini,
"A branch-and-price algorithm for the capacitated p-median problem", Networks 45(3), 2005).

Exact: dynamic programming over the load when there is one demand row with whole
students and a cap of modest size, else a small HiGHS MIP (its dual bound kept when the
time limit cuts it short). Heuristic (``exact=False``): greedy by reduced cost per student.
The floor and cap are widened by the engine's tolerance, never narrowed, so a bound is
never above the true minimum.
"""

from __future__ import annotations

import time
from dataclasses import dataclass

import numpy as np

from ..problem import Problem
from ..rules import seat_limits
from .connectivity import UnitGraph
from .tuning import TOL

__all__ = ["Priced", "price_zone", "SiteSlice", "site_slice", "DP_LIMIT"]

#: Largest items x load-states table the dynamic programme builds (else the MIP).
DP_LIMIT = 20_000_000


@dataclass(frozen=True)
class Priced:
    """Zones found for one site, their values, and a lower bound on the best value."""

    zones: list[np.ndarray]  # sorted unit indices, each a feasible zone for the site
    values: list[float]  # sum of `reduced` over each zone
    bound: float  # a lower bound on min over ALL feasible zones of sum(reduced); -inf unknown


@dataclass(frozen=True)
class SiteSlice:
    """One site's pricing data: forced units, free items with their loads, the band."""

    forced: np.ndarray  # units every zone of the site holds (locks, root)
    items: np.ndarray  # other units the site may take (finite reduced cost, fit the cap)
    load: np.ndarray  # (T, k) students of each item per demand row
    lo: np.ndarray  # (T,) floor left after the forced units (widened by TOL)
    hi: np.ndarray  # (T,) cap left after the forced units (widened by TOL)
    feasible: bool  # False: a forced unit is not allowed or already breaks the cap


def site_slice(problem: Problem, site: int, reduced: np.ndarray) -> SiteSlice:
    """The forced units, the items and the band left for ``site`` (shared with the
    connected pricing)."""
    n, t_rows = problem.n_units, problem.n_years
    forced_mask = problem.locks == site
    if problem.roots is not None and problem.roots[site] >= 0:
        forced_mask[problem.roots[site]] = True
    forced = np.flatnonzero(forced_mask)
    d = problem.demand
    base = d[:, forced].sum(axis=1)
    fewest, most = seat_limits(problem)
    hi = np.full(t_rows, most[site]) + TOL - base
    lo = np.full(t_rows, fewest[site]) - TOL - base
    ok = np.isfinite(reduced) & ~forced_mask & (problem.locks < 0)
    ok &= (d <= hi[:, None]).all(axis=0)
    items = np.flatnonzero(ok)
    feasible = bool(np.isfinite(reduced[forced]).all() and (hi >= 0).all()) if n else True
    return SiteSlice(forced, items, d[:, items], lo, hi, feasible)


def _zone(s: SiteSlice, chosen: np.ndarray) -> np.ndarray:
    return np.sort(np.concatenate([s.forced, s.items[chosen]])).astype(np.int64)


def _greedy(s: SiteSlice, v: np.ndarray) -> np.ndarray | None:
    """Items by value per student (cheapest first) while they fit; then the cheapest
    items that still fit until the floor is met. None when the floor cannot be met."""
    size = s.load.max(axis=0) if s.load.shape[0] else np.zeros(len(v))
    ratio = np.where(size > 0, v / np.maximum(size, 1e-12), -np.inf)
    ratio = np.where((size <= 0) & (v >= 0), np.inf, ratio)
    take = np.zeros(len(v), bool)
    used = np.zeros(len(s.hi))
    for k in np.argsort(ratio, kind="stable").tolist():
        if v[k] >= 0:
            break
        if (used + s.load[:, k] <= s.hi).all():
            take[k] = True
            used += s.load[:, k]
    if (used >= s.lo).all():
        return take
    for k in np.argsort(v, kind="stable").tolist():
        if take[k] or not (used + s.load[:, k] <= s.hi).all():
            continue
        take[k] = True
        used += s.load[:, k]
        if (used >= s.lo).all():
            return take
    return None


def _dp(s: SiteSlice, v: np.ndarray) -> tuple[np.ndarray | None, float]:
    """0-1 knapsack over whole-student loads (one demand row): the best choice and its
    value, or (None, inf) when no load reaches the floor."""
    w = np.rint(s.load[0]).astype(np.int64)
    cap = int(np.floor(s.hi[0]))
    low = max(int(np.ceil(s.lo[0])), 0)
    free = (w == 0) & (v < 0)  # free gains: always taken
    keep = np.flatnonzero((w > 0) & (w <= cap) & ((v < 0) | (low > 0)))
    best = np.full(cap + 1, np.inf)
    best[0] = 0.0
    took = np.zeros((len(keep), cap + 1), bool)
    for r, k in enumerate(keep.tolist()):
        wk = int(w[k])
        cand = best[:-wk] + v[k]
        better = cand < best[wk:]
        took[r, wk:] = better
        best[wk:] = np.where(better, cand, best[wk:])
    if low > cap or not np.isfinite(best[low:]).any():
        return None, np.inf
    load = low + int(np.argmin(best[low:]))
    value = float(best[load]) + float(v[free].sum())
    chosen = free.copy()
    for r in range(len(keep) - 1, -1, -1):
        if took[r, load]:
            chosen[keep[r]] = True
            load -= int(w[keep[r]])
    return chosen, value


def _mip(s: SiteSlice, v: np.ndarray, time_limit: float | None
         ) -> tuple[np.ndarray | None, float, float]:
    """The knapsack as a HiGHS MIP: (choice or None, its value, a lower bound)."""
    import highspy

    from .answer import quiet_highs

    k, t_rows = len(v), s.load.shape[0]
    h = quiet_highs()
    h.setOptionValue("mip_rel_gap", 1e-9)
    if time_limit is not None:
        h.setOptionValue("time_limit", max(float(time_limit), 0.01))
    lp = highspy.HighsLp()
    lp.num_col_, lp.num_row_ = k, t_rows
    lp.col_cost_, lp.col_lower_, lp.col_upper_ = v, np.zeros(k), np.ones(k)
    lp.row_lower_, lp.row_upper_ = s.lo, s.hi
    lp.a_matrix_.format_ = highspy.MatrixFormat.kColwise
    lp.a_matrix_.start_ = (np.arange(k + 1) * t_rows).astype(np.int32)
    lp.a_matrix_.index_ = np.tile(np.arange(t_rows, dtype=np.int32), k)
    lp.a_matrix_.value_ = s.load.T.reshape(-1).astype(float)
    lp.integrality_ = [highspy.HighsVarType.kInteger] * k
    h.passModel(lp)
    h.run()
    status = h.getModelStatus()
    if status == highspy.HighsModelStatus.kInfeasible:
        return None, np.inf, np.inf
    info = h.getInfo()
    bound = float(info.mip_dual_bound)  # valid also when "optimal" within HiGHS's gaps
    bound = bound if np.isfinite(bound) else -np.inf
    if info.primal_solution_status != 2:  # no feasible point found
        return None, np.inf, bound
    x = np.asarray(h.getSolution().col_value) > 0.5
    return x, float(v[x].sum()), min(bound, float(v[x].sum()))


def price_zone(problem: Problem, graph: UnitGraph | None, site: int, reduced: np.ndarray,
               *, exact: bool, time_limit: float | None) -> Priced:
    """The cheapest zones of ``site`` under ``reduced`` (contiguity not asked; ``graph``
    is accepted for the pricing interface and not read). See the module docstring."""
    del graph
    t0 = time.monotonic()
    s = site_slice(problem, site, reduced)
    if not s.feasible:
        return Priced([], [], np.inf)
    base = float(reduced[s.forced].sum())
    v = reduced[s.items]
    zones: list[np.ndarray] = []
    values: list[float] = []
    take = _greedy(s, v)
    if take is not None:
        zones.append(_zone(s, take))
        values.append(base + float(v[take].sum()))
    if not exact:
        return Priced(zones, values, -np.inf)
    left = None if time_limit is None else max(time_limit - (time.monotonic() - t0), 0.01)
    whole = np.allclose(s.load, np.rint(s.load)) if s.load.size else True
    if (s.load.shape[0] == 1 and whole and np.isfinite(s.hi[0])
            and len(v) * (np.floor(s.hi[0]) + 1) <= DP_LIMIT):
        chosen, value = _dp(s, v)
        bound = value
    elif s.load.shape[0] == 0 or (not np.isfinite(s.hi).any() and (s.lo <= 0).all()):
        # no cap and no floor left: every item of negative value, and only those
        chosen = v < 0
        value = bound = float(v[chosen].sum())
    else:
        chosen, value, bound = _mip(s, v, left)
    if chosen is not None:
        zones.insert(0, _zone(s, chosen))
        values.insert(0, base + value)
    return Priced(zones, values, base + bound)
