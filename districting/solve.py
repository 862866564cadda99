"""The assignment engine: capacitated p-median with whole units and contiguous zones.

:func:`solve` (one shot) and :class:`Session` (re-solves after a lock, a cap or a closure)
run the same loop over one of two backends:

- ``solver="highs"``: the mixed-integer program is built straight from numpy arrays and
  passed to HiGHS through highspy (only allowed unit-site pairs become columns);
- any other name: the Pyomo model of :mod:`districting.model`, solved by that solver.

The model (notation of :mod:`districting.problem`)::

    min  sum_ij w[i,j] x[i,j]                       w = problem.weighted_cost
    s.t. sum_j x[i,j] = 1                           every unit
         x[i,j] <= y[j]                             candidate sites (strong linking)
         sum_j y[j] = p                             when p is set
         x[r_j, j] = y[j]                           a site's own unit is in its zone
         sum_i d[t,i] x[i,j] <= u_max[j] Q[j] y[j]  every demand row t
         sum_i d[t,i] x[i,j] >= u_min[j] Q[j] y[j]  every row t, when u_min > 0
         sum_i d[0,i] (1 - x[i,cur_i]) <= max_moved
         x[i,lock_i] = 1

and, when the problem has edges, contiguity through separator cuts added in rounds
(:mod:`districting.contiguity`; Validi, Buchanan & Lykhovyd, Operations Research 70(2), 2022).

The loop: solve the MIP with the cuts so far (warm-started from the best valid plan) ->
hand out the units without students again and repair what is still cut off
(:func:`districting.contiguity.repair`) -> the repaired plan is an upper bound, the MIP
bound a lower bound (the MIP is a relaxation: every cut is valid) -> stop when the gap is
within the request, else add the cuts the MIP answer violates and solve again. A round
whose MIP answer becomes contiguous by re-handing empty units alone ends the loop with the
MIP's own gap.

Columns are removed only with a proof: a pair whose students exceed the site's upper
capacity in some year can never be used, and after a valid plan of cost UB is known,
reduced-cost fixing drops every pair with LP bound + reduced cost > UB (any plan using it
costs more than UB: for the LP relaxation min c x, a feasible x has c x >= z_LP +
sum_k rc_k x_k over columns at their lower bound).
"""

from __future__ import annotations

import dataclasses
import time
from collections.abc import Callable, Sequence
from contextlib import contextmanager
from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp

from . import contiguity as cg
from . import localsearch, neighbourhood
from .plan import Plan, Round, plan_metrics, relative_gap
from .problem import Problem, _same_array

__all__ = ["solve", "Session"]

_TOL = 1e-6
_LINK_LIMIT = 300_000  # disaggregated x <= y rows up to this many pairs
_PROBE_LIMIT = 60_000  # columns above which HiGHS's presolve skips probing
_LNS_MIN_SITES = 8  # fewer sites: the exact rounds alone (neighbourhoods of 3-8 zones)
_LNS_SHARE = 0.35  # of the time left, at most, for the large-neighbourhood search
_LNS_BIG = 150_000  # columns above which one exact round takes most of a minute (HiGHS
_LNS_SHARE_BIG = 0.9  # presolve alone: 45 s at 350,000 columns), so the search gets more
_ROOT_SHARE = 0.15  # of the time left, at most, for root cutting planes on the LP
_ROOT_MAX = 10.0  # seconds, at most, for them


@dataclass
class _Answer:
    """What one MIP solve returned."""

    status: str  # optimal | feasible | time_limit | infeasible | cancelled | error
    assignment: np.ndarray | None  # None: no solution
    objective: float
    bound: float
    message: str = ""


