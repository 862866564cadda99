"""The model, stated once: columns and row families as a neutral sparse description.

Both solver routes are built from :func:`formulate`: the HiGHS array route
(:mod:`districting.engine.highs_route`) passes the rows to highspy as they are, the Pyomo
reference route (:mod:`districting.engine.pyomo_route`) writes each row as a Pyomo
constraint. Neither writes a row of its own, so they cannot drift apart.

Notation of :mod:`districting.problem`: ``i`` unit, ``j`` site, ``t`` demand row,
``d[t, i]`` students, ``Q[j]`` capacity, ``u_min`` / ``u_max`` the utilization band,
``w = problem.weighted_cost`` (distance times students plus the stability charge).

Columns: ``x[i, j]`` (binary) for every pair that some plan may use (``problem.allowed``,
without pairs whose students exceed the site's upper capacity in some year: such a pair can
never be used), then ``y[j]`` (binary) for every candidate site. Always-open sites have no
``y`` column (``y[j] = 1`` is a constant); closed sites have neither. With a limit on split
feeders, ``z[g, j]`` (binary: lower zone g feeds site j) follow, one per pair some unit of
g may use (:func:`split_columns`). The columns and :class:`RowBlock` are in
:mod:`districting.engine.formulation_columns`.

Each row family is one function (its formula in its docstring) returning a
:class:`RowBlock`; :func:`formulate` calls them in a fixed order (the row order matters to
the solver's path, so it is part of the model). ``elastic`` families (for diagnosis) keep
every row (no dominated rows left out) so a slack per row can say by how much it must give.
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence

import numpy as np

from ..problem import Problem
from ..rules import seat_limits
from .connectivity import Cut
from .formulation_columns import Formulation, RowBlock, block, columns
from .tuning import LINK_LIMIT, TOL

__all__ = ["RowBlock", "Formulation", "columns", "formulate", "separator_rows", "feeder_rows",
           "split_columns", "split_rows", "ELASTIC_FAMILIES"]

#: Families that can be built with a slack (``elastic=``).
ELASTIC_FAMILIES = ("capacity", "floor", "locks", "max_moved", "transport", "groups")


# ---------------------------------------------------------------------------- rows
def assignment_rows(f: Formulation) -> RowBlock:
    """sum_j x[i, j] = 1 for every unit i (0 for a unit left out)."""
    n = f.problem.n_units
    need = np.where(f.drop, 0.0, 1.0)
    missing = np.flatnonzero((np.bincount(f.xi, minlength=n) == 0) & ~f.drop)
    if len(missing):
        f.infeasible_reason = f"{f.problem.unit_label(int(missing[0]))} has no site"
    k = f.n_pairs
    return RowBlock("assignment", f.xi.copy(), np.arange(k), np.ones(k), need, need.copy(),
                    tuple(range(n)))


def linking_rows(f: Formulation) -> RowBlock:
    """x[i, j] <= y[j] for every pair of a candidate site j (the strong form).

    Left out above ``LINK_LIMIT`` pairs when (firm) capacity rows exist: the capacity row
    sum_i d x[i, j] <= u_max Q y[j] links them in aggregate.
    """
    ci = np.flatnonzero(f.ycol[f.xj] >= 0)
    aggregate = f.problem.capacity is not None and "capacity" not in f.elastic
    if not len(ci) or (len(ci) > LINK_LIMIT and aggregate):
        return block("linking", [])
    r = np.arange(len(ci))
    return RowBlock("linking", np.concatenate([r, r]),
                    np.concatenate([ci, f.ycol[f.xj[ci]]]),
                    np.concatenate([np.ones(len(ci)), -np.ones(len(ci))]),
                    np.full(len(ci), -np.inf), np.zeros(len(ci)),
                    tuple(zip(f.xi[ci].tolist(), f.xj[ci].tolist(), strict=True)))


def count_row(f: Formulation) -> RowBlock:
    """sum_{j candidate} y[j] = p - (sites open anyway), when p is set."""
    p = f.problem
    cand = np.flatnonzero(p.candidates)
    if p.p is None or not (f.ycol[f.xj] >= 0).any():
        return block("count", [])
    rest = p.p - int(p.always_open.sum())
    return block("count", [(f.ycol[cand], np.ones(len(cand)), rest, rest)], [0])


def root_rows(f: Formulation) -> RowBlock:
    """x[r_j, j] = y[j] for every candidate j with a root unit r_j; x[r_j, j] = 1 (a bound)
    for an always-open site. A candidate whose root pair has no column cannot open
    (y[j] <= 0); an always-open one makes the model infeasible."""
    p = f.problem
    parts, keys = [], []
    if p.roots is None:
        return block("roots", [])
    for j in np.flatnonzero(p.roots >= 0).tolist():
        r = int(p.roots[j])
        c = f.colmap[r, j]
        if p.closed_sites[j]:
            continue
        if f.ycol[j] < 0:
            if c < 0:
                f.infeasible_reason = (f"{p.site_label(j)} cannot take its own unit "
                                       f"{p.unit_label(r)}")
            else:
                f.lower[c] = 1.0
        elif c < 0:
            f.upper[f.ycol[j]] = 0.0
        else:
            parts.append(([c, f.ycol[j]], [1.0, -1.0], 0.0, 0.0))
            keys.append(j)
    return block("roots", parts, keys)


def undominated(d: np.ndarray, larger: bool) -> list[int]:
    """Demand rows not implied by another row (for capacity: rows no other row covers)."""
    keep: list[int] = []
    for t in range(d.shape[0]):
        dominated = False
        for s in range(d.shape[0]):
            if s == t:
                continue
            ge = np.all(d[s] >= d[t]) if larger else np.all(d[s] <= d[t])
            if ge and (not np.array_equal(d[s], d[t]) or s < t):
                dominated = True
                break
        if not dominated:
            keep.append(t)
    return keep


def band_rows(f: Formulation, upper_side: bool) -> RowBlock:
    """Capacity: sum_i d[t, i] x[i, j] <= u_max[j] Q[j] y[j]; floor (``upper_side`` False):
    sum_i d[t, i] x[i, j] >= u_min[j] Q[j] y[j], for every demand row t and open site j.

    y[j] = 1 for an always-open site (the bound moves to the right-hand side). Left out
    unless the family is elastic: rows another row dominates, capacity rows of a site that
    fits every student it may take, floor rows of a zero floor.
    """
    p = f.problem
    family = "capacity" if upper_side else "floor"
    if p.capacity is None:
        return block(family, [])
    share = p.max_util if upper_side else p.min_util
    bound = share * p.capacity
    elastic = family in f.elastic
    if not upper_side and not elastic and not np.any(bound > TOL):
        return block(family, [])
    years = range(p.n_years) if elastic else undominated(p.demand, larger=upper_side)
    parts, keys = [], []
    for t in years:
        coef = p.demand[t][f.xi]
        reach = np.bincount(f.xj, weights=coef, minlength=p.n_sites)
        for j in range(p.n_sites):
            if not np.isfinite(bound[j]) or p.closed_sites[j]:
                continue
            cand = f.ycol[j] >= 0
            if elastic:
                if not share[j] > 0:
                    continue
            elif upper_side and reach[j] <= bound[j] + TOL and not cand:
                continue  # every student it may take fits: the row cannot bind
            elif not upper_side and bound[j] <= TOL:
                continue
            sel = np.flatnonzero((f.xj == j) & (coef != 0))
            cs = sel.tolist()
            vs = coef[sel].tolist()
            if cand:
                cs.append(int(f.ycol[j]))
                vs.append(-float(bound[j]))
                lo, hi = (-np.inf, 0.0) if upper_side else (0.0, np.inf)
            else:
                lo, hi = (-np.inf, bound[j]) if upper_side else (bound[j], np.inf)
            parts.append((cs, vs, lo, hi))
            keys.append((t, j))
    return block(family, parts, keys)


def cover_rows(f: Formulation) -> RowBlock:
    """sum_{j candidate} u_max[j] Q[j] y[j] >= sum_i d[t, i] - (seats of always-open sites)
    for every undominated row t: the open seats hold every student (implied by the rows
    above, it lifts the LP bound). Not with elastic capacity."""
    p = f.problem
    cand = np.flatnonzero(p.candidates)
    if p.capacity is None or not len(cand) or "capacity" in f.elastic:
        return block("cover", [])
    hi = seat_limits(p)[1]
    parts, keys = [], []
    for t in undominated(p.demand, larger=True):
        need = p.demand[t].sum() - hi[p.always_open].sum()
        if need > TOL:
            parts.append((f.ycol[cand], hi[cand], need, np.inf))
            keys.append(t)
    return block("cover", parts, keys)


def max_moved_row(f: Formulation) -> RowBlock:
    """sum_{i: current_i >= 0} d[0, i] (1 - x[i, current_i]) <= max_moved, written as
    -sum d[0, i] x[i, current_i] <= max_moved - sum d[0, i] (a pair without a column counts
    as moved for sure)."""
    p = f.problem
    if p.max_moved is None:
        return block("max_moved", [])
    cur, d0 = p.current, p.demand[0]
    has = (cur >= 0) & (d0 > 0)
    total = float(d0[has].sum())
    c = f.colmap[np.flatnonzero(has), cur[has]]
    stay = c >= 0
    return block("max_moved", [(c[stay], -d0[has][stay], -np.inf, p.max_moved - total)], [0])


def transport_row(f: Formulation) -> RowBlock:
    """sum_{(i, j): not walk[i, j]} d[0, i] x[i, j] <= max_transported: plan-year students
    assigned to a school beyond their walking distance (those who need transport)."""
    p = f.problem
    if p.max_transported is None or p.walk is None:
        return block("transport", [])
    rides = ~p.walk[f.xi, f.xj] & (p.demand[0][f.xi] > 0)
    k = np.flatnonzero(rides)
    return block("transport", [(k, p.demand[0][f.xi[k]], -np.inf, p.max_transported)], [0])


def group_rows(f: Formulation) -> RowBlock:
    """Each open school's share of group g in demand row t within b of the district's s:
    sum_i (g[t, i] - (s - b) d[t, i]) x[i, j] >= 0 and sum_i (g[t, i] - (s + b) d[t, i])
    x[i, j] <= 0, with s = sum_i g[t, i] / sum_i d[t, i] over the level's units and
    b = ``group_band``. A closed site's row is 0 = 0 and is left out; so is a side that
    cannot bind (s - b <= 0, s + b >= 1) and a row t without group counts (NaN)."""
    p = f.problem
    if p.groups is None or not p.group_band > 0:
        return block("groups", [])
    parts, keys = [], []
    for g in range(p.groups.shape[0]):
        for t in range(p.n_years):
            row, d = p.groups[g, t], p.demand[t]
            if np.isnan(row).any() or not d.sum() > 0:
                continue
            share = row.sum() / d.sum()
            for side, bound in (("low", share - p.group_band), ("high", share + p.group_band)):
                if (side == "low" and bound <= TOL) or (side == "high" and bound >= 1 - TOL):
                    continue
                coef = row[f.xi] - bound * d[f.xi]
                lo, hi = (0.0, np.inf) if side == "low" else (-np.inf, 0.0)
                for j in range(p.n_sites):
                    sel = np.flatnonzero((f.xj == j) & (np.abs(coef) > 0))
                    if p.closed_sites[j] or not len(sel):
                        continue
                    parts.append((sel, coef[sel], lo, hi))
                    keys.append((g, t, j, side))
    return block("groups", parts, keys)


def lock_rows(f: Formulation) -> RowBlock:
    """x[i, lock_i] = 1 for every locked unit: a bound on its column, or a row when the
    family is elastic (its other pairs are then columns too)."""
    p = f.problem
    li = np.flatnonzero(p.locks >= 0)
    lc = f.colmap[li, p.locks[li]]
    if "locks" not in f.elastic:
        f.lower[lc[lc >= 0]] = 1.0
        return block("locks", [])
    ok = lc >= 0
    return block("locks", [([c], [1.0], 1.0, 1.0) for c in lc[ok].tolist()],
                  li[ok].tolist())


def feeder_rows(f: Formulation) -> RowBlock:
    """Whole feeding (feeder rule "whole" without splits, ``g`` the lower zone of each unit):
    x[i, j] - x[r_g, j] = 0 for every unit i of lower zone g other than its first unit r_g
    in the model, and every site j that either pair may use (a pair without a column is 0
    in every plan): all units of one lower zone go to the same site.

    The "nested" rule needs no row: it removes the pairs that leave the upper zone of the
    site's root (:attr:`Problem.allowed`).
    """
    p = f.problem
    g = p.feeder_groups
    if p.feeder_rule != "whole" or g is None or p.feeder_splits > 0:
        return block("feeder", [])
    units = np.flatnonzero((g >= 0) & ~f.drop)
    order = np.argsort(g[units], kind="stable")
    units = units[order]
    gu = g[units]
    first = np.r_[True, gu[1:] != gu[:-1]] if len(gu) else np.zeros(0, bool)
    reps = units[first][np.cumsum(first) - 1]
    others, reps = units[~first], reps[~first]
    ci, cr = f.colmap[others], f.colmap[reps]
    k, j = np.nonzero((ci >= 0) | (cr >= 0))
    a, b = ci[k, j], cr[k, j]
    rows = np.arange(len(k))
    row = np.concatenate([rows[a >= 0], rows[b >= 0]])
    col = np.concatenate([a[a >= 0], b[b >= 0]])
    coef = np.concatenate([np.ones(int((a >= 0).sum())), -np.ones(int((b >= 0).sum()))])
    zero = np.zeros(len(k))
    return RowBlock("feeder", row, col, coef, zero, zero.copy(),
                    tuple(zip(others[k].tolist(), j.tolist(), strict=True)))


def _split_pairs(f: Formulation) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(x column, its lower zone g, its site j) of every x column of a unit in a zone."""
    g = f.problem.feeder_groups
    k = np.flatnonzero(g[f.xi] >= 0)
    return k, g[f.xi[k]], f.xj[k]


