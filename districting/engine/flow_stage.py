"""The race stage of a solve: on towns with few zones, a second exact route raced once.

Why (measured in ``benchmarks/bench_proof.py``, demo high school, "fewer moves", straight
line): the cut loop's exact answers lie within 0.01% of the optimum, but each holds 11-17
disconnected pieces; each round adds thousands of separator cuts, grows slower, and lifts the
bound by a few percent of the gap left. Two routes need no repair and prove what the rounds
prove slowly:

- the SCIP branch-and-cut tree (:mod:`~districting.engine.scip_route`, separator cuts at
  every node), up to ``TREE_MAX_SITES`` sites; warm-started from the best plan with the
  session's cuts. Measured (same machine, one after the other, 60 s limit): high "fewer
  moves" proven in 8.9 s instead of 15.8 s with the flow route; middle (4 schools) 0.031%
  instead of 0.046% ("shortest travel") and 0.015% instead of 0.034% ("fewer moves");
- the exact flow formulation (:class:`~districting.engine.flow_route.FlowRoute`), where
  PySCIPOpt is missing: up to ``FLOW_MAX_SITES`` sites and ``FLOW_MAX_ARCS`` flow arcs.

The stage runs once, when the best plan is still far above the bound or the exact rounds
stopped lifting the bound (:func:`~districting.engine.rounds.bound_stalls`), for a share
``FLOW_SHARE`` of the time left; its plan is kept when better (checked by the independent
connectivity check like every plan) and its bound when tighter. The exact rounds then use the
rest of the time. Along the demo's streets the rounds prove these levels in 2-6 s without it
(the tree alone took 50-60 s on high there: measured in ``benchmarks/bench_scip.py``), so it
is a race after the rounds, never the first route.
"""

from __future__ import annotations

import importlib.util

import numpy as np

from .flow_route import FlowRoute, flow_size
from .run import SolveState
from .tuning import FLOW_MAX_ARCS, FLOW_MAX_SITES, FLOW_SHARE, TREE_MAX_SITES

__all__ = ["flow_applies", "flow_stage", "tree_available"]


def tree_available() -> bool:
    """PySCIPOpt can be imported (the SCIP tree is a dependency; a trimmed install may lack
    it, and then the flow route races instead)."""
    return importlib.util.find_spec("pyscipopt") is not None


def _use_tree(st: SolveState) -> bool:
    return st.problem.n_sites <= TREE_MAX_SITES and tree_available()


def flow_applies(st: SolveState) -> bool:
    """The stage is worth running: few sites, a model the route handles, a valid start."""
    p = st.problem
    if st.graph is None or st.run.best is None:
        return False
    if _use_tree(st):
        return True
    if p.n_sites > FLOW_MAX_SITES:
        return False
    arcs = flow_size(p)
    return arcs is not None and arcs <= FLOW_MAX_ARCS


def flow_stage(st: SolveState) -> None:
    """Race the SCIP tree (or the flow formulation) from the best plan; keep its plan and
    bound."""
    run = st.run
    left = run.left()
    budget = None if left is None else FLOW_SHARE * left
    if budget is not None and budget <= 0.5:
        return
    if _use_tree(st):
        from .scip_route import solve_scip

        # the tree gets a copy of the cuts: its new ones stay in its own model
        plan = solve_scip(st.problem, st.graph, budget, st.gap, start=run.best,
                          cuts=list(st.cuts), cancel=st.cancel)
        assignment = plan.assignment if plan.feasible else None
        status, bound = plan.status, plan.bound
    else:
        ans = FlowRoute(st.problem).solve(st.gap, budget, run.best, st.cancel)
        assignment, status, bound = ans.assignment, ans.status, ans.bound
    if assignment is not None:
        run.consider(assignment)
    if status in ("optimal", "time_limit", "cancelled") and np.isfinite(bound):
        run.bound = max(run.bound, bound)
    run.record(0, 0)
