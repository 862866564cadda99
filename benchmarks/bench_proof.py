"""Is the gap the plan or the bound? The engine held against independent references.

For each travel measure given (straight line and along streets by default), each demo level
and both demo options (shortest travel; fewer moves, stability weight 3000), prints:

- engine plan, engine bound, engine gap: ``districting.engine.solve`` within the limit;
- flow optimum: the exact single-commodity flow formulation written in the tests alone
  (``tests/flow_milp.py``, scipy.optimize.milp, no engine code: the independent one), run
  where the level has at most ``--flow-sites`` schools, within ``--flow-time``;
  "not within" when it did not prove an optimum in time;
- free optimum: the same problem without contiguity solved to optimality, a valid lower
  bound on every contiguous plan (relaxing a rule never raises the optimum);
- plan above ref: engine plan over the best reference lower bound (the flow optimum when
  known, else the free optimum): how much of the gap is the plan;
- bound below ref: how far the engine's bound lies below the flow optimum (when known).

``--agree-time S`` adds, where the level has more schools than ``--flow-sites`` (the flow
model cannot finish the whole level), a neighbourhood reference: every unit on which the
engine's plan and the free optimum agree is locked to that school, and the flow formulation
solves the rest (within S seconds). Its optimum is a valid plan, so it bounds the true
optimum from above; the engine's plan above it is plan the search missed in that
neighbourhood, and the engine's bound below it is the most the bound can be blamed for.
This is relaxation-induced neighbourhood search (Danna, Rothberg & Le Pape, "Exploring
relaxation induced neighborhoods to improve MIP solutions", Mathematical Programming 102,
2005) used as a measuring stick, not as a stage of the engine.

``--old`` runs the engine as it was before the free restart and the tree race too (see
``_engine``), so both stand side by side in one run. Speed is measured here, never asserted
in tests.

Usage: ``.venv/bin/python benchmarks/bench_proof.py [--time-limit 60] [--flow-time 60]
[--travel straight-line streets] [--levels high middle elementary] [--old]``.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parent.parent
sys.path[:0] = [str(ROOT), str(ROOT / "tests"), str(ROOT / "benchmarks")]

from demo_cases import demo_cases  # noqa: E402
from flow_milp import flow_optimum  # noqa: E402

from districting.engine import solve  # noqa: E402
from districting.engine.connectivity import UnitGraph  # noqa: E402
from districting.engine.repair import make_valid  # noqa: E402
from districting.engine.run import objective  # noqa: E402


def _reference(problem, limit: float) -> tuple[float, float]:
    """(flow optimum or nan, seconds)."""
    started = time.perf_counter()
    try:
        value, _ = flow_optimum(problem, time_limit=limit)
    except AssertionError:  # no optimum proven within the limit
        value = float("nan")
    return (float("nan") if value is None else value), time.perf_counter() - started


def _agreement(problem, plan: np.ndarray, free: np.ndarray,
               limit: float) -> tuple[float, int, float]:
    """(flow optimum with every unit where ``plan`` and ``free`` agree locked there, or nan;
    units left free; seconds)."""
    locks = problem.locks.copy()
    fix = (plan == free) & (locks < 0)
    locks[fix] = plan[fix]
    value, seconds = _reference(problem.replace(locks=locks), limit)
    return value, int((~fix & (problem.locks < 0)).sum()), seconds


def _engine(problem, limit: float, new: bool):
    """The engine; ``new=False`` is the engine before this stop's stages: no free restart
    (``FREE_SHARE = 0``), the race only when the plan is far off (``STALL_SHARE = 0``), and
    the flow route as the race (the SCIP tree taken as missing)."""
    from districting.engine import flow_stage, rounds, session

    keep = session.FREE_SHARE, rounds.STALL_SHARE, flow_stage.tree_available
    if not new:
        session.FREE_SHARE, rounds.STALL_SHARE = 0.0, 0.0
        flow_stage.tree_available = lambda: False
    try:
        return solve(problem, gap=1e-4, time_limit=limit)
    finally:
        session.FREE_SHARE, rounds.STALL_SHARE, flow_stage.tree_available = keep


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--time-limit", type=float, default=60.0, help="engine, s per case")
    ap.add_argument("--flow-time", type=float, default=60.0, help="flow reference, s")
    ap.add_argument("--flow-sites", type=int, default=4,
                    help="run the flow reference up to this many schools")
    ap.add_argument("--travel", nargs="+", default=["straight-line", "streets"])
    ap.add_argument("--levels", nargs="+", default=["high", "middle", "elementary"])
    ap.add_argument("--old", action="store_true",
                    help="also the engine without the free restart and the tree race")
    ap.add_argument("--repaired", action="store_true",
                    help="only the free optimum and that plan made valid (the free restart)")
    ap.add_argument("--agree-time", type=float, default=0.0,
                    help="s for the neighbourhood reference (0: none; see the docstring)")
    ap.add_argument("--data", default=str(ROOT / "data" / "demo"))
    args = ap.parse_args()
    routes = [("new", True)] + ([("old", False)] if args.old else [])
    print(f"{'travel':14} {'case':30} {'route':5} {'engine s':>8} {'status':>10} "
          f"{'engine plan':>13} {'engine bound':>13} {'gap %':>8} {'flow opt':>13} "
          f"{'flow s':>7} {'free opt':>13} {'plan above ref %':>16} {'bound below %':>13}",
          flush=True)
    for travel, level, label, problem in demo_cases(args.data, args.travel, args.levels):
        free = solve(problem.replace(edges=None), gap=1e-7, time_limit=args.flow_time)
        if args.repaired:
            fixed = make_valid(problem, UnitGraph.of(problem), free.assignment)
            value = objective(problem, fixed) if fixed is not None else float("nan")
            print(f"{travel:14} {level + ', ' + label:30} free optimum "
                  f"{free.objective:,.0f}, made valid {value:,.0f} "
                  f"({100 * (value / free.objective - 1):.3f}% above)", flush=True)
            continue
        ref, ref_s = float("nan"), float("nan")
        if problem.n_sites <= args.flow_sites:
            ref, ref_s = _reference(problem, args.flow_time)
        low = ref if np.isfinite(ref) else free.objective
        for name, new in routes:
            plan = _engine(problem, args.time_limit, new)
            seconds = plan.build_seconds + plan.solve_seconds
            above = 100 * (plan.objective / low - 1)
            below = 100 * (1 - plan.bound / ref) if np.isfinite(ref) else float("nan")
            flow_txt = f"{ref:13,.0f}" if np.isfinite(ref) else (
                f"{'not within':>13}" if problem.n_sites <= args.flow_sites
                else f"{'-':>13}")
            print(f"{travel:14} {level + ', ' + label:30} {name:5} {seconds:8.1f} "
                  f"{plan.status:>10} {plan.objective:13,.0f} {plan.bound:13,.0f} "
                  f"{100 * plan.gap:8.4f} {flow_txt} {ref_s:7.1f} "
                  f"{free.objective:13,.0f} {above:16.4f} {below:13.4f}", flush=True)
            if args.agree_time > 0 and problem.n_sites > args.flow_sites and plan.feasible:
                near, n_free, near_s = _agreement(problem, plan.assignment,
                                                  free.assignment, args.agree_time)
                found = (f"optimum {near:,.0f} in {near_s:.1f} s; engine plan "
                         f"{100 * (plan.objective / near - 1):.3f}% above it, engine bound "
                         f"{100 * (1 - plan.bound / near):.3f}% below it"
                         if np.isfinite(near) else f"not proven in {near_s:.1f} s")
                print(f"{'':14} {'':30} {name:5} agreement neighbourhood ({n_free} units "
                      f"free, flow): {found}", flush=True)


if __name__ == "__main__":
    main()
