"""The engine (HiGHS cut loop) and the SCIP branch-and-cut route side by side.

Routes, same time limit and gap (1e-4) per case:

- ``highs``: ``districting.engine.solve`` (the session: heuristics, root cuts, exact rounds
  re-solving the MIP with HiGHS after each batch of separator cuts);
- ``scip``: ``districting.engine.scip_route.solve_scip``, one SCIP tree whose constraint
  handler adds separator cuts at every node, warm-started from the engine's first plan
  (today's zones made valid);
- ``scip-cold``: the same without the warm start (``--cold``).

Cases: the demo's levels with straight-line travel, both options (shortest travel; fewer
moves, stability weight 3000) at ``--demo-time`` s; Osman & Christofides (1994) instances
at ``--osman-time`` s (published optimum in the last column); a synthetic 2,000 x 25 town
(``benchmarks/towns.py``) at each of ``--town-times``; libpysal's columbus polygons with
six schools (``tests/engine/test_contiguous_optimum.columbus(6, 0.19, 0.5)``, where the
tests' flow model proves 1,303.74) at ``--demo-time`` s. Prints build s, solve s, status,
objective, bound, gap per route and case. A measurement, never a test.

    nice -n 5 .venv/bin/python benchmarks/bench_scip.py [--cold] [--only demo osman town columbus]
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
sys.path[:0] = [str(HERE), str(ROOT)]

from bench_published import instance  # noqa: E402

from districting.engine import solve  # noqa: E402
from districting.engine.connectivity import plan_checks  # noqa: E402
from districting.engine.scip_route import solve_scip  # noqa: E402

OPTIONS = (("shortest travel", 0.0), ("fewer moves", 3000.0))


def demo_cases(data: str, levels: list[str], travel: str = "straight-line"):
    from districting.intake import validate_project
    from districting.study import RunSettings, build_problem

    inputs, report = validate_project(data, cache=True)
    if inputs is None:
        raise SystemExit(report.format())
    for level in levels:
        for label, weight in OPTIONS:
            rs = RunSettings(level=level, travel=travel, stability_weight=weight)
            problem, _ = build_problem(inputs, rs)
            yield f"demo {level}, {label}", problem, float("nan")


def run_route(route: str, problem, limit: float):
    t = time.monotonic()
    if route == "highs":
        plan = solve(problem, gap=1e-4, time_limit=limit)
    else:
        plan = solve_scip(problem, time_limit=limit, gap=1e-4, warm=route == "scip")
    wall = time.monotonic() - t
    if plan.feasible:
        broken = plan_checks(problem, plan.assignment)
        assert not broken, f"{route} returned an invalid plan: {broken}"
    return plan, wall


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--demo-time", type=float, default=60.0)
    ap.add_argument("--osman-time", type=float, default=30.0)
    ap.add_argument("--town-times", type=float, nargs="+", default=[10.0, 60.0])
    ap.add_argument("--osman", type=int, nargs="+", default=[1, 8, 11, 14, 18, 20])
    ap.add_argument("--levels", nargs="+", default=["high", "middle", "elementary"])
    ap.add_argument("--travel", default="straight-line",
                    help="travel measure of the demo cases (straight-line, barrier-aware, streets)")
    ap.add_argument("--only", nargs="+", default=["demo", "osman", "town", "columbus"])
    ap.add_argument("--cold", action="store_true", help="also SCIP without the warm start")
    ap.add_argument("--data", default=str(ROOT / "data" / "demo"))
    args = ap.parse_args()
    routes = ["highs", "scip"] + (["scip-cold"] if args.cold else [])
    cases = []
    if "demo" in args.only:
        demo = demo_cases(args.data, args.levels, args.travel)
        cases += [(c, p, r, args.demo_time) for c, p, r in demo]
    if "osman" in args.only:
        for k in args.osman:
            problem, _dist, opt = instance(f"osman{k}")
            cases.append((f"Osman & Christofides {k}", problem, opt, args.osman_time))
    if "columbus" in args.only:
        sys.path.insert(0, str(ROOT / "tests" / "engine"))
        sys.path.insert(0, str(ROOT / "tests"))
        from test_contiguous_optimum import columbus

        cases.append(("columbus, 6 schools (libpysal)", columbus(6, 0.19, 0.5), float("nan"),
                      args.demo_time))
    if "town" in args.only:
        from towns import synthetic_town

        problem, _ = synthetic_town(2000, 25, 1, 0.3)
        cases += [(f"town 2000 x 25 seed 1 @{t:g}s", problem, float("nan"), t)
                  for t in args.town_times]
    print(f"{'case':34} {'route':9} {'limit':>5} {'build s':>7} {'solve s':>7} {'wall s':>7} "
          f"{'status':>10} {'objective':>14} {'bound':>14} {'gap %':>8} {'published':>10}",
          flush=True)
    for name, problem, ref, limit in cases:
        for route in routes:
            plan, wall = run_route(route, problem, limit)
            ref_txt = f"{ref:10,.0f}" if np.isfinite(ref) else f"{'':>10}"
            print(f"{name:34} {route:9} {limit:5g} {plan.build_seconds:7.1f} "
                  f"{plan.solve_seconds:7.1f} {wall:7.1f} {plan.status:>10} "
                  f"{plan.objective:14,.1f} {plan.bound:14,.1f} {100 * plan.gap:8.4f} "
                  f"{ref_txt}", flush=True)


if __name__ == "__main__":
    main()
