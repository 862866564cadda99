"""Stage 4 of a solve: the exact rounds of the cut loop, and what each answer gives.

Each round solves the MIP with the cuts so far, warm-started from the best valid plan. An
answer whose zones are connected (after the empty units are handed out again) is a plan; a
disconnected one adds the separator cuts it violates (Validi, Buchanan & Lykhovyd,
"Imposing contiguity constraints in political districting models", Operations Research
70(2), 2022) and is repaired into plans. Every cut is valid, so the MIP's bound is a lower
bound and the best plan an upper bound; the rounds end when they meet within the gap asked.
The stages the rounds call back into (the race of a second exact route, the rebuild with
empty units, the neighbourhood search) stay with the session (:class:`Steps`).
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from ..plan import Plan
from .connectivity import fragments
from .cuts import separator_cuts
from .heuristics import fix_and_resolve
from .improve import relocate
from .repair import make_valid, reassign_empty, repair
from .run import SolveState, failed_plan, infeasible_plan
from .tuning import (
    FIRST_ROUND_MIN,
    FIRST_ROUND_SHARE,
    ROUND_SETUP_PER_COLUMN,
    STALL_ROUNDS,
    STALL_SHARE,
)

__all__ = ["Steps", "exact_rounds", "model_columns", "bound_stalls"]


@dataclass(frozen=True)
class Steps:
    """The session's stages the rounds call: ``race(st, stalled)`` a second exact route once;
    ``bring_in(st, answer, only)`` the model rebuilt with the left-out units that answer's
    uncut fragments need (returns -1);
    ``neighbourhoods(st)`` the large-neighbourhood search. ``route`` names the solver."""

    route: str
    race: Callable[[SolveState, bool], None]
    bring_in: Callable[[SolveState, np.ndarray, np.ndarray], int]
    neighbourhoods: Callable[[SolveState], None]


def model_columns(backend) -> int:
    """Columns of the model (0 when the route does not say)."""
    return int(getattr(backend, "ncol", 0))


def bound_stalls(best: float, bounds: list[float]) -> bool:
    """The last ``STALL_ROUNDS`` exact rounds (``bounds``: the bound after each) lifted the
    bound by less than ``STALL_SHARE`` of the gap still open below ``best``."""
    if len(bounds) <= STALL_ROUNDS or not np.isfinite(best):
        return False
    open_gap = best - bounds[-1]
    return open_gap > 0 and bounds[-1] - bounds[-1 - STALL_ROUNDS] < STALL_SHARE * open_gap


def exact_rounds(st: SolveState, steps: Steps, max_rounds: int) -> Plan:
    """Exact rounds on the model without any heuristic restriction (separator cuts only),
    each warm-started from the best valid plan, until the gap is within the request; the
    heuristics run (once each) when a round's plan is still far off."""
    problem, run, gap, cancel = st.problem, st.run, st.gap, st.cancel
    fixed_at = run.best_obj
    for _ in range(max_rounds):
        if run.best is not None and run.gap() <= gap + 1e-12:
            st.status = "optimal"
            break
        if cancel is not None and cancel():
            st.status = "cancelled"
            break
        left = run.left()
        if left is not None and (left <= 0 or (
                run.best is not None
                and left < ROUND_SETUP_PER_COLUMN * model_columns(st.backend))):
            st.status = "time_limit"  # a round could not start before the limit
            break
        if run.best_obj < fixed_at:
            st.backend.fix_by_reduced_cost(run.best_obj)
            fixed_at = run.best_obj
        st.backend.unrestrict()
        # until a valid plan exists, cap each round so the repair and the heuristic get
        # their turn well before the time limit (the MIP's incumbent is good enough)
        budget = left if run.best is not None or left is None else max(
            FIRST_ROUND_MIN, FIRST_ROUND_SHARE * left)
        ans = st.backend.solve(gap, budget, run.best if run.best is not None else st.hint,
                               cancel, prove_start=run.best is not None)
        if ans.status == "infeasible":
            if run.best is None:
                from .diagnose import explain  # Pyomo only when needed

                message = explain(problem) or ans.message
                return infeasible_plan(problem, message, steps.route, run.rounds,
                                       run.history, run.build, run.elapsed())
            run.bound = run.best_obj  # every cut and fix is valid: nothing beats the plan
            st.status = "optimal"
            break
        if ans.status == "error":
            st.message = ans.message
            if run.best is None:
                return failed_plan(problem, st.message, steps.route)
            break
        if ans.status in ("optimal", "time_limit", "cancelled", "feasible"):
            run.bound = max(run.bound, ans.bound)
        n_frag, added = 0, 0
        if ans.assignment is not None:
            n_frag, added = take_answer(st, steps, ans.assignment)
        run.record(max(added, 0), n_frag)
        st.round_bounds.append(run.bound)
        if run.gap() > gap + 1e-12 and bound_stalls(run.best_obj, st.round_bounds):
            steps.race(st, True)
        if run.best is not None and run.gap() <= gap + 1e-12:
            st.status = "optimal"
            break
        if ans.status == "cancelled":
            st.status = "cancelled"
            break
        if ans.status == "time_limit" and run.left() is not None and run.left() <= 1e-3:
            st.status = "time_limit"
            break
        if added == 0 and ans.assignment is not None and st.graph is not None:
            # the MIP answer is contiguous after re-handing empty units, yet the gap
            # is open: only the MIP's own gap is left; solving again cannot add cuts
            if ans.status == "optimal":
                break
        if st.graph is None and ans.status == "optimal":
            break
    else:
        st.status = "feasible"
    st.backend.unrestrict()
    return run.plan(st.status, st.message, steps.route, len(st.cuts), gap)


def take_answer(st: SolveState, steps: Steps, a: np.ndarray) -> tuple[int, int]:
    """One exact answer: kept when valid, else its cuts added and repaired into plans
    (the heuristics run when no plan is known or, once each, when the plan is far off).
    Returns (fragments, cuts added; -1 when the model was rebuilt)."""
    problem, graph, run = st.problem, st.graph, st.run
    if graph is None:
        run.consider(a)
        return 0, 0
    n_frag, added = len(fragments(problem, graph, a)), 0
    b, detached = reassign_empty(problem, graph, a)
    if detached.any() or not run.consider(b):
        cuts = separator_cuts(problem, graph, a, only=detached, passable=st.passable,
                              dropped=st.dropped)
        added = st.backend.add_cuts(cuts)
        st.cuts.extend(cuts)
        if st.relaxed and added == 0 and detached.any():
            added = steps.bring_in(st, a, detached)
        fixed = repair(problem, graph, a)
        if fixed is not None:
            run.consider(relocate(problem, graph, fixed))
        run.consider(make_valid(problem, graph, a))
        far = run.best is None or (not st.fix_done and st.far())
        if far and st.backend.relaxation() is not None:
            st.fix_done = True
            fix_and_resolve(st)
    if not st.lns_done and run.best is not None and st.far():
        st.lns_done = True
        steps.neighbourhoods(st)
    steps.race(st, False)
    return n_frag, added
