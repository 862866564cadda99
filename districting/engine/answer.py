"""What one MIP solve returned, the same for every solver route, and how a HiGHS run reads
(and a HiGHS model that prints nothing)."""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

if TYPE_CHECKING:
    import highspy

__all__ = ["Answer", "quiet_highs", "set_start", "set_interrupt", "set_lp_time_limit",
           "highs_status", "highs_assignment"]


@dataclass
class Answer:
    """What one MIP solve returned."""

    status: str  # optimal | feasible | time_limit | infeasible | cancelled | error
    assignment: np.ndarray | None  # None: no solution
    objective: float
    bound: float
    message: str = ""


def set_start(h, col_value: np.ndarray) -> None:
    """Give the highspy model ``h`` a start (every column's value)."""
    import highspy

    sol = highspy.HighsSolution()
    sol.col_value = col_value
    sol.value_valid = True
    h.setSolution(sol)


def set_interrupt(event, stop: bool) -> None:
    """Write HiGHS's interrupt flag from a MIP interrupt callback: ``stop`` or not.

    The flag is written at every call, never only set: HiGHS keeps it from one run of a
    model to the next (highspy 1.16: after one interrupt, every later run of that model
    stopped at its first check, with no node and no simplex iteration, and reported
    "interrupted by user"). Writing ``False`` clears what the last run left.
    """
    event.interrupt(bool(stop))


def set_lp_time_limit(h, seconds: float) -> None:
    """Give the next LP run of the highspy model ``h`` ``seconds`` (infinite: no limit).

    HiGHS holds an LP run against the run time of the model summed over all its runs, MIP
    runs included (highspy 1.16: after a MIP run of 1.27 s an LP given 1.0 s stopped at
    once, "time limit reached"); a MIP run is held against its own time. So the limit
    set is the run time so far plus ``seconds``.
    """
    limit = float(seconds) if not np.isfinite(seconds) else h.getRunTime() + float(seconds)
    h.setOptionValue("time_limit", limit)


def highs_status(h) -> str:
    """The status word of HiGHS's last run on ``h``: optimal, infeasible, time_limit,
    cancelled (interrupted: the caller tells the clock from the user), feasible (a
    solution limit) or error."""
    import highspy

    ms = highspy.HighsModelStatus
    return {
        ms.kOptimal: "optimal",
        ms.kInfeasible: "infeasible",
        ms.kTimeLimit: "time_limit",
        ms.kInterrupt: "cancelled",
        ms.kHighsInterrupt: "cancelled",
        ms.kSolutionLimit: "feasible",
    }.get(h.getModelStatus(), "error")


def highs_assignment(h, xi: np.ndarray, xj: np.ndarray, n_units: int) -> np.ndarray | None:
    """Site per unit in the solution of HiGHS's last run on ``h`` (its first columns are
    the pairs ``xi``, ``xj``; -1 for a unit without one), or None without a solution."""
    if h.getInfo().primal_solution_status != 2:
        return None
    col = np.asarray(h.getSolution().col_value)
    xv = col[: len(xi)] > 0.5
    a = np.full(n_units, -1, np.int64)
    a[xi[xv]] = xj[xv]
    return a


def quiet_highs() -> highspy.Highs:
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
