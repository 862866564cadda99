"""Screening unit-site pairs with a proof: the LP over a few pairs per unit, priced out.

On a large model with candidate sites the strong linking rows ``x[i, j] <= y[j]`` make one
row per pair, and the LP relaxation of all of them is slow (Lorena & Senne's SJC4a: 162,006
columns and 162,410 rows, 31 s with HiGHS's dual simplex on this 2-core machine). Most
pairs join a site far away and never carry a good plan. So the LP is solved over a subset
S of the columns (each unit's ``SCREEN_NEAREST`` cheapest pairs, the pairs of a known plan,
every non-pair column) with the rows S touches, and the rest are priced out, as in column
generation over the columns of any large LP (Dantzig & Wolfe, "Decomposition principle for
linear programs", Operations Research 8, 1960). Keeping a large location model's working
core small this way follows Avella, Boccia, Sforza & Vasil'ev, "An effective heuristic for
large-scale capacitated facility location problems", Journal of Heuristics 15, 2009 (cited
from memory):

- any row multipliers ``y`` of the right signs give the Lagrangian bound of the FULL model
  (rows left out of the LP count with ``y = 0``)::

      LB(y) = sum_r (lo_r y_r if y_r > 0 else hi_r y_r) + sum_k min(rc_k l_k, rc_k u_k),
      rc = c - A^T y,

  valid for every x with ``lo <= A x <= hi`` and ``l <= x <= u`` (weak duality);
- a column of the full model with ``rc_k < 0`` enters S (with the rows it touches), the LP
  is solved again from its basis; with none left ``LB(y)`` equals the restricted LP value
  and is the full LP's optimum;
- reduced-cost screening: a plan using pair k (``l_k = 0``, ``rc_k > 0``) costs at least
  ``LB(y) + rc_k``; when that exceeds the cost ``ub`` of a plan in hand, no better plan uses
  k. The MIP then needs only the pairs that pass (:attr:`Screen.keep`), and its optimum is
  the full model's, since the plan of cost ``ub`` passes every test of its own pairs.
"""

from __future__ import annotations

import time
from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp

from ..problem import Problem
from .answer import set_lp_time_limit
from .formulation import formulate
from .tuning import SCREEN_ADD, SCREEN_NEAREST

__all__ = ["Screen", "screen_pairs", "lagrangian_bound"]


@dataclass(frozen=True)
class Screen:
    """What pricing proved: a bound on the whole model (its LP optimum once converged),
    the LP point and a floor per pair."""

    bound: float  # a lower bound on every plan of the full model
    floor: np.ndarray  # (n, m) a lower bound on every plan using the pair (inf: no column)
    value: np.ndarray  # (n, m) the pair's value in the last LP (0 for a pair left out)
    unit_duals: np.ndarray  # (n,) multipliers of the assignment rows at the bound
    rounds: int  # LP solves
    columns: int  # columns of the last LP
    seconds: float
    #: no column priced negative: ``bound`` is the whole LP's optimum and ``value`` its
    #: point. When the clock stopped pricing first, ``bound`` and ``floor`` still hold
    #: (at the duals of the best LP solved) but ``value`` is zero.
    converged: bool = True
    #: (m,) reduced cost of each candidate site's y column at the bound's multipliers (0
    #: for the others): a plan opening a site with rc >= 0 costs at least ``bound + rc``,
    #: one closing a site with rc < 0 at least ``bound - rc``
    site_rc: np.ndarray | None = None

    def keep(self, ub: float) -> np.ndarray:
        """(n, m) bool: the pairs a plan costing at most ``ub`` may use."""
        return self.floor <= ub + max(abs(ub), 1.0) * 1e-9


def lagrangian_bound(cost: np.ndarray, a: sp.csc_matrix, row_lo: np.ndarray,
                     row_hi: np.ndarray, col_lo: np.ndarray, col_hi: np.ndarray,
                     y: np.ndarray) -> tuple[float, np.ndarray]:
    """(LB(y), rc) of the module docstring for row multipliers ``y`` of the whole model.

    A multiplier whose row has no bound on its side counts as zero (zero is always
    allowed), so the bound holds for any ``y``; -inf when a column without a bound on the
    side its reduced cost points to makes it say nothing."""
    lo = np.where(np.isfinite(row_lo), row_lo, 0.0)
    hi = np.where(np.isfinite(row_hi), row_hi, 0.0)
    y = np.where(((y > 0) & ~np.isfinite(row_lo)) | ((y < 0) & ~np.isfinite(row_hi)), 0.0, y)
    rc = cost - a.T @ y
    rows = np.where(y > 0, lo * y, hi * y)
    side = np.where(rc >= 0, col_lo, col_hi)
    if not np.isfinite(side[rc != 0]).all():
        return -np.inf, rc
    return float(rows.sum() + (rc * np.where(np.isfinite(side), side, 0.0)).sum()), rc


def _nearest(cost: np.ndarray, xi: np.ndarray, n: int, k: int) -> np.ndarray:
    """Pair columns among each unit's ``k`` cheapest (by cost) pairs."""
    order = np.lexsort((cost, xi))
    first = np.searchsorted(xi[order], np.arange(n))
    rank = np.arange(len(order)) - first[xi[order]]
    pick = np.zeros(len(xi), bool)
    pick[order[rank < k]] = True
    return pick


def _kept_starts(live: np.ndarray, indptr: np.ndarray) -> np.ndarray:
    """Where each slice of a compressed matrix starts once only its ``live`` entries are
    kept (the entries on rows or columns already in the LP)."""
    return np.concatenate([[0], np.cumsum(live)])[indptr[:-1]].astype(np.int32)


