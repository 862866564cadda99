"""The SCIP route: one branch-and-cut tree in which contiguity is a constraint handler.

The HiGHS route (:mod:`~districting.engine.highs_route`) re-solves the MIP after each batch
of separator cuts, because HiGHS's Python callback cannot add rows. Here the model is built
once in SCIP (through PySCIPOpt) from :func:`~districting.engine.formulation.formulate` --
the same columns and row families, no row of its own -- and connectivity is enforced inside
the tree by a constraint handler (Achterberg, "SCIP: solving constraint integer programs",
Mathematical Programming Computation 1(1), 2009, 1-41, on constraint handlers):

- ``conscheck`` rejects any candidate plan whose zones are not connected to their roots;
- ``consenfolp`` / ``consenfops`` (called on integral points only: negative priority) add
  the separator cuts a disconnected point violates, at whatever node it arises -- lazily,
  in the one tree. The same point made valid by the engine's repair
  (:func:`~districting.engine.repair.make_valid`) is offered to SCIP as a plan;
- ``conssepalp`` separates fractional separator cuts from LP points by max-flow
  (:func:`~districting.engine.cuts.fractional_cuts`), at the root and every
  ``sepa_freq`` levels of depth.

The cuts are the rooted separator inequalities x[i, j] <= sum_{s in S} x[s, j] for every
vertex set S separating unit i from site j's root (Oehrlein & Haunert, Journal of Spatial
Information Science 15, 2017; minimal a-b separators: Validi, Buchanan & Lykhovyd,
"Imposing contiguity constraints in political districting models", Operations Research
70(2), 2022, 867-892), written as rows by
:func:`~districting.engine.formulation.separator_rows`, as the HiGHS route writes them.

The handler does not lock variables, so SCIP's dual reductions are turned off (they could
fix a column the connectivity rows need). Every plan returned passes
:func:`~districting.engine.connectivity.plan_checks` (through :class:`~districting.engine.run.Run`).
"""

from __future__ import annotations

import time
from collections.abc import Callable

import numpy as np
import scipy.sparse as sp

from ..plan import Plan, Round
from ..problem import Problem
from .connectivity import Cut, UnitGraph, fragments, free_units
from .cuts import fractional_cuts, separator_cuts
from .findings import no_plan_text
from .formulation import Formulation, RowBlock, formulate, separator_rows
from .greedy import median_start
from .heuristics import constructive, prepare_start
from .precheck import precheck
from .repair import make_valid
from .run import Run, failed_plan, infeasible_plan, objective
from .tuning import START_MAX, START_SHARE

__all__ = ["solve_scip", "ROUTE"]

#: The solver name that picks this route (``Session(problem, solver=ROUTE)``), and its
#: name on a plan.
ROUTE = "scip-tree"

#: SCIP's words for how a solve ended -> the engine's statuses.
_STATUS = {"optimal": "optimal", "gaplimit": "optimal", "timelimit": "time_limit",
           "infeasible": "infeasible", "userinterrupt": "cancelled"}
#: share of the time spent so far that repairing integral points may take.
_REPAIR_SHARE = 0.3


def _add_rows(model, terms: list, block: RowBlock) -> int:
    """Each row of ``block`` as a linear constraint of ``model``; ``terms``: one PySCIPOpt
    ``Term`` per column, made once per model (making them per row took most of the time)."""
    from pyscipopt.scip import Expr

    if not block.n_rows:
        return 0
    # one row per CSR row, repeated columns of a row summed
    a = sp.csr_matrix((block.coef, (block.row, block.col)), shape=(block.n_rows, len(terms)))
    a.sum_duplicates()
    ptr, cols, vals = a.indptr, a.indices.tolist(), a.data.tolist()
    for r in range(block.n_rows):
        lo_r, hi_r = ptr[r], ptr[r + 1]
        expr = Expr(dict(zip([terms[c] for c in cols[lo_r:hi_r]], vals[lo_r:hi_r],
                             strict=True)))
        lo, hi = float(block.lo[r]), float(block.hi[r])
        if lo == hi:
            model.addCons(expr == hi)
            continue
        if np.isfinite(hi):
            model.addCons(expr <= hi)
        if np.isfinite(lo):
            model.addCons(expr >= lo)
    return block.n_rows


def _model(f: Formulation):
    """A quiet SCIP model of the formulation: binary columns, every row family."""
    from pyscipopt import Model
    from pyscipopt.scip import Term

    model = Model("districting")
    model.hideOutput()
    xs = [model.addVar(vtype="B", lb=float(lo), ub=float(hi), obj=float(c))
          for lo, hi, c in zip(f.lower.tolist(), f.upper.tolist(), f.cost.tolist(),
                               strict=True)]
    terms = [Term(x) for x in xs]
    for block in f.blocks:
        _add_rows(model, terms, block)
    return model, xs, terms


