"""Does a solve keep its time limit? Wall seconds against the limit, per case.

A planner who sets 60 s expects an answer at 60 s. HiGHS checks the clock often in its
simplex and its tree, but rarely in its presolve and its set-up, which grow with the model;
the engine decides around them (``engine.tuning.LP_PRESOLVE_LIMIT``,
``ROUND_SETUP_PER_COLUMN``). Cases: published instances (bench_published.py: Osman &
Christofides 1994, Lorena & Senne 2004, Beasley 1985), seeded synthetic towns
(towns.py, ``town_UNITS_SCHOOLS_SEED``) and the demo town with straight-line travel
(``demo_LEVEL_shortest`` or ``demo_LEVEL_fewer``: the two options of demo_cases.py).

    .venv/bin/python benchmarks/bench_limits.py [--time-limit 20] [CASE ...]

Prints per case: limit, wall s, seconds over the limit, status, plan, bound, gap. A
measurement, not a test.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

sys.path[:0] = [str(Path(__file__).resolve().parent)]

from bench_published import instance  # noqa: E402
from demo_cases import ROOT, demo_cases  # noqa: E402
from towns import synthetic_town  # noqa: E402

from districting.engine.session import Session  # noqa: E402

CASES = ["SJC3a", "SJC4a", "SJC4b", "pmed16", "town_2000_25_1", "town_10000_50_1",
         "town_10000_50_2", "demo_elementary_shortest", "demo_high_fewer"]


def problem_of(name: str):
    """(problem, gap asked): towns at the engine's default gap, published ones to proof."""
    if name.startswith("town_"):
        _, n, m, seed = name.split("_")
        return synthetic_town(int(n), int(m), int(seed))[0], 1e-4
    if name.startswith("demo_"):
        _, level, option = name.split("_")
        for _, _, label, problem in demo_cases(str(ROOT / "data" / "demo"),
                                               ["straight-line"], [level]):
            if label.startswith(option):
                return problem, 1e-4
        raise SystemExit(f"{name}: the option is 'shortest' or 'fewer'")
    return instance(name)[0], 1e-7


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("cases", nargs="*", default=CASES)
    ap.add_argument("--time-limit", type=float, default=20.0)
    args = ap.parse_args()
    lim = args.time_limit
    print(f"{'case':<25} {'limit':>5} {'wall s':>7} {'over':>6} {'status':<10} "
          f"{'plan':>14} {'bound':>14} {'gap':>8}")
    for name in args.cases:
        problem, gap = problem_of(name)
        t = time.monotonic()
        plan = Session(problem).solve(gap, lim)
        wall = time.monotonic() - t
        rel = ((plan.objective - plan.bound) / max(abs(plan.objective), 1e-9)
               if plan.feasible else float("nan"))
        print(f"{name:<25} {lim:5.0f} {wall:7.1f} {wall - lim:+6.1f} {plan.status:<10} "
              f"{plan.objective:14.1f} {plan.bound:14.1f} {100 * rel:7.3f}%", flush=True)


if __name__ == "__main__":
    main()
