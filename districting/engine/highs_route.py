"""The HiGHS array route: the formulation passed to highspy as arrays, cuts added as rows.

Only allowed unit-site pairs become columns (:mod:`districting.engine.formulation`). Besides
solving, the route gives the LP relaxation (bound, point, reduced costs), root cutting
planes, reduced-cost fixing, and temporary column and row restrictions for the heuristics
(:mod:`districting.engine.heuristics`).
"""

from __future__ import annotations

import time
from collections.abc import Callable, Sequence
from contextlib import contextmanager

import numpy as np

from ..problem import Problem
from . import tuning
from .answer import (
    Answer,
    highs_assignment,
    highs_status,
    quiet_highs,
    set_interrupt,
    set_lp_time_limit,
    set_start,
)
from .connectivity import Cut, UnitGraph, tree_links
from .cuts import fractional_cuts
from .fixing import fixable
from .formulation import formulate, separator_rows
from .tuning import PROBE_LIMIT, ROOT_KEEP_SHARE, ROOT_MIN_GAIN, ROOT_ROUNDS

__all__ = ["HighsRoute"]


class HighsRoute:
    """The MIP built from arrays in one highspy model; cuts are added as rows."""

    name = "highs"

    def __init__(self, problem: Problem, drop: np.ndarray | None = None,
                 threads: int | None = None) -> None:
        """``drop`` marks units left out of the MIP (free empty units handed out after)."""
        import highspy

        self._hs = highspy
        self.problem = problem
        f = formulate(problem, drop)
        self.formulation = f
        self.drop = f.drop
        self.xi, self.xj, self.colmap, self.ycol = f.xi, f.xj, f.colmap, f.ycol
        self.infeasible_reason = f.infeasible_reason
        ncol, cost, lower, upper = f.ncol, f.cost, f.lower, f.upper
        a, row_lower, row_upper = f.matrix()
        f.blocks = []  # passed to HiGHS; the columns stay for the cut rows
        nrow = a.shape[0]
        lp = highspy.HighsLp()
        lp.num_col_ = ncol
        lp.num_row_ = nrow
        lp.col_cost_ = cost
        lp.col_lower_ = lower
        lp.col_upper_ = upper
        lp.row_lower_ = row_lower
        lp.row_upper_ = row_upper
        lp.a_matrix_.format_ = highspy.MatrixFormat.kColwise
        lp.a_matrix_.start_ = a.indptr.astype(np.int32)
        lp.a_matrix_.index_ = a.indices.astype(np.int32)
        lp.a_matrix_.value_ = a.data
        lp.integrality_ = [highspy.HighsVarType.kInteger] * ncol
        self.ncol = ncol
        self._cost = cost
        self.lower0 = lower  # permanent lower bounds (a site opened by fixing gets 1)
        self.upper = upper.copy()  # permanent bounds (reduced-cost fixing lowers them)
        self._temp: np.ndarray | None = None  # columns a heuristic turned off for a while
        self._lp: tuple[float, np.ndarray, np.ndarray] | None = None
        self._lp_tried = False
        self._cut_lp: tuple[float, np.ndarray, np.ndarray] | None = None  # after strengthen
        # (values, reduced costs) of the candidate sites' y columns in _lp and in _cut_lp
        self._lp_sites: tuple[np.ndarray, np.ndarray] | None = None
        self._cut_sites: tuple[np.ndarray, np.ndarray] | None = None
        self._last_sites: tuple[np.ndarray, np.ndarray] | None = None
        self._last_duals: np.ndarray | None = None  # of the assignment rows, last LP
        self._tree: np.ndarray | None = None  # rows of the heuristic's site trees
        self._tree_off = np.zeros(0, np.int64)
        h = quiet_highs()
        h.setOptionValue("threads", int(threads or tuning.HIGHS_THREADS))
        h.setOptionValue("presolve", "on")
        if ncol > PROBE_LIMIT or problem.group_band > 0:  # see tuning.PROBE_LIMIT
            h.setOptionValue("presolve_rule_off", 32768)
        h.passModel(lp)
        self.h = h
        self._cancel: Callable[[], bool] | None = None
        self._deadline = float("inf")
        self._target = float("inf")  # a round ends once its bound reaches this (proven)
        self._proven = False
        h.cbMipInterrupt.subscribe(self._interrupt)
        self.fixed = 0

    def _interrupt(self, e) -> None:
        if np.isfinite(self._target) and e.data_out.mip_dual_bound >= self._target:
            self._proven = True
        set_interrupt(e, self._proven or (self._cancel is not None and self._cancel())
                      or time.monotonic() > self._deadline)

    # --------------------------------------------------------------- interface
    def vector(self, assignment: np.ndarray) -> np.ndarray:
        """Column values of a plan (x, y and the feeder columns z)."""
        return self.formulation.vector(assignment)

    def add_cuts(self, cuts: Sequence[Cut]) -> int:
        """Add the rows of ``cuts`` (:func:`~districting.engine.formulation.separator_rows`);
        returns the number of rows added."""
        block = separator_rows(self.formulation, cuts)
        k = block.n_rows
        if not k:
            return 0
        starts = np.searchsorted(block.row, np.arange(k)).astype(np.int32)
        self.h.addRows(k, block.lo, block.hi, len(block.col), starts,
                       block.col.astype(np.int32), block.coef)
        return k

    def solve(self, gap: float, time_left: float | None, start: np.ndarray | None,
              cancel: Callable[[], bool] | None, prove_start: bool = False) -> Answer:
        """One MIP solve from ``start``. With ``prove_start`` (the exact rounds) the solve
        ends as soon as its bound proves ``start`` within ``gap``, and otherwise goes on to
        the finer gap ``gap * tuning.ROUND_GAP_SHARE`` against its own best answer."""
        h = self.h
        if self.infeasible_reason:
            return Answer("infeasible", None, np.inf, np.inf, self.infeasible_reason)
        tl = np.inf if time_left is None else max(float(time_left), 0.01)
        h.setOptionValue("time_limit", float(tl))
        self._cancel = cancel
        self._deadline = time.monotonic() + tl + 0.5
        self._target, self._proven = float("inf"), False
        h.setOptionValue("mip_rel_gap", float(gap))
        if start is not None:
            x0 = self.vector(start)
            set_start(h, x0)
            # the plan in hand is proven once the bound reaches its cost less the gap; the
            # MIP's own gap (to its cheapest answer, maybe a disconnected one) goes finer
            if prove_start:
                held = float(np.dot(self._cost, x0))
                self._target = held - float(gap) * abs(held)
                h.setOptionValue("mip_rel_gap", float(gap) * tuning.ROUND_GAP_SHARE)
        # the MIP's presolve is slow in the rows (SJC4a: 162,410 rows, 11.5 s at a 10 s
        # limit); on a town of 10,374 rows it is quick and without it HiGHS's set-up took
        # longer (5.9 s at 350,850 columns before its first clock check). A restricted
        # model (most columns held at 0) presolves fast: on SJC4b one given 0.98 s took
        # 1.05 s with presolve, 1.66 s without.
        per_row = tuning.MIP_PRESOLVE_PER_ROW if self._temp is None else 0.0
        with self._presolve_for(tl, h.getNumRow(), per_row):
            h.run()
        info = h.getInfo()
        if info.primal_solution_status == 2:
            got = float(np.dot(self._cost, np.asarray(h.getSolution().col_value)))
            want = float(info.objective_function_value)
            if abs(got - want) > 1e-7 * max(1.0, abs(want)):
                # seen after rows were added: HiGHS reported a stale objective with the
                # start as its solution; solving again from scratch gives a true answer
                h.clearSolver()
                h.run()
                info = h.getInfo()
        a = highs_assignment(h, self.xi, self.xj, self.problem.n_units)
        if a is not None and (a[~self.drop] < 0).any():
            a = None
        has = a is not None
        st = h.getModelStatus()
        status = highs_status(h)
        if status == "cancelled" and self._proven:
            status = "optimal"  # the bound proved the plan in hand within the gap asked
        elif status == "cancelled" and (cancel is None or not cancel()):
            status = "time_limit"  # the deadline guard fired, not the user
        bound = float(info.mip_dual_bound)
        obj = float(info.objective_function_value) if has else np.inf
        if status == "optimal" and not has:
            status = "error"
        if status == "infeasible":
            bound = np.inf
        msg = "" if status != "error" else f"HiGHS stopped: {h.modelStatusToString(st)}"
        return Answer(status, a, obj, bound if np.isfinite(bound) else -np.inf, msg)

    def relaxation(self, time_limit: float | None = None) -> tuple[float, np.ndarray,
                                                                   np.ndarray] | None:
        """The LP relaxation of the model as built (no integrality): (z_LP, x, rc).

        Solved once and kept: rows added later (cuts) only cut the LP's feasible set, so
        z_LP stays a lower bound and the reduced-cost test below stays valid. The first
        call may set a ``time_limit``; an LP that does not finish in it is not tried again
        (the stages that need it are skipped, the integer rounds do not need it).
        """
        if self._lp is not None or self._lp_tried or self.infeasible_reason:
            return self._lp
        self._lp_tried = True
        with self._continuous():
            self._lp = self._run_lp(np.inf if time_limit is None else max(time_limit, 0.1))
            self._lp_sites = self._last_sites if self._lp is not None else None
        return self._lp

    def adopt_relaxation(self, bound: float, value: np.ndarray, floor: np.ndarray,
                         unit_duals: np.ndarray, site_rc: np.ndarray | None = None) -> None:
        """Take the LP relaxation from outside instead of solving it here: the optimum of a
        model this one restricts (``bound``), its point and each pair's floor ``bound +
        rc`` as (n, m) arrays (:func:`districting.engine.pair_screen.screen_pairs`), and
        the candidate sites' reduced costs (m,) at the same multipliers.

        Valid for this model when it keeps every pair with a floor at or below the cost of
        the plans sought: the bound and the reduced-cost test then hold for them. A site's
        reduced cost counts its y at 1 when negative (the side the bound took), so the
        site test of :meth:`fix_by_reduced_cost` reads it as an LP value of 1."""
        rc = np.maximum(floor[self.xi, self.xj] - bound, 0.0)
        self._lp = (float(bound), value[self.xi, self.xj].copy(), rc)
        self._lp_tried = True
        self._last_duals = np.asarray(unit_duals, float).copy()
        if site_rc is not None:
            src = np.asarray(site_rc, float)[self.ycol >= 0]
            self._lp_sites = ((src < 0).astype(float), src)

    @contextmanager
    def _presolve_for(self, time_limit: float, size: int, seconds_per: float = 0.0):
        """HiGHS's presolve off inside the block when the run is time-limited and ``size``
        (the model's columns or rows) is above ``tuning.LP_PRESOLVE_LIMIT``, or when
        ``size * seconds_per`` (the presolve's expected seconds) is above the limit.
        Presolve checks the clock rarely: on Lorena & Senne's SJC4a (162,006 columns,
        162,410 rows) the LP's ran 90-277 s against limits of 3-20 s, and the MIP's 11.5 s
        against 10 s (the whole MIP run 25.8 s against 13 s inside a solve), while it
        removed 805 rows. The simplex and the tree check the clock often."""
        quick = np.isfinite(time_limit) and (
            size > tuning.LP_PRESOLVE_LIMIT or size * seconds_per > time_limit)
        if quick:
            self.h.setOptionValue("presolve", "off")
        try:
            yield
        finally:
            if quick:
                self.h.setOptionValue("presolve", "on")

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
        set_lp_time_limit(h, time_limit)
        with self._presolve_for(time_limit, self.ncol):
            h.run()
        if h.getModelStatus() != hs.HighsModelStatus.kOptimal:
            return None
        sol = h.getSolution()
        k = len(self.xi)
        # the assignment rows come first (formulate): their duals are the multipliers of
        # the Lagrangian zone bound (districting.engine.zone_bound)
        self._last_duals = np.asarray(sol.row_dual)[: self.problem.n_units].copy()
        y = self.ycol[self.ycol >= 0]
        self._last_sites = (np.asarray(sol.col_value)[y], np.asarray(sol.col_dual)[y])
        return (float(h.getInfo().objective_function_value),
                np.asarray(sol.col_value)[:k].copy(), np.asarray(sol.col_dual)[:k].copy())

    def unit_duals(self) -> np.ndarray | None:
        """(n,) duals of the assignment rows in the last LP solved (after :meth:`strengthen`
        the LP with the root cuts), or None before any LP."""
        return self._last_duals

    def strongest(self) -> tuple[float, np.ndarray, np.ndarray] | None:
        """The LP with the root cutting planes when :meth:`strengthen` ran, else the plain
        one: the best lower bound (z_LP, x, rc) for the bound and reduced-cost fixing."""
        return self._cut_lp if self._cut_lp is not None else self.relaxation()

    def strengthen(self, graph: UnitGraph, passable: np.ndarray | None, deadline: float,
                   ub: float = np.inf, max_rounds: int = ROOT_ROUNDS,
                   min_gain: float = ROOT_MIN_GAIN,
                   keep_share: float = ROOT_KEEP_SHARE) -> list[Cut]:
        """Root cutting planes: separator cuts violated by the LP point, in rounds.

        Solves the LP relaxation with every row so far, adds the separator cuts its point
        violates (:func:`districting.engine.cuts.fractional_cuts`) and solves again (the
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
        found: list[Cut] = []
        z, xv = lp[0], lp[1]
        first_row = h.getNumRow()
        stalls = 0
        with self._continuous():
            for _ in range(max_rounds):
                if time.monotonic() >= deadline:
                    break
                point = np.zeros((n, m))
                point[self.xi, self.xj] = xv
                cuts = fractional_cuts(self.problem, graph, point, passable)
                if not cuts or not self.add_cuts(cuts):
                    break
                found.extend(cuts)
                answer = self._run_lp(max(deadline - time.monotonic(), 0.01))
                if answer is None:
                    break
                self._cut_lp, self._cut_sites = answer, self._last_sites
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
        """Reduced-cost fixing (:mod:`districting.engine.fixing`) against a valid plan of
        cost ``ub``, by the strongest LP; returns columns fixed. Pairs the LP leaves at 0
        are fixed to 0; candidate sites are closed or opened. Redone (with the same LP)
        whenever a better plan lowers ``ub``; a fixed column stays fixed."""
        lp = self.strongest()
        if lp is None or not np.isfinite(ub):
            return 0
        z, xv, rc = lp
        k = len(self.xi)
        off, _ = fixable(z, xv, rc, ub, (self.lower0[:k] < 0.5) & (self.upper[:k] > 0.5))
        drop = np.flatnonzero(off)
        if len(drop):
            self.upper[drop] = 0.0
            if self._temp is None or not len(self._temp):
                self.h.changeColsBounds(len(drop), drop.astype(np.int32), self.lower0[drop],
                                        self.upper[drop])
            else:
                self._temp = np.union1d(self._temp, drop)
                self._apply(self._temp, np.zeros(len(self._temp)))
        sites = self._cut_sites if self._cut_lp is not None else self._lp_sites
        n_sites = 0
        if sites is not None:
            y = self.ycol[self.ycol >= 0]
            close, open_ = fixable(z, sites[0], sites[1], ub,
                                   (self.lower0[y] < 0.5) & (self.upper[y] > 0.5))
            self.upper[y[close]] = 0.0
            self.lower0[y[open_]] = 1.0
            ys = y[close | open_]
            n_sites = len(ys)
            if n_sites:
                self._apply(ys, self.upper[ys])
        self.fixed += len(drop) + n_sites
        return len(drop) + n_sites

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
        tree, :func:`districting.engine.connectivity.site_trees`), inactive until
        :meth:`trees` turns them on. Returns the pair columns a tree-shaped zone cannot use
        (ancestor without a column, unit not reached). Heuristic only: a tree restricts the plans.
        """
        k = len(self.xi)
        rows, qc, off = tree_links(self.problem, parent, self.xi, self.xj, self.colmap,
                                   self.drop)
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

    @property
    def has_trees(self) -> bool:
        """True once :meth:`tree_rows` added the rows of the site trees."""
        return self._tree is not None

    @property
    def tree_off(self) -> np.ndarray:
        """The pair columns a tree-shaped zone cannot use (from :meth:`tree_rows`)."""
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