# ---------------------------------------------------------------------- highspy backend
class _HighsBackend:
    """The MIP built from arrays in one highspy model; cuts are added as rows."""

    name = "highs"

    def __init__(self, problem: Problem, drop: np.ndarray | None = None,
                 threads: int = 2) -> None:
        """``drop`` marks units left out of the MIP (free empty units handed out after)."""
        import highspy

        self._hs = highspy
        self.problem = problem
        n, m = problem.n_units, problem.n_sites
        self.drop = np.zeros(n, bool) if drop is None else np.asarray(drop, bool)
        ok = problem.allowed & ~self.drop[:, None]
        if problem.capacity is not None:  # a unit too big for a site in some year: no pair
            hi = problem.max_util * problem.capacity
            ok &= ~(problem.demand[:, :, None] > hi[None, None, :] + _TOL).any(axis=0)
            if problem.locks.max(initial=-1) >= 0:  # keep locks: their infeasibility is
                li = np.flatnonzero(problem.locks >= 0)  # reported, not hidden
                ok[li, problem.locks[li]] = problem.allowed[li, problem.locks[li]]
        xi, xj = np.nonzero(ok)
        k = len(xi)
        self.xi, self.xj = xi, xj
        self.colmap = np.full((n, m), -1, np.int64)
        self.colmap[xi, xj] = np.arange(k)
        cand = np.flatnonzero(problem.candidates)
        self.ycol = np.full(m, -1, np.int64)
        self.ycol[cand] = k + np.arange(len(cand))
        ncol = k + len(cand)
        cost = np.zeros(ncol)
        cost[:k] = problem.weighted_cost[xi, xj]
        lower = np.zeros(ncol)
        upper = np.ones(ncol)
        rows: list[np.ndarray] = []
        cols: list[np.ndarray] = []
        vals: list[np.ndarray] = []
        rlo: list[np.ndarray] = []
        rhi: list[np.ndarray] = []
        nrow = 0
        self.infeasible_reason = ""

        def add(r, c, v, lo, hi):
            nonlocal nrow
            rows.append(np.asarray(r, np.int64) + nrow)
            cols.append(np.asarray(c, np.int64))
            vals.append(np.asarray(v, float))
            lo = np.atleast_1d(np.asarray(lo, float))
            hi = np.atleast_1d(np.asarray(hi, float))
            rlo.append(lo)
            rhi.append(hi)
            nrow += len(lo)

        inf = np.inf
        # assignment: sum_j x[i,j] = 1
        need = np.where(self.drop, 0.0, 1.0)
        add(xi, np.arange(k), np.ones(k), need, need)
        missing = np.flatnonzero((np.bincount(xi, minlength=n) == 0) & ~self.drop)
        if len(missing):
            self.infeasible_reason = f"{problem.unit_label(int(missing[0]))} has no site"
        is_cand = self.ycol[xj] >= 0
        cap = problem.capacity
        # linking x <= y (strong form) where cheap, else aggregated
        ci = np.flatnonzero(is_cand)
        if len(ci):
            if len(ci) <= _LINK_LIMIT or cap is None:
                r = np.arange(len(ci))
                add(np.concatenate([r, r]), np.concatenate([ci, self.ycol[xj[ci]]]),
                    np.concatenate([np.ones(len(ci)), -np.ones(len(ci))]),
                    np.full(len(ci), -inf), np.zeros(len(ci)))
            # count: sum_j y[j] = p - (sites open anyway)
            if problem.p is not None:
                rest = problem.p - int(problem.always_open.sum())
                add(np.zeros(len(cand)), self.ycol[cand], np.ones(len(cand)), rest, rest)
        # roots: x[r_j, j] = y[j] (always-open sites: x[r_j, j] = 1)
        if problem.roots is not None:
            for j in np.flatnonzero(problem.roots >= 0).tolist():
                r = int(problem.roots[j])
                c = self.colmap[r, j]
                if problem.closed_sites[j]:
                    continue
                if self.ycol[j] < 0:
                    if c < 0:
                        self.infeasible_reason = (
                            f"{problem.site_label(j)} cannot take its own unit "
                            f"{problem.unit_label(r)}")
                    else:
                        lower[c] = 1.0
                elif c < 0:
                    upper[self.ycol[j]] = 0.0
                else:
                    add([0, 0], [c, self.ycol[j]], [1.0, -1.0], 0.0, 0.0)
        # capacity and floor rows, every demand row that is not dominated by another
        if cap is not None:
            d = problem.demand
            hi = problem.max_util * cap
            lo = problem.min_util * cap
            for t in _undominated(d, larger=True):
                self._band_rows(add, d[t], hi, upper_side=True)
            if np.any(lo > _TOL):
                for t in _undominated(d, larger=False):
                    self._band_rows(add, d[t], lo, upper_side=False)
            # cover: open capacity must hold the students of every row
            if len(cand):
                for t in _undominated(d, larger=True):
                    need = d[t].sum() - hi[problem.always_open].sum()
                    if need > _TOL:
                        add(np.zeros(len(cand)), self.ycol[cand], hi[cand], need, inf)
        # max moved: sum_i d0_i (1 - x[i, cur_i]) <= M
        if problem.max_moved is not None:
            cur = problem.current
            d0 = problem.demand[0]
            has = (cur >= 0) & (d0 > 0)
            total = float(d0[has].sum())
            c = self.colmap[np.flatnonzero(has), cur[has]]
            stay = c >= 0
            add(np.zeros(int(stay.sum())), c[stay], -d0[has][stay], -inf,
                problem.max_moved - total)
        # locks: fix the one column of a locked unit
        li = np.flatnonzero(problem.locks >= 0)
        lc = self.colmap[li, problem.locks[li]]
        lower[lc[lc >= 0]] = 1.0

        r = np.concatenate(rows)
        c = np.concatenate(cols)
        v = np.concatenate(vals)
        a = sp.csc_matrix((v, (r, c)), shape=(nrow, ncol))
        a.sum_duplicates()
        lp = highspy.HighsLp()
        lp.num_col_ = ncol
        lp.num_row_ = nrow
        lp.col_cost_ = cost
        lp.col_lower_ = lower
        lp.col_upper_ = upper
        lp.row_lower_ = np.concatenate(rlo)
        lp.row_upper_ = np.concatenate(rhi)
        lp.a_matrix_.format_ = highspy.MatrixFormat.kColwise
        lp.a_matrix_.start_ = a.indptr.astype(np.int32)
        lp.a_matrix_.index_ = a.indices.astype(np.int32)
        lp.a_matrix_.value_ = a.data
        lp.integrality_ = [highspy.HighsVarType.kInteger] * ncol
        self.ncol = ncol
        self._cost = cost
        self.lower0 = lower
        self.upper = upper.copy()  # permanent bounds (reduced-cost fixing lowers them)
        self._temp: np.ndarray | None = None  # columns a heuristic turned off for a while
        self._lp: tuple[float, np.ndarray, np.ndarray] | None = None
        self._cut_lp: tuple[float, np.ndarray, np.ndarray] | None = None  # after strengthen
        self._tree: np.ndarray | None = None  # rows of the heuristic's site trees
        self._tree_off = np.zeros(0, np.int64)
        h = _quiet_highs()
        h.setOptionValue("threads", int(threads))
        h.setOptionValue("presolve", "on")
        if ncol > _PROBE_LIMIT:
            # probing in presolve grows with the binaries and overruns the time limit on
            # large models (seen: 90 s expected for 5,000 units x 25 schools)
            h.setOptionValue("presolve_rule_off", 32768)
        h.passModel(lp)
        self.h = h
        self._cancel: Callable[[], bool] | None = None
        self._deadline = float("inf")
        h.cbMipInterrupt.subscribe(self._interrupt)
        self.fixed = 0

    def _band_rows(self, add, dt, bound, upper_side: bool) -> None:
        """sum_i d[t,i] x[i,j] <= (>=) bound[j] y[j] for every site whose row can bind."""
        p = self.problem
        xi, xj = self.xi, self.xj
        coef = dt[xi]
        reach = np.bincount(xj, weights=coef, minlength=p.n_sites)
        for j in range(p.n_sites):
            if not np.isfinite(bound[j]) or p.closed_sites[j]:
                continue
            cand = self.ycol[j] >= 0
            if upper_side and reach[j] <= bound[j] + _TOL and not cand:
                continue  # every student it may take fits: the row cannot bind
            if not upper_side and bound[j] <= _TOL:
                continue
            sel = np.flatnonzero((xj == j) & (coef != 0))
            cs = sel.tolist()
            vs = coef[sel].tolist()
            if cand:
                cs.append(int(self.ycol[j]))
                vs.append(-float(bound[j]))
                lo, hi = (-np.inf, 0.0) if upper_side else (0.0, np.inf)
            else:
                lo, hi = (-np.inf, bound[j]) if upper_side else (bound[j], np.inf)
            add(np.zeros(len(cs)), cs, vs, lo, hi)

    def _interrupt(self, e) -> None:
        if (self._cancel is not None and self._cancel()) or time.monotonic() > self._deadline:
            e.interrupt()

    # --------------------------------------------------------------- interface
    def vector(self, assignment: np.ndarray) -> np.ndarray:
        """Column values of a plan (x and y)."""
        p = self.problem
        a = np.asarray(assignment, np.int64)
        x = np.zeros(self.ncol)
        has = np.flatnonzero(a >= 0)
        c = self.colmap[has, a[has]]
        x[c[c >= 0]] = 1.0
        opened = cg.open_from_assignment(p, a)
        yc = self.ycol[opened & (self.ycol >= 0)]
        x[yc] = 1.0
        return x

    def add_cuts(self, cuts: Sequence[cg.Cut]) -> int:
        """Add x[i,j] (+ x[a,j] - 1) - sum_S x[s,j] <= 0 rows; returns the number added.

        A separator pair without a column is left out of its row only when the pair is not
        allowed (x[s,j] = 0 in every plan); a cut through a unit the model leaves out is
        not added at all (cuts found on the full model, reused by a relaxed rebuild).
        """
        starts, idx, val, ub = [], [], [], []
        nnz = 0
        for cut in cuts:
            j = cut.site
            if self.drop[cut.separator].any() or (cut.anchor >= 0 and self.drop[cut.anchor]):
                # a unit the model leaves out (no students) would be dropped from the row,
                # which would make the cut too strong: it may be handed any zone later
                continue
            sc = self.colmap[cut.separator, j]
            sc = sc[sc >= 0]
            ac = self.colmap[cut.anchor, j] if cut.anchor >= 0 else -1
            for i in cut.units.tolist():
                ic = self.colmap[i, j]
                if ic < 0:
                    continue
                starts.append(nnz)
                row_c = [ic, *sc.tolist()]
                row_v = [1.0] + [-1.0] * len(sc)
                if ac >= 0:
                    row_c.append(int(ac))
                    row_v.append(1.0)
                idx.extend(row_c)
                val.extend(row_v)
                nnz += len(row_c)
                ub.append(1.0 if ac >= 0 else 0.0)
        if not starts:
            return 0
        k = len(starts)
        self.h.addRows(k, np.full(k, -np.inf), np.array(ub), nnz, np.array(starts, np.int32),
                       np.array(idx, np.int32), np.array(val))
        return k

    def solve(self, gap: float, time_left: float | None, start: np.ndarray | None,
              cancel: Callable[[], bool] | None) -> _Answer:
        hs, h = self._hs, self.h
        if self.infeasible_reason:
            return _Answer("infeasible", None, np.inf, np.inf, self.infeasible_reason)
        h.setOptionValue("mip_rel_gap", float(gap))
        tl = np.inf if time_left is None else max(float(time_left), 0.01)
        h.setOptionValue("time_limit", float(tl))
        self._cancel = cancel
        self._deadline = time.monotonic() + tl + 0.5
        if start is not None:
            sol = hs.HighsSolution()
            sol.col_value = self.vector(start)
            sol.value_valid = True
            h.setSolution(sol)
        h.run()
        st = h.getModelStatus()
        info = h.getInfo()
        ms = hs.HighsModelStatus
        has = info.primal_solution_status == 2
        if has:
            col = np.asarray(h.getSolution().col_value)
            got = float(np.dot(self._cost, col))
            want = float(info.objective_function_value)
            if abs(got - want) > 1e-7 * max(1.0, abs(want)):
                # seen after rows were added: HiGHS reported a stale objective with the
                # start as its solution; solving again from scratch gives a true answer
                h.clearSolver()
                h.run()
                st = h.getModelStatus()
                info = h.getInfo()
                has = info.primal_solution_status == 2
        a = None
        if has:
            col = np.asarray(h.getSolution().col_value)
            xv = col[: len(self.xi)] > 0.5
            a = np.full(self.problem.n_units, -1, np.int64)
            a[self.xi[xv]] = self.xj[xv]
            if (a[~self.drop] < 0).any():
                a, has = None, False
        status = {
            ms.kOptimal: "optimal",
            ms.kInfeasible: "infeasible",
            ms.kTimeLimit: "time_limit",
            ms.kInterrupt: "cancelled",
            ms.kHighsInterrupt: "cancelled",
            ms.kSolutionLimit: "feasible",
        }.get(st, "error")
        if status == "cancelled" and (cancel is None or not cancel()):
            status = "time_limit"  # the deadline guard fired, not the user
        bound = float(info.mip_dual_bound)
        obj = float(info.objective_function_value) if has else np.inf
        if status == "optimal" and not has:
            status = "error"
        if status == "infeasible":
            bound = np.inf
        msg = "" if status != "error" else f"HiGHS stopped: {h.modelStatusToString(st)}"
        return _Answer(status, a, obj, bound if np.isfinite(bound) else -np.inf, msg)

    def relaxation(self) -> tuple[float, np.ndarray, np.ndarray] | None:
        """The LP relaxation of the model as built (no integrality): (z_LP, x, rc).

        Solved once and kept: rows added later (cuts) only cut the LP's feasible set, so
        z_LP stays a lower bound and the reduced-cost test below stays valid.
        """
        if self._lp is not None or self.infeasible_reason:
            return self._lp
        with self._continuous():
            self._lp = self._run_lp(np.inf)
        return self._lp

    @contextmanager
    def _continuous(self):
        """Every column continuous inside the block (the LP relaxation), integer after."""
        hs, h = self._hs, self.h
        allc = np.arange(self.ncol, dtype=np.int32)
        h.changeColsIntegrality(self.ncol, allc, np.full(self.ncol, hs.HighsVarType.kContinuous))
        try:
            yield
        finally:
            h.changeColsIntegrality(self.ncol, allc,
                                    np.full(self.ncol, hs.HighsVarType.kInteger))

    def _run_lp(self, time_limit: float) -> tuple[float, np.ndarray, np.ndarray] | None:
        """Solve the model as it stands (inside :meth:`_continuous`): (z, x, rc) of the
        pair columns, or None when the LP did not finish optimal."""
        hs, h = self._hs, self.h
        h.setOptionValue("time_limit", float(time_limit))
        h.run()
        if h.getModelStatus() != hs.HighsModelStatus.kOptimal:
            return None
        sol = h.getSolution()
        k = len(self.xi)
        return (float(h.getInfo().objective_function_value),
                np.asarray(sol.col_value)[:k].copy(), np.asarray(sol.col_dual)[:k].copy())

    def strongest(self) -> tuple[float, np.ndarray, np.ndarray] | None:
        """The LP with the root cutting planes when :meth:`strengthen` ran, else the plain
        one: the best lower bound (z_LP, x, rc) for the bound and reduced-cost fixing."""
        return self._cut_lp if self._cut_lp is not None else self.relaxation()

    def strengthen(self, graph: cg.UnitGraph, passable: np.ndarray | None, deadline: float,
                   ub: float = np.inf, max_rounds: int = 200, min_gain: float = 0.005,
                   keep_share: float = 0.1) -> list[cg.Cut]:
        """Root cutting planes: separator cuts violated by the LP point, in rounds.

        Solves the LP relaxation with every row so far, adds the separator cuts its point
        violates (:func:`districting.contiguity.fractional_cuts`) and solves again (the
        dual simplex restarts from the last basis), until no cut is violated, the clock
        reaches ``deadline``, or three rounds running each close less than ``min_gain``
        of the gap to ``ub`` (the cost of a valid plan; without one, of a thousandth of
        the bound): on some towns the cuts lift the bound a long way at once, on others
        they creep, and creeping rows only slow the integer rounds down. The cuts are
        valid for every plan, so the last LP stays a relaxation (:meth:`strongest`): it
        lifts the bound and lets reduced-cost fixing drop more pairs. The heuristics keep
        the plain LP (:meth:`relaxation`): its point, less fractional, guides them better
        (measured on the demo town's elementary level). When all the rounds together
        close less than ``keep_share`` of the gap to ``ub``, the rows are taken out of the
        model again (the bound they gave is kept): there they slowed the integer rounds
        more than they helped (measured on the same level). Returns the cuts kept.
        """
        lp = self.relaxation()
        if lp is None or self.problem.roots is None:
            return []
        h = self.h
        n, m = self.problem.n_units, self.problem.n_sites
        found: list[cg.Cut] = []
        z, xv = lp[0], lp[1]
        first_row = h.getNumRow()
        stalls = 0
        with self._continuous():
            for _ in range(max_rounds):
                if time.monotonic() >= deadline:
                    break
                point = np.zeros((n, m))
                point[self.xi, self.xj] = xv
                cuts = cg.fractional_cuts(self.problem, graph, point, passable)
                if not cuts or not self.add_cuts(cuts):
                    break
                found.extend(cuts)
                answer = self._run_lp(max(deadline - time.monotonic(), 0.01))
                if answer is None:
                    break
                self._cut_lp = answer
                z_new, xv = answer[0], answer[1]
                room = ub - z if np.isfinite(ub) and ub > z else 1e-3 * max(abs(z), 1.0)
                stalls = stalls + 1 if z_new - z < min_gain * room else 0
                z = z_new
                if stalls >= 3:
                    break
        closed = (z - lp[0]) / (ub - lp[0]) if np.isfinite(ub) and ub > lp[0] else 1.0
        if found and closed < keep_share:
            rows = np.arange(first_row, h.getNumRow(), dtype=np.int32)
            h.deleteRows(len(rows), rows)
            return []
        return found

    def fix_by_reduced_cost(self, ub: float) -> int:
        """Reduced-cost fixing against a valid plan of cost ``ub``; returns columns fixed.

        For the LP relaxation min c x with optimum z_LP and reduced costs rc, every feasible
        x satisfies c x >= z_LP + sum_k rc_k x_k over the columns nonbasic at their lower
        bound 0 (rc_k >= 0). A plan using pair k therefore costs at least z_LP + rc_k; when
        that exceeds ``ub`` (the cost of a valid plan in hand) no better plan uses k, and
        x_k <= 0 is fixed for good. Columns at their upper bound have rc <= 0 and are never
        fixed. Redone (with the same LP) whenever a better plan lowers ``ub``.
        """
        lp = self.strongest()
        if lp is None or not np.isfinite(ub):
            return 0
        z, xv, rc = lp
        slack = max(abs(ub), 1.0) * 1e-9
        k = len(self.xi)
        drop = np.flatnonzero((z + rc > ub + slack) & (self.lower0[:k] < 0.5)
                              & (self.upper[:k] > 0.5) & (xv < 0.5))
        if len(drop):
            self.upper[drop] = 0.0
            if self._temp is None or not len(self._temp):
                self.h.changeColsBounds(len(drop), drop.astype(np.int32), self.lower0[drop],
                                        self.upper[drop])
            else:
                self._temp = np.union1d(self._temp, drop)
                self._apply(self._temp, np.zeros(len(self._temp)))
        self.fixed += len(drop)
        return len(drop)

    def _apply(self, cols: np.ndarray, upper: np.ndarray) -> None:
        if len(cols):
            self.h.changeColsBounds(len(cols), cols.astype(np.int32), self.lower0[cols], upper)

    def restrict(self, off: np.ndarray) -> None:
        """Heuristic only: columns ``off`` get upper bound 0 until :meth:`unrestrict`."""
        self.unrestrict()
        off = np.asarray(off, np.int64)
        off = off[self.lower0[off] < 0.5]
        self._temp = off
        self._apply(off, np.zeros(len(off)))

    def unrestrict(self) -> None:
        if self._temp is not None:
            self._apply(self._temp, self.upper[self._temp])
            self._temp = None

    def tree_rows(self, parent: np.ndarray) -> np.ndarray:
        """Add the rows x[i,j] <= x[q,j] (q: i's nearest ancestor with a column in site j's
        tree, :func:`districting.contiguity.site_trees`), inactive until :meth:`trees` turns
        them on. Returns the pair columns a tree-shaped zone cannot use (ancestor without a
        column, unit not reached). Heuristic only: a tree restricts the plans.
        """
        p = self.problem
        xi, xj = self.xi, self.xj
        k = len(xi)
        q = parent[xj, xi].copy()
        for _ in range(p.n_units):  # climb over units left out of the model
            up = (q >= 0) & self.drop[np.maximum(q, 0)]
            if not up.any():
                break
            q[up] = parent[xj[up], q[up]]
        roots = p.roots if p.roots is not None else np.full(p.n_sites, -1)
        free_site = roots[xj] < 0
        is_root = xi == roots[xj]
        qc = np.where(q >= 0, self.colmap[np.maximum(q, 0), xj], -1)
        off = ~free_site & ~is_root & (qc < 0)
        rows = np.flatnonzero(~free_site & ~is_root & (qc >= 0))
        nr = len(rows)
        r0 = self.h.getNumRow()
        if nr:
            starts = np.arange(0, 2 * nr, 2, dtype=np.int32)
            idx = np.column_stack([rows, qc[rows]]).ravel().astype(np.int32)
            val = np.tile([1.0, -1.0], nr)
            self.h.addRows(nr, np.full(nr, -np.inf), np.full(nr, np.inf), 2 * nr, starts,
                           idx, val)
        self._tree = np.arange(r0, r0 + nr, dtype=np.int32)
        self._tree_off = np.flatnonzero(off[:k])
        return self._tree_off

    def trees(self, on: bool) -> None:
        """Turn the tree rows on (upper bound 0) or off (free rows)."""
        t = self._tree
        if t is not None and len(t):
            self.h.changeRowsBounds(len(t), t, np.full(len(t), -np.inf),
                                    np.full(len(t), 0.0 if on else np.inf))

    def column(self, units: np.ndarray, sites: np.ndarray) -> np.ndarray:
        """Column index per (unit, site) pair (-1: no column)."""
        return self.colmap[units, sites]