def screen_pairs(problem: Problem, drop: np.ndarray | None, plan: np.ndarray,
                 deadline: float, nearest: int = SCREEN_NEAREST,
                 max_rounds: int | None = None) -> Screen | None:
    """Price the LP of ``formulate(problem, drop)`` from a few pairs per unit and the pairs
    of the valid ``plan``; the screen's floors then say which pairs a plan may use.

    Pricing stops at ``deadline`` or after ``max_rounds`` LP solves; returns None when not
    even the first LP finishes.
    """
    import highspy

    from .answer import quiet_highs

    t0 = time.monotonic()
    f = formulate(problem, drop)
    if f.infeasible_reason:
        return None
    a, row_lo, row_hi = f.matrix()
    a = a.tocsc()
    k, ncol = f.n_pairs, f.ncol
    cost, col_lo, col_hi = f.cost, f.lower, f.upper
    present = np.ones(ncol, bool)
    present[:k] = _nearest(cost[:k], f.xi, problem.n_units, nearest)
    present[:k] |= f.vector(plan)[:k] > 0.5
    present[:k] |= col_lo[:k] > 0.5
    pair_rows = abs(a[:, :k].tocsr())
    touches = np.diff(pair_rows.indptr) > 0

    def rows_for(cols: np.ndarray) -> np.ndarray:
        """Rows with a pair column in ``cols`` (a mask over all columns), and every row
        without pair columns (the count, the cover). A row whose pairs are all left out (a
        linking row; a site's band before any of its pairs enters) waits until one enters:
        leaving a row out only relaxes the LP, and the bound counts it with y = 0."""
        return ((pair_rows @ cols[:k].astype(float)) > 0) | ~touches

    h = quiet_highs()
    h.setOptionValue("presolve", "off")
    model_row = np.full(a.shape[0], -1, np.int64)  # full row -> row of the LP
    model_col = np.full(ncol, -1, np.int64)
    cols = np.flatnonzero(present)
    rows = np.flatnonzero(rows_for(present))
    model_row[rows] = np.arange(len(rows))
    model_col[cols] = np.arange(len(cols))
    sub = a[rows][:, cols].tocsc()
    lp = highspy.HighsLp()
    lp.num_col_, lp.num_row_ = len(cols), len(rows)
    lp.col_cost_, lp.col_lower_, lp.col_upper_ = cost[cols], col_lo[cols], col_hi[cols]
    lp.row_lower_, lp.row_upper_ = row_lo[rows], row_hi[rows]
    lp.a_matrix_.format_ = highspy.MatrixFormat.kColwise
    lp.a_matrix_.start_ = sub.indptr.astype(np.int32)
    lp.a_matrix_.index_ = sub.indices.astype(np.int32)
    lp.a_matrix_.value_ = sub.data
    h.passModel(lp)
    n_rows, n_cols = len(rows), len(cols)
    rounds, best, converged = 0, None, False
    while time.monotonic() < deadline and (max_rounds is None or rounds < max_rounds):
        set_lp_time_limit(h, deadline - time.monotonic())
        h.run()
        rounds += 1
        if h.getModelStatus() != highspy.HighsModelStatus.kOptimal:
            break
        y = np.zeros(a.shape[0])
        on = model_row >= 0
        y[on] = np.asarray(h.getSolution().row_dual)[model_row[on]]
        lb, rc = lagrangian_bound(cost, a, row_lo, row_hi, col_lo, col_hi, y)
        if best is None or lb >= best[0]:  # the last LP, once converged, is the best
            xv = np.zeros(k)
            inside = model_col[:k] >= 0
            xv[inside] = np.asarray(h.getSolution().col_value)[model_col[:k][inside]]
            best = (lb, rc, y, xv)
        enter = np.flatnonzero(~present & (rc < -max(1.0, abs(lb)) * 1e-9))
        if not len(enter):
            converged = True
            break
        # the most negative few per unit (all of them at once can be most of the model)
        enter = enter[_nearest(rc[enter], f.xi[enter], problem.n_units, SCREEN_ADD)]
        present[enter] = True
        model_col[enter] = n_cols + np.arange(len(enter))
        n_cols += len(enter)
        block = a[:, enter].tocsc()  # entries in rows already in the LP
        live = model_row[block.indices] >= 0
        h.addCols(len(enter), cost[enter], col_lo[enter], col_hi[enter], int(live.sum()),
                  _kept_starts(live, block.indptr),
                  model_row[block.indices[live]].astype(np.int32), block.data[live])
        new_rows = np.flatnonzero(rows_for(present) & (model_row < 0))
        if len(new_rows):
            nr = a[new_rows].tocsr()
            live = model_col[nr.indices] >= 0
            h.addRows(len(new_rows), row_lo[new_rows], row_hi[new_rows], int(live.sum()),
                      _kept_starts(live, nr.indptr),
                      model_col[nr.indices[live]].astype(np.int32), nr.data[live])
            model_row[new_rows] = n_rows + np.arange(len(new_rows))
            n_rows += len(new_rows)
    if best is None:
        return None
    lb, rc, y, xv = best
    shape = (problem.n_units, problem.n_sites)
    floor = np.full(shape, np.inf)
    floor[f.xi, f.xj] = np.where(col_lo[:k] > 0.5, -np.inf, lb + np.maximum(rc[:k], 0.0))
    value = np.zeros(shape)
    if converged:
        value[f.xi, f.xj] = xv
    site_rc = np.zeros(problem.n_sites)
    cand = f.ycol >= 0
    site_rc[cand] = rc[f.ycol[cand]]
    return Screen(lb, floor, value, y[: problem.n_units].copy(), rounds, n_cols,
                  time.monotonic() - t0, converged, site_rc)
