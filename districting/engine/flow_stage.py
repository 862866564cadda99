"""The flow stage of a solve: on towns with few zones, the exact flow formulation raced.

Why (measured in ``benchmarks/bench_proof.py``, demo high school, "fewer moves", straight
line): the cut loop's exact answers lie within 0.01% of the optimum, but each holds 11-17
disconnected pieces; the repair cannot hand those pieces to the other zone within the
utilization band, so every round's repaired plan is the same one 11% above the optimum, and
each round adds thousands of separator cuts and grows slower. The large-neighbourhood
search, which could re-solve the zones, runs only from ``LNS_MIN_SITES`` zones. The flow
formulation (:class:`~districting.engine.flow_route.FlowRoute`) needs no repair: its answers
are connected plans, and its bound is a valid lower bound of the same problem.

The stage runs once, when the best plan is still far above the bound before the first
exact round or after a repair, and only on problems with at most ``FLOW_MAX_SITES`` sites and
``FLOW_MAX_ARCS`` flow arcs: warm-started from the best plan, for a share ``FLOW_SHARE`` of
the time left; its plan is kept when better (checked by the independent connectivity check
like every plan) and its bound when tighter. The exact rounds then use the rest of the time.
"""

from __future__ import annotations

import numpy as np

from .flow_route import FlowRoute, flow_size
from .run import SolveState
from .tuning import FLOW_MAX_ARCS, FLOW_MAX_SITES, FLOW_SHARE

__all__ = ["flow_applies", "flow_stage"]


def flow_applies(st: SolveState) -> bool:
    """The stage is worth running: few sites, a model HiGHS handles, a valid start."""
    p = st.problem
    if st.graph is None or st.run.best is None or p.n_sites > FLOW_MAX_SITES:
        return False
    arcs = flow_size(p)
    return arcs is not None and arcs <= FLOW_MAX_ARCS


def flow_stage(st: SolveState) -> None:
    """Race the exact flow formulation from the best plan; keep its plan and bound."""
    run = st.run
    left = run.left()
    budget = None if left is None else FLOW_SHARE * left
    if budget is not None and budget <= 0.5:
        return
    route = FlowRoute(st.problem)
    ans = route.solve(st.gap, budget, run.best, st.cancel)
    if ans.assignment is not None:
        run.consider(ans.assignment)
    if ans.status in ("optimal", "time_limit", "cancelled") and np.isfinite(ans.bound):
        run.bound = max(run.bound, ans.bound)
    run.record(0, 0)