def _quiet_highs():
    """A Highs object with no output: its constructor prints a banner on the C stdout,
    which would break the CLI's tables and pipes, so file descriptor 1 is muted meanwhile."""
    import os
    import sys

    import highspy

    sys.stdout.flush()
    saved = os.dup(1)
    try:
        with open(os.devnull, "wb") as null:
            os.dup2(null.fileno(), 1)
            h = highspy.Highs()
            h.setOptionValue("output_flag", False)
    finally:
        os.dup2(saved, 1)
        os.close(saved)
    return h


def _undominated(d: np.ndarray, larger: bool) -> list[int]:
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


# ---------------------------------------------------------------------- Pyomo backend
class _PyomoBackend:
    """The Pyomo reference model of :mod:`districting.model`, any solver Pyomo drives."""

    def __init__(self, problem: Problem, solver: str) -> None:
        from . import model as md

        self._md = md
        self.name = solver
        self.problem = problem
        self.model = md.build_model(problem, contiguity="cuts")
        self.fixed = 0

    def add_cuts(self, cuts: Sequence[cg.Cut]) -> int:
        allowed = self.problem.allowed
        m = self.model
        k = 0
        for cut in cuts:
            j = cut.site
            sep = [int(s) for s in cut.separator if allowed[s, j]]
            for i in cut.units.tolist():
                if not allowed[i, j]:
                    continue
                if cut.anchor < 0:
                    self._md.add_separator_cut(m, i, j, sep)
                else:  # a-b form for a site without a root unit
                    a = int(cut.anchor)
                    m.separator_cuts.add(
                        m.x[i, j] + m.x[a, j] - 1 <= sum(m.x[s, j] for s in sep))
                k += 1
        return k

    def solve(self, gap, time_left, start, cancel) -> _Answer:
        r = self._md.solve_model(self.model, self.name, gap, time_left, start)
        a = None if r.assignment is None or np.any(np.asarray(r.assignment) < 0) else (
            np.asarray(r.assignment, np.int64))
        status = r.status
        if a is None and status in ("optimal", "feasible"):
            status = "error"
        obj = float(r.objective) if a is not None else np.inf
        bound = float(r.bound) if r.bound is not None and np.isfinite(r.bound) else -np.inf
        msg = getattr(r, "message", "") or ("" if status != "error" else f"{self.name}: error")
        return _Answer(status, a, obj, bound, msg)

    def relaxation(self) -> None:
        """No LP pass on this route: its bound comes from the solver's own answers."""
        return None

    def unrestrict(self) -> None:
        """Nothing to undo: this route never restricts columns for the heuristic."""

    def fix_by_reduced_cost(self, ub: float) -> int:
        return 0


