"""First duals for the zone column generation (:mod:`districting.engine.columns`).

The first restricted master holds one partition (the start plan's zones), so its duals are
any of a huge degenerate set and the first pricing passes are poor. Two ways to a better
first centre for the dual smoothing:

- :func:`compact_duals`: the duals of the assignment LP (:func:`formulate` relaxed) on its
  assignment, moved and transport rows (the same rows in the zone master, written per
  pair). Quick up to a few tens of thousands of pairs.
- :func:`subgradient`: Polyak subgradient steps on the Lagrangian of the cover rows
  (Held, Wolfe & Crowder, "Validation of subgradient optimization", Mathematical
  Programming 6, 1974), the multipliers of the column generation papers for the
  capacitated p-median (Lorena & Senne, Computers & Operations Research 31(6), 2004).
  Every step prices every site exactly, so every step is a valid bound.
"""

from __future__ import annotations

import time
from collections.abc import Callable

import numpy as np

from ..problem import Problem
from .formulation import formulate

__all__ = ["compact_duals", "subgradient", "COMPACT_MAX_PAIRS", "SUBGRADIENT_ROUNDS"]

#: Largest model (allowed pairs) whose assignment LP gives the first duals; above it the
#: subgradient does (SJC4a, 161,604 pairs: the LP took 60 s on 2 cores, 2026-12-04).
COMPACT_MAX_PAIRS = 50_000
#: Most subgradient steps.
SUBGRADIENT_ROUNDS = 150


def compact_duals(problem: Problem, nrow: int, moved_row: int, ride_row: int,
                  time_limit: float | None) -> np.ndarray | None:
    """Master row duals (``nrow`` of them) from the assignment LP: its assignment rows give
    the cover duals, its moved and transport rows those of the master's rows
    ``moved_row`` and ``ride_row`` (-1: none); zero elsewhere. None when the LP does not
    finish optimal within ``time_limit``."""
    import highspy

    from .answer import quiet_highs

    f = formulate(problem)
    if f.infeasible_reason:
        return None
    a, lo, hi = f.matrix()
    lp = highspy.HighsLp()
    lp.num_col_, lp.num_row_ = f.ncol, a.shape[0]
    lp.col_cost_, lp.col_lower_, lp.col_upper_ = f.cost, f.lower, f.upper
    lp.row_lower_, lp.row_upper_ = lo, hi
    lp.a_matrix_.format_ = highspy.MatrixFormat.kColwise
    lp.a_matrix_.start_ = a.indptr.astype(np.int32)
    lp.a_matrix_.index_ = a.indices.astype(np.int32)
    lp.a_matrix_.value_ = a.data
    h = quiet_highs()
    h.setOptionValue("presolve", "off")
    if time_limit is not None:
        h.setOptionValue("time_limit", max(float(time_limit), 0.1))
    h.passModel(lp)
    h.run()
    if h.getModelStatus() != highspy.HighsModelStatus.kOptimal:
        return None
    dual = np.asarray(h.getSolution().row_dual)
    y = np.zeros(nrow)
    start = 0
    for block in f.blocks:
        rows = dual[start:start + block.n_rows]
        if block.family == "assignment":
            y[:problem.n_units] = rows
        elif block.family == "max_moved" and len(rows) and moved_row >= 0:
            y[moved_row] = rows[0]
        elif block.family == "transport" and len(rows) and ride_row >= 0:
            y[ride_row] = rows[0]
        start += block.n_rows
    return y


def subgradient(evaluate: Callable[[np.ndarray], tuple[float, np.ndarray]], y0: np.ndarray,
                upper: float, deadline: float | None,
                rounds: int = SUBGRADIENT_ROUNDS) -> tuple[float, np.ndarray]:
    """Polyak steps ``y += theta (upper - L(y)) g / |g|^2`` from ``y0``; ``evaluate(y)``
    returns the Lagrangian bound L(y) and a subgradient g (``1 - cover`` on the cover rows,
    0 elsewhere). theta starts at 2 and halves after 3 steps without a better bound.
    Returns the best bound and its duals."""
    best, best_y = -np.inf, y0.copy()
    y, theta, stall = y0.copy(), 2.0, 0
    for _ in range(rounds):
        if deadline is not None and time.monotonic() > deadline:
            break
        lb, g = evaluate(y)
        if lb > best and (not np.isfinite(best) or lb > best + 1e-9 * max(1.0, abs(best))):
            best, best_y, stall = lb, y.copy(), 0
        else:
            stall += 1
            if stall >= 3:
                theta, stall = theta / 2, 0
        norm = float((g ** 2).sum())
        gap = upper - lb if np.isfinite(lb) else abs(upper) * 0.1 + 1.0
        if norm == 0 or gap <= 1e-9 * max(1.0, abs(upper)) or theta < 1e-4:
            break
        y = y + theta * gap / norm * g
    return best, best_y
