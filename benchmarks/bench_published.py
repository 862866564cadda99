"""Published capacitated and uncapacitated p-median instances with known optima: the
engine's plan, bound and gap against the published optimum, per instance.

Sources (data and citations in ../shared/data/benchmarks/SOURCES.md, copied to
tests/data): Osman & Christofides (1994) instances 11-20; Lorena & Senne (2004)
SJC2-SJC4b; Beasley (1985) OR-Library pmed6, pmed11, pmed16, pmed21, pmed26; Osman &
Christofides 8 and 10 (the slowest of 1-10, left out of the tests).

    .venv/bin/python benchmarks/bench_published.py [--time-limit 90] [NAME ...]

Prints one line per instance (status, plan cost, bound, published optimum, plan above the
optimum, seconds). A measurement, not a test: tests/engine/test_benchmarks.py holds a sample.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np

sys.path[:0] = [str(Path(__file__).resolve().parents[1] / "tests" / "engine")]

from test_benchmarks import (  # noqa: E402
    DATA,
    capacitated,
    osman_instance,
    pmed_optimum,
    read_pmed,
    sjc_instance,
)

from districting import Problem, solve  # noqa: E402

NAMES = (["osman8", "osman10", "pmed6"] + [f"osman{k}" for k in range(11, 21)]
         + ["SJC2", "SJC3a", "SJC3b", "SJC4a", "SJC4b", "pmed11", "pmed16", "pmed21", "pmed26"])


def instance(name: str):
    """(problem, distance matrix, published optimum)."""
    if name.startswith("osman"):
        dist, dem, p, q, opt = osman_instance(int(name[5:]))
        return capacitated(dist, dem, p, q), dist, opt
    if name.startswith("SJC"):
        dist, dem, p, cap, opt = sjc_instance(name)
        return capacitated(dist, dem, p, cap), dist, opt
    cost, p = read_pmed(DATA / "orlib_pmed" / f"{name}.txt")
    return Problem.from_arrays(cost, np.ones(len(cost)), p=p), cost, float(pmed_optimum(name))


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("names", nargs="*", default=NAMES)
    ap.add_argument("--time-limit", type=float, default=90.0)
    args = ap.parse_args()
    print(f"{'instance':<9} {'status':<11} {'plan':>11} {'bound':>11} {'optimum':>11} "
          f"{'above opt':>9} {'gap':>7} {'s':>6}")
    for name in args.names:
        problem, dist, opt = instance(name)
        t = time.monotonic()
        plan = solve(problem, gap=1e-7, time_limit=args.time_limit)
        s = time.monotonic() - t
        if not plan.feasible:
            print(f"{name:<9} {plan.status:<11} {'no plan':>11} {plan.bound:>11.1f} "
                  f"{opt:>11.1f} {'':>9} {'':>7} {s:>6.1f}")
            continue
        cost = float(dist[np.arange(len(dist)), plan.assignment].sum())
        print(f"{name:<9} {plan.status:<11} {cost:>11.1f} {plan.bound:>11.1f} {opt:>11.1f} "
              f"{100 * (cost / opt - 1):>8.2f}% {100 * plan.gap:>6.2f}% {s:>6.1f}", flush=True)


if __name__ == "__main__":
    main()