# ---------------------------------------------------------------------- the loop
def _make_backend(problem: Problem, solver: str, drop: np.ndarray | None = None):
    if solver == "highs":
        return _HighsBackend(problem, drop)
    return _PyomoBackend(problem, solver)


def _objective(problem: Problem, a: np.ndarray) -> float:
    return float(problem.weighted_cost[np.arange(problem.n_units), a].sum())


def _prepare_start(problem: Problem, graph: cg.UnitGraph | None, start) -> np.ndarray | None:
    """A previous plan adapted to this problem: locks applied, units on sites they may no
    longer use moved to their cheapest usable site, roots put back, then repaired."""
    if start is None:
        return None
    a = np.asarray(start, dtype=np.int64).copy()
    n, m = problem.n_units, problem.n_sites
    if a.shape != (n,):
        return None
    allowed = problem.allowed
    li = np.flatnonzero(problem.locks >= 0)
    a[li] = problem.locks[li]
    bad = (a < 0) | (a >= m)
    bad[~bad] = ~allowed[np.flatnonzero(~bad), a[~bad]]
    if bad.any():
        opened = problem.always_open | np.isin(np.arange(m), a[~bad])
        wc = np.where(allowed & opened[None, :], problem.weighted_cost, np.inf)
        for i in np.flatnonzero(bad).tolist():
            j = int(np.argmin(wc[i]))
            if not np.isfinite(wc[i, j]):
                return None
            a[i] = j
    if problem.roots is not None:
        opened = cg.open_from_assignment(problem, a)
        rj = np.flatnonzero(opened & (problem.roots >= 0))
        a[problem.roots[rj]] = rj
    if graph is not None:
        fixed = cg.repair(problem, graph, a)
        if fixed is not None:
            a = fixed
        if cg.plan_checks(problem, a, graph):  # e.g. a lock pushed a school over its cap
            valid = localsearch.make_valid(problem, graph, a)
            if valid is not None:
                a = valid
    return a


