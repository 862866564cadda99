"""Solve time on the demo town with each practice rule off and on (speed is measured here,
never asserted in tests).

For each level given (middle and high by default: proven within seconds along the streets;
elementary uses its whole time limit and would take minutes), one row per rule:

- ``off``: the project's own settings (walk zones reported, no walk rule, no group band);
- ``keep_walkers``: a unit within walking distance of an open school stays with one;
- ``max_transported``: halfway between the students who can walk to no school (they ride
  in every plan) and those the ``off`` plan transports;
- ``group band 15`` and ``group band 6``: every open school's share of each group within
  that many points of the level's share, in every projected year (the demo's shares stay
  within about 8 points of the district's without a band, so 15 does not bind and 6 does).

Columns: status, seconds (build and solve), objective (student-metres), gap, students
needing transport in the plan year, the widest distance of a school's group share from the
district's (points). Every plan goes through the independent checker.

Usage: ``.venv/bin/python benchmarks/bench_rules.py [--levels middle,high]
[--time-limit 60]``.
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from districting import rules  # noqa: E402
from districting.demo import copy_demo  # noqa: E402
from districting.intake import load_project  # noqa: E402
from districting.study import RunSettings, run  # noqa: E402
from districting.verify import check_plan, facts_of_problem  # noqa: E402


def _row(inputs, rs: RunSettings, label: str) -> tuple[str, dict]:
    start = time.perf_counter()
    out = run(inputs, rs)
    seconds = time.perf_counter() - start
    plan, p = out.plan, out.problem
    rides = widest = float("nan")
    if plan.feasible:
        findings = check_plan(facts_of_problem(p), plan.assignment)
        assert not findings, [f.message for f in findings]
        rides = rules.transported(p, plan.assignment).sum()
        shares = rules.group_shares(p, plan.assignment) - rules.district_shares(p)[:, :, None]
        widest = 100 * np.nanmax(np.abs(shares[:, :, plan.open_sites]))
    print(f"{rs.level:<11} {label:<16} {plan.status:<11} {seconds:8.1f} "
          f"{plan.objective:14,.0f} {plan.gap:8.2%} {rides:10,.0f} {widest:8.1f}", flush=True)
    least = float(p.demand[0][~(p.allowed & p.walk).any(axis=1)].sum())
    return plan.status, {"rides": rides, "least": least}


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--levels", default="middle,high")
    parser.add_argument("--time-limit", type=float, default=60.0)
    args = parser.parse_args(argv)
    with tempfile.TemporaryDirectory() as tmp:
        inputs = load_project(copy_demo(Path(tmp)))
        print(f"{'level':<11} {'rule':<16} {'status':<11} {'seconds':>8} {'objective':>14} "
              f"{'gap':>8} {'transport':>10} {'widest':>8}")
        for level in args.levels.split(","):
            base = RunSettings(level=level, time_limit=args.time_limit)
            _, off = _row(inputs, base, "off")
            _row(inputs, base.replace(keep_walkers=True), "keep_walkers")
            cap = float(np.floor((off["least"] + off["rides"]) / 2))
            _row(inputs, base.replace(max_transported=cap), f"max_transp {cap:,.0f}")
            _row(inputs, base.replace(group_band=15.0), "group band 15")
            _row(inputs, base.replace(group_band=6.0), "group band 6")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