def split_columns(f: Formulation) -> None:
    """z[g, j] in [0, 1], cost 0, for every (lower zone g, site j) pair some unit of g may
    use, appended after the x and y columns, when each lower zone may feed at most N + 1
    sites (feeder rule "whole" with ``feeder_splits`` N > 0)."""
    p = f.problem
    if p.feeder_rule != "whole" or p.feeder_groups is None or p.feeder_splits <= 0:
        return
    _k, g, j = _split_pairs(f)
    pairs = np.unique(np.column_stack([g, j]), axis=0) if len(g) else np.zeros((0, 2), int)
    f.zg, f.zj = pairs[:, 0].astype(np.int64), pairs[:, 1].astype(np.int64)
    f.zcol = f.ncol + np.arange(len(pairs))
    f.cost = np.concatenate([f.cost, np.zeros(len(pairs))])
    f.lower = np.concatenate([f.lower, np.zeros(len(pairs))])
    f.upper = np.concatenate([f.upper, np.ones(len(pairs))])


def split_rows(f: Formulation) -> RowBlock:
    """At most N splits per lower zone (N = ``feeder_splits``): x[i, j] - z[g_i, j] <= 0 for
    every x column of a unit i in lower zone g_i (z[g, j] = 1 when g feeds site j), then
    sum_j z[g, j] <= N + 1 for every lower zone g."""
    if not len(f.zcol):
        return block("splits", [])
    k, g, j = _split_pairs(f)
    width = int(f.zj.max()) + 1
    lookup = np.full((int(f.zg.max()) + 1, width), -1, np.int64)
    lookup[f.zg, f.zj] = f.zcol
    zc = lookup[g, j]
    r = np.arange(len(k))
    groups = np.unique(f.zg)
    gr = len(k) + np.searchsorted(groups, f.zg)
    limit = float(f.problem.feeder_splits + 1)
    return RowBlock("splits", np.concatenate([r, r, gr]), np.concatenate([k, zc, f.zcol]),
                    np.concatenate([np.ones(len(k)), -np.ones(len(k)), np.ones(len(f.zcol))]),
                    np.full(len(k) + len(groups), -np.inf),
                    np.concatenate([np.zeros(len(k)), np.full(len(groups), limit)]),
                    tuple([("pair", int(c)) for c in k] + [("zone", int(x)) for x in groups]))