def _columns(backend) -> int:
    """Columns of the model (0 when the backend does not say)."""
    return int(getattr(backend, "ncol", 0))


def _rounded(problem: Problem, backend) -> np.ndarray:
    """Each unit to the site its LP value is largest on; units the model leaves out (those
    without students) and units without a column keep the constructive site."""
    a = _constructive(problem)
    lp = backend.relaxation()
    if lp is None:
        return a
    order = np.argsort(lp[1], kind="stable")  # the largest value is written last
    a[backend.xi[order]] = backend.xj[order]
    return a


def _constructive(problem: Problem) -> np.ndarray:
    """Today's site for every unit that has a usable one, else the nearest usable site."""
    allowed = problem.allowed  # closed sites are not allowed
    near = np.argmin(np.where(allowed, problem.travel, np.inf), axis=1)
    cur = problem.current
    ok = cur >= 0
    ok[ok] = allowed[np.flatnonzero(ok), cur[ok]]
    return np.where(ok, cur, near)


class _Run:
    """Book-keeping of one solve: best valid plan, bound, rounds, history."""

    def __init__(self, problem: Problem, graph: cg.UnitGraph | None, t0: float,
                 time_limit: float | None, progress) -> None:
        self.problem, self.graph, self.t0 = problem, graph, t0
        self.time_limit = time_limit
        self.progress = progress
        self.best: np.ndarray | None = None
        self.best_obj = np.inf
        self.bound = -np.inf
        self.history: list[Round] = []
        self.rounds = 0
        self.build = 0.0

    def elapsed(self) -> float:
        return time.monotonic() - self.t0

    def left(self) -> float | None:
        return None if self.time_limit is None else self.time_limit - self.elapsed()

    def consider(self, a: np.ndarray | None) -> bool:
        """Keep ``a`` when it is a valid plan (independent check) cheaper than the best."""
        if a is None:
            return False
        a = np.asarray(a, np.int64)
        obj = _objective(self.problem, a)
        if obj >= self.best_obj - _TOL * max(1.0, abs(obj)):
            return False
        if cg.plan_checks(self.problem, a, self.graph):
            return False
        self.best, self.best_obj = a.copy(), obj
        if self.progress is not None:  # a better plan is worth showing at once
            self._emit(0, 0)
        return True

    def gap(self) -> float:
        return relative_gap(self.best_obj, min(self.bound, self.best_obj))

    def record(self, added: int, n_frag: int, heuristic: bool = False) -> None:
        self.rounds += 1
        self.history.append(self._emit(added, n_frag))

    def _emit(self, added: int, n_frag: int) -> Round:
        """The current state as a Round; progress gets it with the best plan attached."""
        r = Round(self.rounds, self.best_obj, min(self.bound, self.best_obj), self.gap(),
                  added, n_frag, self.elapsed())
        if self.progress is not None:
            self.progress(dataclasses.replace(r, best=self.best))
        return r

    def plan(self, status: str, message: str, route: str, n_cuts: int, gap: float) -> Plan:
        problem = self.problem
        bound = min(self.bound, self.best_obj)
        if self.best is None:
            msg = message or (
                "no plan that meets every constraint was found within the time limit"
                if status == "time_limit" else "no plan that meets every constraint was found")
            st = status if status in ("time_limit", "cancelled") else "infeasible"
            return Plan(st, np.inf, bound, np.inf, np.full(problem.n_units, -1, np.int64),
                        np.zeros(problem.n_sites, bool), message=msg, rounds=self.rounds,
                        cuts=n_cuts, build_seconds=self.build, solve_seconds=self.elapsed(),
                        history=tuple(self.history), route=route)
        opened = cg.open_from_assignment(problem, self.best)
        g = relative_gap(self.best_obj, bound)
        if status == "feasible" and g <= gap + 1e-12:
            status = "optimal"
        return Plan(status=status, objective=self.best_obj, bound=float(bound), gap=g,
                    assignment=self.best, open_sites=opened, message=message,
                    rounds=self.rounds, cuts=n_cuts, build_seconds=self.build,
                    solve_seconds=self.elapsed(), history=tuple(self.history),
                    metrics=plan_metrics(problem, self.best, opened), route=route)