def _give(model, sol, xs: list, values: np.ndarray, submit) -> None:
    """Set every column of ``sol`` to ``values`` and hand it to SCIP with ``submit``."""
    for v, val in zip(xs, values.tolist(), strict=True):
        model.setSolVal(sol, v, val)
    submit(sol)


def _first_plan(problem: Problem, graph: UnitGraph | None,
                time_limit: float | None) -> np.ndarray | None:
    """The engine's first plan, as the session makes it: today's zones (or the nearest
    schools) made valid with contiguity; greedy medians and local search without it."""
    if graph is not None:
        return prepare_start(problem, graph, constructive(problem))
    seconds = START_MAX if time_limit is None else min(START_MAX, START_SHARE * time_limit)
    return median_start(problem, None, seconds)


def _handler_class():
    """The connectivity constraint handler (a class made once PySCIPOpt is imported)."""
    from pyscipopt import SCIP_RESULT, Conshdlr

    class Contiguity(Conshdlr):
        """Zones connected to their roots: checked, enforced by lazy separator cuts."""

        def __init__(self, f: Formulation, graph: UnitGraph, xs: list, terms: list,
                     run: Run, sepa_freq: int, repair: bool,
                     cancel: Callable[[], bool] | None, found: list[Cut]) -> None:
            self.f, self.graph, self.xs, self.run, self.cancel = f, graph, xs, run, cancel
            self.terms = terms
            self.found = found  # every cut added, kept by the caller for the next solve
            self.passable = free_units(f.problem)
            self.sepa_freq, self.repair = sepa_freq, repair
            self.seen: set[tuple] = set()
            self.added = 0
            self.repair_seconds = 0.0

        def _values(self, sol) -> np.ndarray:
            get = self.model.getSolVal
            return np.array([get(sol, v) for v in self.xs[: self.f.n_pairs]])

        def _assignment(self, sol) -> np.ndarray:
            f = self.f
            on = self._values(sol) > 0.5
            a = np.full(f.problem.n_units, -1, np.int64)
            a[f.xi[on]] = f.xj[on]
            return a

        def _add(self, cuts: list[Cut], remember: bool = True) -> int:
            """The rows of ``cuts`` not written yet (``remember``: the cuts go to the
            caller's list too); returns rows added."""
            block = separator_rows(self.f, cuts)
            fresh = []
            starts = np.searchsorted(block.row, np.arange(block.n_rows + 1))  # rows in order
            cols = block.col.tolist()
            for r in range(block.n_rows):
                key = (tuple(cols[starts[r]:starts[r + 1]]), float(block.hi[r]))
                if key not in self.seen:
                    self.seen.add(key)
                    fresh.append(r)
            if not fresh:
                return 0
            if remember:
                self.found.extend(cuts)
            keep = np.isin(block.row, fresh)
            remap = np.full(block.n_rows, -1, np.int64)
            remap[fresh] = np.arange(len(fresh))
            sub = RowBlock(block.family, remap[block.row[keep]], block.col[keep],
                           block.coef[keep], block.lo[fresh], block.hi[fresh])
            self.added += _add_rows(self.model, self.terms, sub)
            return len(fresh)

        def _offer(self, a: np.ndarray) -> None:
            """A disconnected point made valid by the engine's repair, offered as a plan."""
            started = time.monotonic()
            if self.repair_seconds > _REPAIR_SHARE * max(self.run.elapsed(), 1.0):
                return
            try:
                b = make_valid(self.f.problem, self.graph, a)
                if b is not None and self.run.consider(b):
                    _give(self.model, self.model.createOrigSol(), self.xs, self.f.vector(b),
                          self.model.trySol)
            except Exception:  # noqa: BLE001 -- a refused offer must not stop the tree
                pass
            finally:
                self.repair_seconds += time.monotonic() - started

        def _stop(self) -> None:
            if self.cancel is not None and self.cancel():
                self.model.interruptSolve()

        def _enforce(self, sol) -> dict:
            self._stop()
            a = self._assignment(sol)
            if (a < 0).any() or not fragments(self.f.problem, self.graph, a):
                return {"result": SCIP_RESULT.FEASIBLE}
            cuts = separator_cuts(self.f.problem, self.graph, a, passable=self.passable)
            added = self._add(cuts)
            if self.repair and objective(self.f.problem, a) < self.run.best_obj:
                self._offer(a)
            return {"result": SCIP_RESULT.CONSADDED if added else SCIP_RESULT.INFEASIBLE}

        def conscheck(self, constraints, solution, checkintegrality, checklprows,
                      printreason, completely):
            self._stop()
            a = self._assignment(solution)
            ok = not (a < 0).any() and not fragments(self.f.problem, self.graph, a)
            if ok:
                self.run.consider(a)  # checked in full there; progress sees a better plan
            return {"result": SCIP_RESULT.FEASIBLE if ok else SCIP_RESULT.INFEASIBLE}

        def consenfolp(self, constraints, nusefulconss, solinfeasible):
            return self._enforce(None)

        def consenfops(self, constraints, nusefulconss, solinfeasible, objinfeasible):
            return self._enforce(None)

        def conssepalp(self, constraints, nusefulconss):
            depth = self.model.getDepth()
            if self.sepa_freq < 0 or (depth > 0 and (self.sepa_freq == 0
                                                     or depth % self.sepa_freq)):
                return {"result": SCIP_RESULT.DIDNOTRUN}
            p, f = self.f.problem, self.f
            point = np.zeros((p.n_units, p.n_sites))
            point[f.xi, f.xj] = self._values(None)
            cuts = fractional_cuts(p, self.graph, point, self.passable)
            added = self._add(cuts)
            return {"result": SCIP_RESULT.CONSADDED if added else SCIP_RESULT.DIDNOTFIND}

        def conslock(self, constraint, locktype, nlockspos, nlocksneg):
            pass  # no constraints of its own; dual reductions are off instead

    return Contiguity


