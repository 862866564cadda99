"""One-shot solve: capacitated p-median with whole units and contiguous zones."""

from __future__ import annotations

from collections.abc import Callable

from ..plan import Plan, Round
from ..problem import Problem
from .session import Session

__all__ = ["solve"]


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
    (site index per unit) reused as a warm start after repair. See
    :class:`~districting.engine.session.Session` for re-solves that keep the model and the
    cuts.
    """
    return Session(problem, solver=solver or "highs").solve(
        gap, time_limit, progress=progress, cancel=cancel, start=start, max_rounds=max_rounds)