class Session:
    """A solver that keeps its built model, cuts and best plan between re-solves.

    ``Session(problem).solve(...)`` solves; ``update(problem2)`` changes the problem (a lock,
    a capacity, a closure): the cuts are kept when the unit graph and the roots are the same
    (a separator cut depends only on them), and the previous plan becomes the warm start.
    """

    def __init__(self, problem: Problem, solver: str = "highs") -> None:
        self.solver = solver
        self.problem = problem
        self.cuts: list[cg.Cut] = []
        self.last: Plan | None = None
        self._backend = None
        self._full = False  # True once empty units had to join the MIP
        self._parents: np.ndarray | None = None
        self._graph = cg.UnitGraph.of(problem) if problem.contiguous else None
        self._carried_bound = -np.inf  # a bound proven for a problem this one restricts
        self._solved: Problem | None = None  # the problem self.last was solved for
        # heuristics besides the exact rounds and their repair: LP rounding, the
        # large-neighbourhood search, fix-and-resolve (off inside a neighbourhood's solve)
        self.heuristics = True
        self.build_seconds = 0.0

    def update(self, problem: Problem) -> None:
        """Switch to a changed problem; keeps the cuts when graph and roots are unchanged.

        When the new problem only removes plans (a lock, a forbid, a closure, a lower cap:
        :meth:`Problem.is_restriction_of`), the last plan's proven bound stays a valid
        lower bound and starts the next solve.
        """
        old = self.problem
        last, base = self.last, self._solved
        carry = (last is not None and base is not None and last.feasible
                 and np.isfinite(last.bound) and problem.is_restriction_of(base))
        self._carried_bound = last.bound if carry else -np.inf
        same_graph = (
            problem.n_units == old.n_units
            and problem.n_sites == old.n_sites
            and _same_array(problem.edges, old.edges)
            and _same_array(problem.roots, old.roots)
        )
        if not same_graph:
            self.cuts = []
            self._graph = cg.UnitGraph.of(problem) if problem.contiguous else None
        self.problem = problem
        self._backend = None
        self._full = False

    def _ensure_backend(self, drop: np.ndarray | None = None):
        if self._backend is None:
            t0 = time.perf_counter()
            self._backend = _make_backend(self.problem, self.solver, drop)
            if self.cuts:
                self._backend.add_cuts(self.cuts)
            self.build_seconds = time.perf_counter() - t0
        return self._backend

    def solve(
        self,
        gap: float = 1e-4,
        time_limit: float | None = None,
        *,
        progress: Callable[[Round], None] | None = None,
        cancel: Callable[[], bool] | None = None,
        start=None,
        max_rounds: int = 200,
    ) -> Plan:
        """Solve the current problem; ``start`` defaults to the last plan of this session.

        Stage 0: the start, adapted to this problem (locks applied, repaired), is the first
        valid plan when it passes the checks; with a bound carried over by :meth:`update`
        it may already be proven. Stage 1 (highs route): the LP relaxation gives a lower
        bound, and its own choice per unit made valid a candidate plan; root cutting
        planes (:meth:`_HighsBackend.strengthen`) lift that bound; on a model above
        ``_LNS_BIG`` columns the large-neighbourhood search (:mod:`.neighbourhood`) runs
        at once; when no valid start was given, the fix-and-resolve heuristic
        (:meth:`_fix_and_resolve`) runs too, with or without contiguity (on a model
        above ``_PROBE_LIMIT`` columns only when nothing else found a plan: its restricted
        MIPs can stall HiGHS there).
        Reduced-cost fixing uses each better plan to shrink the model. Stage 2: exact
        rounds on the model without any heuristic restriction (separator cuts only), each
        warm-started from the best valid plan, until the gap is within ``gap``;
        fix-and-resolve and the large-neighbourhood search run (once each) when the
        repaired answer of a round is still far above the bound.
        """
        t0 = time.monotonic()
        problem = self.problem
        route = self.solver
        if start is None and self.last is not None and self.last.feasible:
            start = self.last.assignment
        reasons = _precheck(problem)
        if reasons:
            return self._finish(_infeasible(problem, "\n".join(reasons), route))
        graph = self._graph
        passable = cg.free_units(problem) if graph is not None else None
        # units without students stay out of the MIP (highs route) until a round needs them
        relaxed = bool(route == "highs" and passable is not None and passable.any()
                       and not self._full)
        run = _Run(problem, graph, t0, time_limit, progress)
        run.bound = self._carried_bound
        given = start is not None
        cand = _prepare_start(problem, graph, start)
        if cand is not None:
            run.consider(cand)
        if run.best is None and graph is not None:
            # insurance for the time limit: today's zones (or nearest schools) made valid
            # by local search, when that succeeds; the heuristic below still runs
            run.consider(_prepare_start(problem, graph, _constructive(problem)))
        if run.best is not None and run.gap() <= gap + 1e-12:
            # the adapted start is within the gap of a bound carried from a problem this
            # one restricts (see update): proven without building a model
            return self._finish(run.plan("optimal", "", route, len(self.cuts), gap))
        try:
            backend = self._ensure_backend(passable if relaxed else None)
        except (ImportError, RuntimeError, ValueError) as exc:
            return self._finish(_failed(problem, f"could not build the model: {exc}", route))
        run.build = self.build_seconds
        self.build_seconds = 0.0
        hint = run.best if run.best is not None else cand
        if hint is not None and cg.plan_checks(problem, hint, graph, contiguity=False):
            hint = None
        status = "feasible"
        message = ""
        # ---- stage 1: LP bound, heuristic plan, reduced-cost fixing
        lp = backend.relaxation()
        if lp is not None and graph is not None and self.heuristics:
            # the LP's own choice per unit, made valid: often far better than today's zones
            run.consider(localsearch.make_valid(problem, graph, _rounded(problem, backend)))
            # root cutting planes: separator cuts the LP point violates, while they pay
            # (not inside a neighbourhood's small solve, where they cost more than they give)
            left = run.left()
            budget = _ROOT_MAX if left is None else min(_ROOT_MAX, _ROOT_SHARE * left)
            self.cuts.extend(backend.strengthen(graph, passable if relaxed else None,
                                                time.monotonic() + budget, run.best_obj))
            lp = backend.strongest()
        if lp is not None:
            run.bound = max(run.bound, lp[0])
            if run.best is not None:
                backend.fix_by_reduced_cost(run.best_obj)
        # large-neighbourhood search: at once on a model too large for quick exact rounds,
        # else after a round that leaves the gap wide
        big = _columns(backend) > _LNS_BIG
        lns_done = not (graph is not None and self.heuristics
                        and problem.n_sites > _LNS_MIN_SITES)
        if not lns_done and big and run.best is not None:
            lns_done = True
            self._neighbourhoods(run, cancel, big)
            backend.fix_by_reduced_cost(run.best_obj)
        # without a valid start, the heuristic (fix-and-resolve) gives the first plan: on
        # capacity-bound towns it is far better than repairing the first exact answer (on
        # large models, whose restricted MIPs can stall HiGHS, only when nothing else did)
        heuristic_done = not self.heuristics or (
            run.best is not None and _columns(backend) > _PROBE_LIMIT)
        if not heuristic_done and not given and lp is not None:
            heuristic_done = True
            self._fix_and_resolve(backend, run, gap, cancel, relaxed, passable)
            if run.best is not None:
                backend.fix_by_reduced_cost(run.best_obj)
        fixed_at = run.best_obj
        # ---- stage 2: exact rounds
        for _ in range(max_rounds):
            if run.best is not None and run.gap() <= gap + 1e-12:
                status = "optimal"
                break
            if cancel is not None and cancel():
                status = "cancelled"
                break
            left = run.left()
            if left is not None and left <= 0:
                status = "time_limit"
                break
            if run.best_obj < fixed_at:
                backend.fix_by_reduced_cost(run.best_obj)
                fixed_at = run.best_obj
            backend.unrestrict()
            # until a valid plan exists, cap each round so the repair and the heuristic get
            # their turn well before the time limit (the MIP's incumbent is good enough)
            budget = left if run.best is not None or left is None else max(2.0, 0.25 * left)
            ans = backend.solve(gap, budget, run.best if run.best is not None else hint, cancel)
            if ans.status == "infeasible":
                if run.best is None:
                    message = _explain(problem) or ans.message
                    return self._finish(_infeasible(problem, message, route, run.rounds,
                                                    run.history, run.build, run.elapsed()))
                run.bound = run.best_obj  # every cut and fix is valid: nothing beats the plan
                status = "optimal"
                break
            if ans.status == "error":
                message = ans.message
                if run.best is None:
                    return self._finish(_failed(problem, message, route))
                break
            if ans.status in ("optimal", "time_limit", "cancelled", "feasible"):
                run.bound = max(run.bound, ans.bound)
            n_frag, added = 0, 0
            if ans.assignment is not None:
                a = ans.assignment
                if graph is None:
                    run.consider(a)
                else:
                    n_frag = len(cg.fragments(problem, graph, a))
                    b, detached = cg.reassign_empty(problem, graph, a)
                    if not detached.any() and run.consider(b):
                        pass
                    else:
                        cuts = cg.separator_cuts(problem, graph, a, only=detached,
                                                 passable=passable, strict=relaxed)
                        added = backend.add_cuts(cuts)
                        self.cuts.extend(cuts)
                        if relaxed and added == 0:
                            # empty units must join the MIP: only cuts through them are left
                            relaxed, self._full, self._backend = False, True, None
                            backend = self._ensure_backend(None)
                            run.build += self.build_seconds
                            if backend.relaxation() is not None and run.best is not None:
                                backend.fix_by_reduced_cost(run.best_obj)
                            added = -1
                        fixed = cg.repair(problem, graph, a)
                        if fixed is not None:
                            run.consider(cg.improve(problem, graph, fixed))
                        run.consider(localsearch.make_valid(problem, graph, a))
                        # the heuristic runs when the repair found no plan, or (once) when
                        # the repaired plan is far above the bound
                        far = run.best is None or (not heuristic_done
                                                   and run.gap() > max(10 * gap, 1e-3))
                        if far and backend.relaxation() is not None:
                            heuristic_done = True
                            self._fix_and_resolve(backend, run, gap, cancel, relaxed, passable)
                if not lns_done and run.best is not None and run.gap() > max(10 * gap, 1e-3):
                    lns_done = True
                    self._neighbourhoods(run, cancel, big)
            run.record(max(added, 0), n_frag)
            if run.best is not None and run.gap() <= gap + 1e-12:
                status = "optimal"
                break
            if ans.status == "cancelled":
                status = "cancelled"
                break
            if ans.status == "time_limit" and run.left() is not None and run.left() <= 1e-3:
                status = "time_limit"
                break
            if added == 0 and ans.assignment is not None and graph is not None:
                # the MIP answer is contiguous after re-handing empty units, yet the gap
                # is open: only the MIP's own gap is left; solving again cannot add cuts
                if ans.status == "optimal":
                    break
            if graph is None and ans.status == "optimal":
                break
        else:
            status = "feasible"
        backend.unrestrict()
        return self._finish(run.plan(status, message, route, len(self.cuts), gap))

    def _neighbourhoods(self, run: _Run, cancel, big: bool) -> None:
        """Large-neighbourhood search from the best plan (:mod:`districting.neighbourhood`)
        for at most a share of the time left (most of it on a model so large that one exact
        round cannot finish); every better plan is kept at once."""
        left = run.left()
        share = _LNS_SHARE_BIG if big else _LNS_SHARE
        deadline = None if left is None else time.monotonic() + share * left
        neighbourhood.reoptimise(self.problem, self._graph, run.best, deadline,
                                 on_better=run.consider, cancel=cancel)

    def _fix_and_resolve(self, backend, run: _Run, gap: float, cancel, relaxed: bool,
                         passable: np.ndarray | None, max_rounds: int = 60) -> None:
        """Heuristic: a valid plan from MIP answers on a restricted copy of the model.

        The model is restricted (temporary column bounds, undone at the end) to the pairs
        whose LP reduced cost is small (plus the pairs the LP or the best plan uses). After
        each answer the empty units are handed out again; every unit still cut from its
        zone's root loses that pair (its column is turned off) and the separator cuts of
        the answer are added (they are valid for the exact model too), then the MIP is
        solved again, warm-started. Each round removes pairs, so the loop ends; when the
        restriction makes the MIP infeasible the reduced-cost threshold widens, and at the
        widest the last batch of removals is halved (the units farthest from their site
        stay removed). Any contiguous answer is checked and becomes a candidate plan.
        """
        problem, graph = self.problem, self._graph
        lp = backend.relaxation()
        if lp is None:
            return
        z, xv, rc = lp
        k = len(xv)
        scale = max(abs(z), 1.0)
        levels = (2e-4, 2e-3, 2e-2, np.inf)
        level = 0
        must = (xv > 1e-6)
        if run.best is not None:
            c = backend.column(np.arange(problem.n_units), run.best)
            must[c[c >= 0]] = True
        tree_off = None
        if graph is not None and problem.roots is not None:
            if backend._tree is None:
                self._parents = cg.site_trees(problem, graph)
                backend.tree_rows(self._parents)
            parents = self._parents
            tree_off = np.zeros(k, bool)
            tree_off[backend._tree_off] = True
        backend.trees(tree_off is not None)
        forbid = np.zeros(k, bool)
        batch = np.zeros(0, np.int64)
        # without contiguity one answer ends the heuristic: a loose gap gets it quickly,
        # and the exact rounds prove the rest from it
        hgap = max(gap, 2e-3 if graph is not None else 1e-2)
        wc = problem.weighted_cost
        for _ in range(max_rounds):
            if cancel is not None and cancel():
                break
            left = run.left()
            if left is not None and left <= 0:
                break
            keep = must | (rc <= levels[level] * scale)
            off = ~keep | forbid
            if tree_off is not None:
                off |= tree_off & ~must
            backend.restrict(np.flatnonzero(off))
            cap_s = None if left is None else max(0.05, 0.3 * left)
            ans = backend.solve(hgap, cap_s, run.best, cancel)
            if ans.assignment is None:
                if ans.status not in ("infeasible", "time_limit"):
                    break  # cancelled or an error: the exact side reports it
                if ans.status == "time_limit" and tree_off is None:
                    break  # the exact rounds get the time that is left
                if level < len(levels) - 1:
                    level += 1
                elif tree_off is not None:
                    tree_off, level = None, 0  # zones need not follow the trees
                    backend.trees(False)
                elif len(batch) > 1:
                    forbid[batch] = False
                    far = np.argsort(-wc[backend.xi[batch], backend.xj[batch]], kind="stable")
                    batch = batch[far[: len(batch) // 2]]
                    forbid[batch] = True
                else:
                    break
                continue
            a = ans.assignment
            if graph is None:
                run.consider(a)
                break
            a = _claim_tree_paths(a, backend.drop, parents) if tree_off is not None else a
            b, detached = cg.reassign_empty(problem, graph, a)
            if not detached.any():
                if run.consider(b):
                    run.consider(cg.improve(problem, graph, b))
                break
            fixed = cg.repair(problem, graph, a)
            if fixed is not None and run.consider(fixed):
                run.consider(cg.improve(problem, graph, run.best))
                break
            n_frag = len(cg.fragments(problem, graph, a))
            added, batch = self._cut_and_forbid(backend, a, detached, passable, relaxed, forbid)
            run.record(added, n_frag, heuristic=True)
            if not len(batch) and not added:
                break
        backend.trees(False)
        backend.unrestrict()
        if graph is not None and run.best is not None:
            self._polish(backend, run, min(gap, 1e-4), cancel, relaxed, passable)

    def _polish(self, backend, run: _Run, hgap: float, cancel, relaxed: bool,
                passable: np.ndarray | None, max_rounds: int = 40) -> None:
        """Improve the best plan by MIPs over its neighbourhood (heuristic).

        Columns are restricted to each unit's own zone and the zones of its neighbours in
        the best plan; units left cut off lose that pair and the MIP is solved again
        (fix-and-resolve); each better contiguous plan recentres the neighbourhood.
        """
        problem, graph = self.problem, self._graph
        n = problem.n_units
        k = len(backend.xi)
        forbid = np.zeros(k, bool)
        centre = seen = None
        for _ in range(max_rounds):
            if cancel is not None and cancel():
                break
            left = run.left()
            if left is not None and left <= 0.5:
                break
            if centre is None or not np.array_equal(centre, run.best):
                centre = run.best.copy()
                forbid[:] = False
                nb = np.zeros(k, bool)
                c = backend.column(np.arange(n), centre)
                nb[c[c >= 0]] = True
                c = backend.column(graph.u, centre[graph.v])
                nb[c[c >= 0]] = True
            backend.restrict(np.flatnonzero(~nb | forbid))
            cap_s = None if left is None else max(0.05, 0.3 * left)
            before = run.best_obj
            ans = backend.solve(hgap, cap_s, run.best, cancel)
            if ans.assignment is None and ans.status == "infeasible" and forbid.any():
                forbid[:] = False  # the removals went too far; the cuts found stay
                continue
            if (ans.assignment is None or ans.objective >= before - _TOL * max(1.0, before)
                    or (seen is not None and np.array_equal(ans.assignment, seen))):
                break  # no better answer, or the same one again (its cuts cannot bite)
            a = seen = ans.assignment
            b, detached = cg.reassign_empty(problem, graph, a)
            if not detached.any():
                if run.consider(b):
                    run.consider(cg.improve(problem, graph, run.best))
                    continue
                break
            fixed = cg.repair(problem, graph, a)
            if fixed is not None:
                run.consider(cg.improve(problem, graph, fixed))
            if run.consider(localsearch.make_valid(problem, graph, a)):
                continue  # a better plan: recentre on it
            added, cols = self._cut_and_forbid(backend, a, detached, passable, relaxed, forbid)
            run.record(added, len(cg.fragments(problem, graph, a)), heuristic=True)
            if not len(cols):
                break
        backend.unrestrict()

    def _cut_and_forbid(self, backend, a: np.ndarray, detached: np.ndarray, passable,
                        relaxed: bool, forbid: np.ndarray) -> tuple[int, np.ndarray]:
        """Heuristic step: add the answer's separator cuts (valid for the exact model too)
        and mark the columns of units still cut off; returns (cuts added, newly forbidden)."""
        cuts = cg.separator_cuts(self.problem, self._graph, a, only=detached,
                                 passable=passable, strict=relaxed)
        added = backend.add_cuts(cuts)
        self.cuts.extend(cuts)
        units = np.flatnonzero(detached)
        cols = backend.column(units, a[units])
        batch = cols[(cols >= 0) & ~forbid[np.maximum(cols, 0)]]
        forbid[batch] = True
        return added, batch

    def _finish(self, plan: Plan) -> Plan:
        self.last, self._solved = plan, self.problem
        return plan


def _claim_tree_paths(a: np.ndarray, drop: np.ndarray, parents: np.ndarray) -> np.ndarray:
    """Units left out of the MIP (``drop``) on the tree path from a zone's units to its root
    join that zone (when one zone alone claims them), so tree-shaped zones stay connected."""
    a = np.asarray(a, np.int64).copy()
    m = parents.shape[0]
    claims = np.zeros(len(a), np.int64)
    owner = np.full(len(a), -1, np.int64)
    for j in range(m):
        par = parents[j]
        cur = np.flatnonzero((a == j) & ~drop)
        need = np.zeros(len(a), bool)
        while len(cur):
            q = par[cur]
            q = q[(q >= 0)]
            q = q[drop[q] & ~need[q]]
            need[q] = True
            cur = q
        claims += need
        owner[need] = j
    one = drop & (claims == 1)
    a[one] = owner[one]
    return a


def _precheck(problem: Problem) -> list[str]:
    try:
        from . import diagnose
    except ImportError:  # written alongside the engine; the solve itself still proves
        return []
    return list(diagnose.precheck(problem))


def _explain(problem: Problem) -> str:
    try:
        from . import diagnose
    except ImportError:
        return "no plan meets every constraint (the solver proved it infeasible)"
    return diagnose.explain(problem)


def _infeasible(problem: Problem, message: str, route: str, rounds: int = 0,
                history: Sequence[Round] = (), build: float = 0.0, seconds: float = 0.0) -> Plan:
    return Plan("infeasible", np.inf, np.inf, np.inf, np.full(problem.n_units, -1, np.int64),
                np.zeros(problem.n_sites, bool), message=message, rounds=rounds,
                build_seconds=build, solve_seconds=seconds, history=tuple(history), route=route)


def _failed(problem: Problem, message: str, route: str) -> Plan:
    """No plan because the solver could not run or stopped with an error (not a proof)."""
    return Plan("infeasible", np.inf, -np.inf, np.inf, np.full(problem.n_units, -1, np.int64),
                np.zeros(problem.n_sites, bool), message=message, route=route)


def solve(
    problem: Problem,
    gap: float = 1e-4,
    time_limit: float | None = None,
    *,
    solver: str = "highs",
    progress: Callable[[Round], None] | None = None,
    cancel: Callable[[], bool] | None = None,
    start=None,
    max_rounds: int = 200,
) -> Plan:
    """Solve ``problem`` to within ``gap`` (relative) or until ``time_limit`` seconds.

    Returns a :class:`~districting.plan.Plan`: the best valid plan with its proven bound,
    or an infeasible plan whose ``message`` says why in words. ``start`` is an assignment
    (site index per unit) reused as a warm start after repair. See :class:`Session` for
    re-solves that keep the model and the cuts.
    """
    return Session(problem, solver=solver or "highs").solve(
        gap, time_limit, progress=progress, cancel=cancel, start=start, max_rounds=max_rounds)