def solve_scip(problem: Problem, graph: UnitGraph | None = None,
               time_limit: float | None = None, gap: float = 1e-4, *,
               start: np.ndarray | None = None, warm: bool = True, sepa_freq: int = 0,
               repair: bool = True, progress: Callable[[Round], None] | None = None,
               cancel: Callable[[], bool] | None = None, cuts: list[Cut] | None = None) -> Plan:
    """Solve ``problem`` in one SCIP branch-and-cut tree; the same :class:`Plan` as the engine.

    ``start``: a plan to warm-start from (repaired first); with ``warm`` and no usable
    ``start``, the engine's first plan (:func:`_first_plan`).
    ``sepa_freq``: fractional separator cuts at the root and at every ``sepa_freq``-th depth
    (0: root only, -1: never). ``repair``: disconnected integral points are made valid by
    the engine's repair and offered as plans. ``progress`` receives each better valid plan
    seen; ``cancel`` is asked at every check and enforcement and stops the tree. ``cuts``:
    separator cuts from an earlier solve (valid while the unit graph and the roots are the
    same), written as rows at once; the cuts this solve adds are appended to it.
    """
    t0 = time.monotonic()
    reasons = precheck(problem)
    if reasons:
        return infeasible_plan(problem, no_plan_text(reasons, problem.level), ROUTE)
    if graph is None and problem.contiguous:
        graph = UnitGraph.of(problem)
    run = Run(problem, graph, t0, time_limit, progress)
    f = formulate(problem)
    if f.infeasible_reason:
        return infeasible_plan(problem, f.infeasible_reason, ROUTE)
    try:
        model, xs, terms = _model(f)
    except ImportError:
        return failed_plan(problem, "the branch-and-cut route needs PySCIPOpt "
                           "(pip install pyscipopt); the default solver does not", ROUTE)
    handler = None
    if graph is not None:
        found = cuts if cuts is not None else []
        handler = _handler_class()(f, graph, xs, terms, run, sepa_freq, repair, cancel,
                                   found)
        model.includeConshdlr(handler, "contiguity", "zones connected to their roots",
                              sepapriority=0, enfopriority=-1, chckpriority=-1,
                              sepafreq=1, propfreq=-1, eagerfreq=-1, maxprerounds=0,
                              needscons=False)
        model.setParam("misc/allowstrongdualreds", False)
        model.setParam("misc/allowweakdualreds", False)
        handler._add(found, remember=False)  # an earlier solve's cuts: rows from the start
    first = prepare_start(problem, graph, start) if start is not None else None
    if first is None and warm:
        first = _first_plan(problem, graph, time_limit)
    if first is not None and run.consider(first):
        _give(model, model.createSol(), xs, f.vector(run.best), model.addSol)
    run.build = time.monotonic() - t0
    if time_limit is not None:
        model.setParam("limits/time", max(time_limit - run.elapsed(), 0.01))
    model.setParam("limits/gap", float(gap))
    try:
        model.optimize()
    except Exception:  # noqa: BLE001 -- a SCIP error: said in words, the best plan kept
        stopped = "the branch-and-cut solver stopped with an error"
        if run.best is None:
            return failed_plan(problem, stopped, ROUTE)
        return run.plan("feasible", stopped, ROUTE, 0, gap)
    if model.getNSols():
        best = model.getBestSol()
        a = np.full(problem.n_units, -1, np.int64)
        on = np.array([model.getSolVal(best, v) for v in xs[: f.n_pairs]]) > 0.5
        a[f.xi[on]] = f.xj[on]
        run.consider(a)
    status = _STATUS.get(model.getStatus(), "feasible")
    if status == "optimal" and not run.best_obj <= model.getPrimalbound() + 1e-9 * max(
            1.0, abs(run.best_obj)):
        status = "feasible"  # SCIP's best plan failed the engine's checks: the gap decides
    bound = float(model.getDualbound())
    run.bound = np.inf if status == "infeasible" else (bound if not model.isInfinity(abs(bound))
                                                       else -np.inf)
    run.rounds = int(model.getNNodes())
    n_cuts = handler.added if handler is not None else 0
    return run.plan(status, "", ROUTE, n_cuts, gap)
