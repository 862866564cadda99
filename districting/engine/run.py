"""What one solve carries between its stages: the book-keeping and the state passed on.

:class:`Run` keeps the best valid plan, the bound, the rounds and the history, and turns
them into a :class:`~districting.plan.Plan`. :class:`SolveState` is everything the stages of
:class:`~districting.engine.session.Session` hand each other, made explicit.
"""

from __future__ import annotations

import dataclasses
import time
from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np

from ..plan import Plan, Round, plan_metrics, relative_gap
from ..problem import Problem
from ..rules import open_sites
from .connectivity import Cut, UnitGraph, plan_checks
from .findings import stopped_short_text
from .tuning import FAR_GAP_FACTOR, FAR_GAP_MIN, TOL

__all__ = ["Run", "SolveState", "objective", "infeasible_plan", "failed_plan"]


def objective(problem: Problem, a: np.ndarray) -> float:
    """The cost of plan ``a``: sum_i w[i, a_i]."""
    return float(problem.weighted_cost[np.arange(problem.n_units), a].sum())


class Run:
    """Book-keeping of one solve: best valid plan, bound, rounds, history."""

    def __init__(self, problem: Problem, graph: UnitGraph | None, t0: float,
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
        obj = objective(self.problem, a)
        if obj >= self.best_obj - TOL * max(1.0, abs(obj)):
            return False
        if plan_checks(self.problem, a, self.graph):
            return False
        self.best, self.best_obj = a.copy(), obj
        if self.progress is not None:  # a better plan is worth showing at once
            self._emit(0, 0)
        return True

    def gap(self) -> float:
        return relative_gap(self.best_obj, min(self.bound, self.best_obj))

    def record(self, added: int, n_frag: int) -> None:
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
            pieces = self.history[-1].fragments if self.history else 0
            msg = message or stopped_short_text(
                problem.level, self.elapsed(), self.rounds, pieces,
                int((problem.locks >= 0).sum()), cancelled=status == "cancelled")
            st = status if status in ("time_limit", "cancelled") else "infeasible"
            return Plan(st, np.inf, bound, np.inf, np.full(problem.n_units, -1, np.int64),
                        np.zeros(problem.n_sites, bool), message=msg, rounds=self.rounds,
                        cuts=n_cuts, build_seconds=self.build, solve_seconds=self.elapsed(),
                        history=tuple(self.history), route=route)
        opened = open_sites(problem, self.best)
        g = relative_gap(self.best_obj, bound)
        if status == "feasible" and g <= gap + 1e-12:
            status = "optimal"
        return Plan(status=status, objective=self.best_obj, bound=float(bound), gap=g,
                    assignment=self.best, open_sites=opened, message=message,
                    rounds=self.rounds, cuts=n_cuts, build_seconds=self.build,
                    solve_seconds=self.elapsed(), history=tuple(self.history),
                    metrics=plan_metrics(problem, self.best, opened), route=route)




@dataclass
class SolveState:
    """What the stages of one solve pass each other.

    ``passable`` marks the units without students any zone may take; ``dropped`` those of
    them the MIP leaves out (HiGHS route; None when every unit is in) until a round needs
    them (:func:`districting.engine.cuts.corridor`). ``hint`` is a start that meets every rule
    but contiguity (or None). ``lns_done`` / ``fix_done``: the large-neighbourhood search and
    fix-and-resolve run at most once per solve. ``cuts`` is the session's cut list (cuts
    found here are kept for the next solve).
    """

    problem: Problem
    graph: UnitGraph | None
    passable: np.ndarray | None
    dropped: np.ndarray | None
    run: Run
    gap: float
    cancel: Callable[[], bool] | None
    cuts: list[Cut]
    given: bool
    backend: object = None
    hint: np.ndarray | None = None
    big: bool = False
    lns_done: bool = True
    fix_done: bool = True
    flow_done: bool = False
    round_bounds: list = dataclasses.field(default_factory=list)  # bound after each exact round
    parents: np.ndarray | None = None
    status: str = "feasible"
    message: str = ""

    @property
    def relaxed(self) -> bool:
        """Some units are left out of the MIP."""
        return self.dropped is not None

    def far(self) -> bool:
        """The best plan is far above the bound (the heuristics deserve another turn)."""
        return self.run.gap() > max(FAR_GAP_FACTOR * self.gap, FAR_GAP_MIN)


def infeasible_plan(problem: Problem, message: str, route: str, rounds: int = 0,
                history: Sequence[Round] = (), build: float = 0.0, seconds: float = 0.0) -> Plan:
    return Plan("infeasible", np.inf, np.inf, np.inf, np.full(problem.n_units, -1, np.int64),
                np.zeros(problem.n_sites, bool), message=message, rounds=rounds,
                build_seconds=build, solve_seconds=seconds, history=tuple(history), route=route)


def failed_plan(problem: Problem, message: str, route: str) -> Plan:
    """No plan because the solver could not run or stopped with an error (not a proof)."""
    return Plan("infeasible", np.inf, -np.inf, np.inf, np.full(problem.n_units, -1, np.int64),
                np.zeros(problem.n_sites, bool), message=message, route=route)