def separator_rows(f: Formulation, cuts: Sequence[Cut]) -> RowBlock:
    """x[i, j] (+ x[a, j] - 1) - sum_{s in S} x[s, j] <= 0 for each unit i of each cut.

    A separator pair without a column is left out of its row (x[s, j] = 0 in every plan);
    a cut through a unit the model leaves out but the zone may take is not written at all
    (cuts found on a fuller model, reused by a rebuild that leaves more out: the unit may
    be handed any zone later).
    """
    parts = []
    allowed = f.problem.allowed if f.drop.any() else None
    for cut in cuts:
        j = cut.site
        if allowed is not None and (
                (f.drop[cut.separator] & allowed[cut.separator, j]).any()
                or (cut.anchor >= 0 and f.drop[cut.anchor])):
            continue
        sc = f.colmap[cut.separator, j]
        sc = sc[sc >= 0]
        ac = f.colmap[cut.anchor, j] if cut.anchor >= 0 else -1
        for i in cut.units.tolist():
            ic = f.colmap[i, j]
            if ic < 0:
                continue
            cs = [ic, *sc.tolist()]
            vs = [1.0] + [-1.0] * len(sc)
            if ac >= 0:
                cs.append(int(ac))
                vs.append(1.0)
            parts.append((cs, vs, -np.inf, 1.0 if ac >= 0 else 0.0))
    return block("separator", parts)


def formulate(problem: Problem, drop: np.ndarray | None = None,
              elastic: Iterable[str] = ()) -> Formulation:
    """Every column and row family of ``problem`` (units in ``drop`` left out)."""
    f = columns(problem, drop, elastic)
    split_columns(f)
    f.blocks = [assignment_rows(f), linking_rows(f), count_row(f), root_rows(f),
                band_rows(f, upper_side=True), band_rows(f, upper_side=False), cover_rows(f),
                max_moved_row(f), lock_rows(f), feeder_rows(f), split_rows(f),
                transport_row(f), group_rows(f)]
    return f
