"""What contiguity costs under each travel measure, on the demo town.

For each travel measure (along streets, barrier-aware, straight line) and two demo cases
(elementary, shortest travel; high school, "fewer moves" with a stability weight of 3000),
the script solves the contiguous problem within the time limit and the same problem without
contiguity (the plain capacitated assignment, solved to optimality), and prints:

- build s: travel matrix and problem build (the travel cache is bypassed: a cold start);
- solve s, status, gap: the engine's contiguous solve and its own proven gap;
- above free: how far the contiguous plan lies above the no-contiguity optimum, an
  independent lower bound on any contiguous plan (relaxing a constraint never raises the
  optimum). When "above free" is near the engine's gap, contiguity itself costs little
  under that measure.

Speed and quality are measured here, never asserted in tests.

Usage: ``.venv/bin/python benchmarks/bench_travel_gap.py [--time-limit 60] [--data data/demo]``.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

from districting.engine import solve  # noqa: E402
from districting.intake import validate_project  # noqa: E402
from districting.study import RunSettings, build_problem  # noqa: E402
from districting.travel import MEASURES  # noqa: E402

CASES = (("elementary", "shortest travel", 0.0), ("high", "fewer moves", 3000.0))


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--time-limit", type=float, default=60.0)
    parser.add_argument("--data", default=str(ROOT / "data" / "demo"))
    args = parser.parse_args()
    print(f"{'travel':15} {'case':28} {'build s':>8} {'solve s':>8} {'status':>10} "
          f"{'gap':>8} {'free s':>7} {'above free':>11}")
    for measure in MEASURES:
        for level, label, weight in CASES:
            started = time.perf_counter()
            inputs, report = validate_project(args.data, cache=False)
            if inputs is None:
                raise SystemExit(report.format())
            rs = RunSettings(level=level, travel=measure, stability_weight=weight)
            problem, _ = build_problem(inputs, rs)
            build = time.perf_counter() - started
            plan = solve(problem, gap=1e-4, time_limit=args.time_limit)
            started = time.perf_counter()
            free = solve(problem.replace(edges=None), gap=1e-6, time_limit=args.time_limit)
            free_s = time.perf_counter() - started
            above = plan.objective / free.objective - 1 if free.objective else float("nan")
            print(f"{measure:15} {level + ', ' + label:28} {build:8.2f} "
                  f"{plan.solve_seconds:8.1f} {plan.status:>10} {100 * plan.gap:7.3f}% "
                  f"{free_s:7.1f} {100 * above:10.3f}%", flush=True)


if __name__ == "__main__":
    main()
