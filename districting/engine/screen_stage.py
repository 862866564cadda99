"""The screen stage of a solve: on a large capacitated model, the LP priced from a few pairs
per unit (:mod:`~districting.engine.pair_screen`), then plans from its core.

Where it runs: the HiGHS route with a valid plan in hand, capacities, zones without
contiguity, and at least ``SCREEN_MIN_PAIRS`` pairs of candidate sites (each a linking row
``x[i, j] <= y[j]``). Measured (this 2-core machine, 2026-12-04), which is why not wider:

- without capacities (OR-Library's pmed11, pmed16, pmed21) HiGHS solves the whole LP
  quickly: pmed21 proven in 21.7 s with the screen, 6.2 s without (60 s limit);
- on Osman & Christofides' instances (10,000 pairs, 30 s) it found better plans on 14 and
  20 (982, the optimum, for 983; 1,030 for 1,041) but lost the proofs of 8 and 15 and
  slowed 11, 13, 16, 17 and 19 by 1-6 s;
- contiguous towns seldom have many candidate sites, and it was not measured there.

Core plans: the problem restricted to the pairs whose floor lies within ``CORE_GAPS`` of
the LP bound (and the best plan's pairs), solved in ``CORE_SHARE`` of the time left, the
narrowest core first; a wider one only when it found nothing better. A restriction keeps
every rule, so its plans are valid for the whole problem; and since a plan using a pair
outside the core costs more than the core's threshold (the pair's floor), the lesser of that
threshold and the core's proven bound bounds the whole problem. On Lorena & Senne's SJC4a the MIP
over all pairs held the first plan (5.9% above the optimum) for 20 s; the core within 0.2%
of the LP found one 0.12% above it in as long (measured). The session then builds its model
on the pairs a plan as cheap as the best may use (``Screen.keep``).
"""

from __future__ import annotations

import time
from collections.abc import Callable

import numpy as np

from ..plan import Plan
from ..problem import Problem
from .pair_screen import Screen, screen_pairs
from .run import Run, SolveState
from .tuning import CORE_GAPS, CORE_SHARE, CORE_STOP_GAP, LP_SHARE, SCREEN_MIN_PAIRS

__all__ = ["screen_applies", "screen_stage"]

#: A whole solve of a restricted problem: (problem, gap, time limit, start, cancel) -> Plan.
SubSolve = Callable[[Problem, float, float | None, np.ndarray | None,
                     Callable[[], bool] | None], Plan]


def screen_applies(problem: Problem, run: Run) -> bool:
    """A valid plan, capacities, zones without contiguity, and at least
    ``SCREEN_MIN_PAIRS`` pairs of candidate sites."""
    return (run.best is not None and problem.capacity is not None and not problem.contiguous
            and int((problem.allowed & problem.candidates[None, :]).sum()) >= SCREEN_MIN_PAIRS)


def screen_stage(st: SolveState, drop: np.ndarray | None, sub_solve: SubSolve) -> Screen | None:
    """The screen within ``LP_SHARE`` of the time left (its bound taken, also when the
    clock stopped pricing), then the core plans; None when pricing did not finish (the
    whole model is then built as before)."""
    run = st.run
    left = run.left()
    deadline = np.inf if left is None else time.monotonic() + LP_SHARE * left
    screen = screen_pairs(st.problem, drop, run.best, deadline)
    if screen is None:
        return None
    run.bound = max(run.bound, screen.bound)
    if not screen.converged:
        return None  # its bound holds, but the model is built whole (no LP point to adopt)
    core_plans(st, screen, sub_solve)
    return screen


def core_plans(st: SolveState, screen: Screen, sub_solve: SubSolve) -> None:
    """Plans from the cores of the module docstring; each better one is kept at once."""
    run, problem = st.run, st.problem
    for width in CORE_GAPS:
        left = run.left()
        budget = None if left is None else CORE_SHARE * left
        if (budget is not None and budget < 0.5) or (st.cancel is not None and st.cancel()):
            return
        cap = min(run.best_obj, screen.bound + width * abs(screen.bound))
        core = screen.keep(cap)
        core[np.arange(problem.n_units), run.best] = True
        plan = sub_solve(problem.replace(forbidden=problem.forbidden | ~core),
                         max(st.gap, CORE_STOP_GAP), budget, run.best, st.cancel)
        # a plan with a pair outside the core costs more than cap (its floor), any other
        # at least the core's bound: the lesser is a bound on the whole problem
        run.bound = max(run.bound, min(plan.bound, cap))
        if plan.feasible and run.consider(plan.assignment):
            return
