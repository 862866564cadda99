"""How much the Lagrangian zone bound lifts the LP bound, per demo level and option.

For each travel measure and option (shortest travel; fewer moves, stability weight 3000) on
the levels given, prints: the assignment LP (no contiguity), the LP with root separator cuts
(``HighsRoute.strengthen``, 20 s), the Lagrangian bound over connected zones
(:mod:`districting.engine.zone_bound`) at the plain LP's duals and at the cut LP's duals,
the seconds each took, and how many sites' pricing the clock cut short. Speed is measured
here, never asserted in tests.

Usage: ``.venv/bin/python benchmarks/bench_zone_bound.py [--levels elementary]
[--travel straight-line streets] [--time-limit 60]``.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parent.parent
sys.path[:0] = [str(ROOT), str(ROOT / "benchmarks")]

from demo_cases import demo_cases  # noqa: E402

from districting.engine.connectivity import UnitGraph, free_units  # noqa: E402
from districting.engine.highs_route import HighsRoute  # noqa: E402
from districting.engine.zone_bound import decomposes, zone_bound  # noqa: E402


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--levels", nargs="+", default=["elementary"])
    ap.add_argument("--travel", nargs="+", default=["straight-line", "streets"])
    ap.add_argument("--time-limit", type=float, default=60.0,
                    help="seconds for each Lagrangian bound (all sites together)")
    ap.add_argument("--data", default=str(ROOT / "data" / "demo"))
    args = ap.parse_args()
    print(f"{'travel':14} {'case':30} {'LP':>13} {'cut LP':>13} {'cut s':>6} "
          f"{'L at LP':>13} {'s':>6} {'short':>5} {'L at cut LP':>13} {'s':>6} {'short':>5}",
          flush=True)
    for travel, level, label, problem in demo_cases(args.data, args.travel, args.levels):
        case = f"{level}, {label}"
        if not decomposes(problem):
            print(f"{travel:14} {case:30} the rows do not split by site", flush=True)
            continue
        graph = UnitGraph.of(problem)
        passable = free_units(problem)
        route = HighsRoute(problem, passable if passable.any() else None)
        lp = route.relaxation()[0]
        plain = route.unit_duals()
        t0 = time.perf_counter()
        route.strengthen(graph, passable if passable.any() else None,
                         time.monotonic() + 20.0, np.inf, keep_share=0.0)
        cut_s = time.perf_counter() - t0
        cut_lp, cut = route.strongest()[0], route.unit_duals()
        at_lp = zone_bound(problem, graph, plain, time_limit=args.time_limit)
        at_cut = zone_bound(problem, graph, cut, time_limit=args.time_limit)
        print(f"{travel:14} {case:30} {lp:13,.0f} {cut_lp:13,.0f} {cut_s:6.1f} "
              f"{at_lp.value:13,.0f} {at_lp.seconds:6.1f} {at_lp.cut_short:5d} "
              f"{at_cut.value:13,.0f} {at_cut.seconds:6.1f} {at_cut.cut_short:5d}",
              flush=True)


if __name__ == "__main__":
    main()
