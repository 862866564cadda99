"""What the feeder rules cost on the demo town: solve time and travel with each rule on and
off.

Cases (streets travel, the demo's settings, the given time limit per solve):

- middle, no feeder rule;
- middle, whole feeding from today's elementary zones (every elementary zone inside one
  middle zone), and with at most one split per elementary school;
- elementary, nested in today's middle zones (every elementary zone inside one middle
  zone, the other way round); with ``--all`` also elementary without a rule.

For each: status, the engine's proven gap, seconds (model build and solve, not the
project's loading), mean travel, and the split feeders of the plan (lower schools feeding
two or more upper schools, counted by :mod:`districting.outputs.feeders`). Speed is
measured here, never asserted in tests.

Usage: ``.venv/bin/python benchmarks/bench_feeders.py [--time-limit 60] [--data data/demo]
[--all]``.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

from districting.intake import validate_project  # noqa: E402
from districting.outputs.feeders import feeder_table, split_feeders  # noqa: E402
from districting.study import RunSettings, run  # noqa: E402


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--time-limit", type=float, default=60.0)
    parser.add_argument("--data", default=str(ROOT / "data" / "demo"))
    parser.add_argument("--all", action="store_true", help="also elementary without a rule")
    args = parser.parse_args()
    inputs, report = validate_project(args.data)
    if inputs is None:
        raise SystemExit(report.format())
    cases = [("middle", "", 0), ("middle", "whole", 0), ("middle", "whole", 1),
             ("elementary", "nested", 0)]
    if args.all:
        cases.insert(3, ("elementary", "", 0))
    print(f"{'level':11} {'feeder rule':22} {'status':>10} {'gap':>8} {'seconds':>8} "
          f"{'mean km':>8} {'split feeders':>14}")
    for level, rule, splits in cases:
        started = time.perf_counter()
        out = run(inputs, RunSettings(level=level, feeding=rule, time_limit=args.time_limit,
                                      max_splits=splits if rule == "whole" else None))
        seconds = time.perf_counter() - started
        plan = out.plan
        feasible = plan.feasible and plan.metrics is not None
        km = plan.metrics.overall_mean_distance / 1000 if feasible else float("nan")
        count = str(split_feeders(feeder_table(out), "elementary")) if feasible else "-"
        name = f"{rule}, at most {splits} split" if splits else rule or "none"
        print(f"{level:11} {name:22} {plan.status:>10} {plan.gap:>8.2%} "
              f"{seconds:>8.1f} {km:>8.2f} {count:>14}", flush=True)


if __name__ == "__main__":
    main()
