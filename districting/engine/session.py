"""The solve session: a short pipeline of named stages over one of two solver routes.

Routes: ``solver="highs"`` builds the formulation (:mod:`districting.engine.formulation`)
as arrays for HiGHS (:mod:`~districting.engine.highs_route`); ``solver="scip-tree"`` solves
it in one SCIP branch-and-cut tree instead of the stages below
(:mod:`~districting.engine.scip_route`, opt-in); any other name writes it as a Pyomo model
for that solver (:mod:`~districting.engine.pyomo_route`).

Stages of :meth:`Session.solve`, passing a :class:`~districting.engine.run.SolveState`:

1. ``_start`` -- pre-checks; the start (or today's zones) adapted and repaired is the first
   valid plan; with a bound carried over by :meth:`Session.update` it may already be proven;
   on a large capacitated model with candidate sites the LP is priced from a few pairs per
   unit and core plans are sought (:mod:`~districting.engine.screen_stage`); the model is
   built;
2. ``_lp_bound`` -- the LP relaxation bounds the cost; its own choice per unit, made valid,
   is a candidate plan; root cutting planes lift the bound (HiGHS route); ``_free_restart``
   -- the problem without contiguity solved in a share of the time and its plan made valid
   (a restart from the relaxed optimum, repaired);
3. ``_first_heuristics`` -- on a model above ``LNS_BIG`` columns the large-neighbourhood
   search runs at once; without a valid start, fix-and-resolve gives the first plan;
4. :func:`~districting.engine.rounds.exact_rounds` -- the MIP with the cuts so far,
   warm-started from the best valid plan; each answer is repaired into a plan (an upper
   bound; the MIP bound is a lower bound as every cut is valid) and its violated separator
   cuts are added (Validi, Buchanan & Lykhovyd, Operations Research 70(2), 2022), until
   the gap is within the request. When a plan stays far above the bound on a problem with
   few sites (before the first round or after a repair), or a round stops lifting the
   bound, a second exact route (the SCIP tree, or the flow formulation:
   :mod:`~districting.engine.flow_stage`) is raced once from the best plan.

Columns are removed only with a proof: a pair whose students exceed the site's upper
capacity in some year is never a column, and after a valid plan of cost UB is known,
reduced-cost fixing (:mod:`~districting.engine.fixing`) drops every pair with LP bound +
reduced cost > UB, and closes (or keeps open) every candidate site whose opening (closing)
would cost more than UB.
"""

from __future__ import annotations

import time
from collections.abc import Callable

import numpy as np

from ..plan import Plan, Round
from ..problem import Problem, _same_array
from .connectivity import Cut, UnitGraph, free_units, plan_checks
from .cuts import corridor
from .findings import no_plan_text
from .flow_stage import flow_applies, flow_stage
from .greedy import median_start
from .heuristics import constructive, fix_and_resolve, prepare_start, rounded
from .highs_route import HighsRoute
from .neighbourhood import reoptimise
from .pair_screen import Screen
from .precheck import precheck
from .repair import make_valid
from .rounds import Steps, exact_rounds, model_columns
from .run import Run, SolveState, failed_plan, infeasible_plan
from .screen_stage import screen_applies, screen_stage
from .tuning import (
    FREE_MAX,
    FREE_SHARE,
    LNS_BIG,
    LNS_MIN_SITES,
    LNS_SHARE,
    LNS_SHARE_BIG,
    LP_SHARE,
    PROBE_LIMIT,
    ROOT_MAX,
    ROOT_SHARE,
    START_MAX,
    START_SHARE,
)

__all__ = ["Session", "exact_subsolve", "SCIP_TREE"]

#: The solver name of the SCIP branch-and-cut route (``scip_route.ROUTE``; not imported
#: from there so that PySCIPOpt loads only when the route is asked for).
SCIP_TREE = "scip-tree"


def _make_backend(problem: Problem, solver: str, drop: np.ndarray | None = None):
    if solver == "highs":
        return HighsRoute(problem, drop)
    # Pyomo is imported only on this route (and to explain an infeasibility): the HiGHS
    # route starts faster and holds less memory without it. No cycle: it never imports
    # the session.
    from .pyomo_route import PyomoRoute

    return PyomoRoute(problem, solver)


def _lp_loads(problem: Problem, backend) -> np.ndarray | None:
    """(m,) students per site in the LP relaxation (plan year), or None without an LP."""
    lp = backend.relaxation()
    if lp is None:
        return None
    xv = lp[1]
    return np.bincount(backend.xj, weights=xv * problem.demand[0, backend.xi],
                       minlength=problem.n_sites)


def _start_seconds(run) -> float:
    """Seconds for the start's local search: a tenth of the time left, at most START_MAX."""
    left = run.left()
    return START_MAX if left is None else max(0.0, min(START_MAX, START_SHARE * left))


def exact_subsolve(problem: Problem, gap: float, time_limit: float | None,
                   start: np.ndarray | None, cancel: Callable[[], bool] | None) -> Plan:
    """The exact rounds alone (no heuristics) on a small problem: a neighbourhood's solve
    in the large-neighbourhood search (:func:`districting.engine.neighbourhood.reoptimise`)."""
    session = Session(problem)
    session.heuristics = False
    return session.solve(gap, time_limit, start=start, cancel=cancel)


def core_subsolve(problem: Problem, gap: float, time_limit: float | None,
                  start: np.ndarray | None, cancel: Callable[[], bool] | None) -> Plan:
    """A whole solve of a core (:mod:`~districting.engine.screen_stage`) without a screen
    of its own."""
    session = Session(problem)
    session.screening = False
    return session.solve(gap, time_limit, start=start, cancel=cancel)


class Session:
    """A solver that keeps its built model, cuts and best plan between re-solves.

    ``Session(problem).solve(...)`` solves; ``update(problem2)`` changes the problem (a lock,
    a capacity, a closure): the cuts are kept when the unit graph and the roots are the same
    (a separator cut depends only on them), and the previous plan becomes the warm start.
    """

    def __init__(self, problem: Problem, solver: str = "highs") -> None:
        self.solver = solver
        self.problem = problem
        self.cuts: list[Cut] = []
        self.last: Plan | None = None
        self._backend = None
        # units without students the MIP had to take in (the others stay out of it)
        self._kept: np.ndarray | None = None
        self._graph = UnitGraph.of(problem) if problem.contiguous else None
        self._carried_bound = -np.inf  # a bound proven for a problem this one restricts
        self._solved: Problem | None = None  # the problem self.last was solved for
        # heuristics besides the exact rounds and their repair: LP rounding, the
        # large-neighbourhood search, fix-and-resolve (off inside a neighbourhood's solve)
        self.heuristics = True
        self.screening = True  # the pair screen and its core plans (off inside a core)
        self.build_seconds = 0.0

    def update(self, problem: Problem) -> None:
        """Switch to a changed problem; keeps the cuts when graph and roots are unchanged.

        When the new problem only removes plans (a lock, a forbid, a closure, a lower cap:
        :meth:`Problem.is_restriction_of`), the last plan's proven bound stays a valid
        lower bound and starts the next solve; when its costs changed too (a rerun charged
        against the option on screen), the bound moves by :meth:`Problem.bound_shift`.
        """
        old = self.problem
        last, base = self.last, self._solved
        shift = None
        if last is not None and base is not None and last.feasible and np.isfinite(last.bound):
            shift = problem.bound_shift(base)
        self._carried_bound = -np.inf if shift is None else last.bound + shift
        same_graph = (
            problem.n_units == old.n_units
            and problem.n_sites == old.n_sites
            and _same_array(problem.edges, old.edges)
            and _same_array(problem.roots, old.roots)
        )
        if not same_graph:
            self.cuts = []
            self._graph = UnitGraph.of(problem) if problem.contiguous else None
        self.problem = problem
        self._backend = None
        if not same_graph:
            self._kept = None

    def _ensure_backend(self, drop: np.ndarray | None = None, screen: Screen | None = None,
                        ub: float = np.inf):
        """The model, built once per problem; after a pair ``screen`` it holds only the
        pairs a plan costing at most ``ub`` (a valid plan's cost) may use: its optimum is
        then the full model's."""
        if self._backend is None:
            t0 = time.perf_counter()
            problem = self.problem
            if screen is not None:
                problem = problem.replace(forbidden=problem.forbidden | ~screen.keep(ub))
            self._backend = _make_backend(problem, self.solver, drop)
            if screen is not None:
                self._backend.adopt_relaxation(screen.bound, screen.value, screen.floor,
                                               screen.unit_duals, screen.site_rc)
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

        Runs the stages of the module docstring in turn; a stage may end the solve with a
        plan (proven already, or no model could be built).
        """
        if self.solver == SCIP_TREE:
            return self._finish(self._scip_tree(gap, time_limit, progress, cancel, start))
        st = self._start(gap, time_limit, progress, cancel, start)
        if isinstance(st, Plan):
            return self._finish(st)
        self._lp_bound(st)
        self._free_restart(st)
        self._first_heuristics(st)
        self._race_flow(st)
        steps = Steps(self.solver, self._race_flow, self._bring_in, self._neighbourhoods)
        return self._finish(exact_rounds(st, steps, max_rounds))

    def _scip_tree(self, gap, time_limit, progress, cancel, start) -> Plan:
        """The whole solve in one SCIP tree, warm-started from ``start`` or the last plan,
        with the session's cuts as rows from the start (those it adds are kept for the next
        solve, as on the HiGHS route). PySCIPOpt is imported only on this route."""
        from .scip_route import solve_scip

        if start is None and self.last is not None and self.last.feasible:
            start = self.last.assignment
        return solve_scip(self.problem, self._graph, time_limit, gap, start=start,
                          progress=progress, cancel=cancel, cuts=self.cuts)

    # ------------------------------------------------------------------ stages
    def _start(self, gap, time_limit, progress, cancel, start) -> SolveState | Plan:
        """Stage 1: pre-checks, the first valid plan from the start, the model built."""
        t0 = time.monotonic()
        problem, route = self.problem, self.solver
        if start is None and self.last is not None and self.last.feasible:
            start = self.last.assignment
        reasons = precheck(problem)
        if reasons:
            return infeasible_plan(problem, no_plan_text(reasons, problem.level), route)
        graph = self._graph
        passable = free_units(problem) if graph is not None else None
        dropped = None
        if route == "highs" and passable is not None:
            dropped = passable if self._kept is None else passable & ~self._kept
            dropped = dropped if dropped.any() else None
        run = Run(problem, graph, t0, time_limit, progress)
        run.bound = self._carried_bound
        st = SolveState(problem, graph, passable, dropped, run, gap, cancel, self.cuts,
                        given=start is not None)
        cand = prepare_start(problem, graph, start)
        if cand is not None:
            run.consider(cand)
        if run.best is None and graph is None and self.heuristics:
            # zones without contiguity: a first plan before any model is built
            run.consider(median_start(problem, None, _start_seconds(run)))
        if run.best is None and graph is not None:
            # insurance for the time limit: today's zones (or nearest schools) made valid
            # by local search, when that succeeds; the heuristics below still run
            run.consider(prepare_start(problem, graph, constructive(problem)))
        if run.best is not None and run.gap() <= gap + 1e-12:
            # the adapted start is within the gap of a bound carried from a problem this
            # one restricts (see update): proven without building a model
            return run.plan("optimal", "", route, len(self.cuts), gap)
        try:
            screen = None
            if route == "highs" and self.screening and screen_applies(problem, run):
                screen = screen_stage(st, st.dropped, core_subsolve)
            st.backend = self._ensure_backend(st.dropped, screen, run.best_obj)
        except (ImportError, RuntimeError, ValueError) as exc:
            return failed_plan(problem, f"could not build the model: {exc}", route)
        run.build = self.build_seconds
        self.build_seconds = 0.0
        hint = run.best if run.best is not None else cand
        if hint is not None and plan_checks(problem, hint, graph, contiguity=False):
            hint = None
        st.hint = hint
        return st

    def _lp_bound(self, st: SolveState) -> None:
        """Stage 2: the LP bound, the LP's own plan made valid, root cutting planes, and
        reduced-cost fixing against the best plan."""
        backend, run, graph = st.backend, st.run, st.graph
        left = run.left()
        lp = backend.relaxation(None if left is None else LP_SHARE * left)
        if lp is not None and graph is not None and self.heuristics:
            # the LP's own choice per unit, made valid: often far better than today's zones
            run.consider(make_valid(st.problem, graph, rounded(st.problem, backend)))
            # root cutting planes: separator cuts the LP point violates, while they pay
            # (not inside a neighbourhood's small solve, where they cost more than they give)
            left = run.left()
            budget = ROOT_MAX if left is None else min(ROOT_MAX, ROOT_SHARE * left)
            self.cuts.extend(backend.strengthen(graph, st.dropped,
                                                time.monotonic() + budget, run.best_obj))
            lp = backend.strongest()
        if graph is None and self.heuristics:
            # zones without contiguity: an incumbent at once (HiGHS alone can run a minute
            # without one on tight capacitated instances)
            run.consider(median_start(st.problem, _lp_loads(st.problem, backend),
                                      _start_seconds(run)))
        if lp is not None:
            run.bound = max(run.bound, lp[0])
            if run.best is not None:
                backend.fix_by_reduced_cost(run.best_obj)

    def _free_restart(self, st: SolveState) -> None:
        """Stage 2b: the problem without contiguity solved (within a share of the time), its
        plan made valid; its bound is a bound here too (a rule fewer never raises the
        optimum). Where zones are cut mainly by today's boundaries or by ties, the repaired
        free plan lies within hundredths of a percent of the optimum (demo high, fewer moves:
        0.013% above, where repairing the exact rounds' answers stayed 10.9% above). Only up
        to ``LNS_MIN_SITES`` sites: above, the large-neighbourhood search runs, and on the
        demo's elementary level (14 schools) the repaired free plan was 2.5-7% above the
        free optimum, worse than the engine's own plans, and its solve took time from them."""
        run = st.run
        if st.graph is None or not self.heuristics or st.problem.n_sites > LNS_MIN_SITES:
            return  # with more sites the neighbourhood search re-solves zones (measured better)
        left = run.left()
        budget = FREE_MAX if left is None else min(FREE_MAX, FREE_SHARE * left)
        if budget <= 0.5 or (st.cancel is not None and st.cancel()):
            return
        free = Session(st.problem.replace(edges=None), self.solver).solve(
            st.gap, budget, cancel=st.cancel)
        if not free.feasible:
            return
        run.bound = max(run.bound, free.bound)
        if run.consider(make_valid(st.problem, st.graph, free.assignment)):
            st.backend.fix_by_reduced_cost(run.best_obj)

    def _first_heuristics(self, st: SolveState) -> None:
        """Stage 3: the large-neighbourhood search at once on a model too large for quick
        exact rounds; fix-and-resolve when no valid start was given and the best plan is
        still far above the bound (on capacity-bound towns far better than repairing the
        first exact answer; on models above ``PROBE_LIMIT`` columns, whose restricted MIPs
        can stall HiGHS, only when nothing else found a plan).
        """
        backend, run = st.backend, st.run
        st.big = model_columns(backend) > LNS_BIG
        st.lns_done = not (st.graph is not None and self.heuristics
                           and st.problem.n_sites > LNS_MIN_SITES)
        if not st.lns_done and st.big and run.best is not None:
            st.lns_done = True
            self._neighbourhoods(st)
            backend.fix_by_reduced_cost(run.best_obj)
        st.fix_done = not self.heuristics or (
            run.best is not None and model_columns(backend) > PROBE_LIMIT and st.graph is not None)
        if (not st.fix_done and not st.given and backend.relaxation() is not None
                and (run.best is None or st.far())):
            st.fix_done = True
            fix_and_resolve(st)
            if run.best is not None:
                backend.fix_by_reduced_cost(run.best_obj)

    def _race_flow(self, st: SolveState, stalled: bool = False) -> None:
        """The race stage, once, on a problem with few sites
        (:mod:`~districting.engine.flow_stage`: the SCIP tree, or the flow formulation):
        when the best plan is far above the bound, or when the exact rounds stopped lifting
        the bound (``stalled``; demo high, fewer moves, straight line: 0.012% open after the
        free restart and each round lifts a few percent of it, where the tree proves the
        plan in about 2 s)."""
        if (not st.flow_done and self.heuristics and self.solver == "highs"
                and st.run.best is not None and (stalled or st.far()) and flow_applies(st)):
            st.flow_done = True
            flow_stage(st)

    def _bring_in(self, st: SolveState, answer: np.ndarray, only: np.ndarray) -> int:
        """Units left out of the MIP must join it: the answer has fragments joined to their
        roots only through them, which no cut on this model can reach. The model is rebuilt
        with the left-out units on their shortest such paths (:func:`corridor`; all of them
        when none is found), its cuts carried over. Returns -1."""
        need = corridor(st.problem, st.graph, answer, st.dropped, only)
        if not need.any():
            need = st.dropped
        self._kept = need if self._kept is None else self._kept | need
        dropped = st.dropped & ~need
        st.dropped = dropped if dropped.any() else None
        self._backend = None
        st.backend = self._ensure_backend(st.dropped)
        st.run.build += self.build_seconds
        left = st.run.left()
        lp = st.backend.relaxation(None if left is None else LP_SHARE * left)
        if lp is not None and st.run.best is not None:
            st.backend.fix_by_reduced_cost(st.run.best_obj)
        return -1

    def _neighbourhoods(self, st: SolveState) -> None:
        """Large-neighbourhood search from the best plan for at most a share of the time
        left (most of it on a model so large that one exact round cannot finish); every
        better plan is kept at once."""
        left = st.run.left()
        share = LNS_SHARE_BIG if st.big else LNS_SHARE
        deadline = None if left is None else time.monotonic() + share * left
        reoptimise(st.problem, st.graph, st.run.best, exact_subsolve, deadline,
                   on_better=st.run.consider, cancel=st.cancel)

    def _finish(self, plan: Plan) -> Plan:
        self.last, self._solved = plan, self.problem
        return plan
