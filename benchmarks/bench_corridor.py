"""Units without students kept out of the MIP: the rerun after a lock and small scattered
grid towns, where round answers have pieces joined to their schools only through such
units (``engine.cuts.corridor``). Prints status, seconds and gap per case; speed is
measured here, never asserted in tests.

``.venv/bin/python benchmarks/bench_corridor.py [--time-limit S] [--rerun-limit S]
[--only rerun|grids]``
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path[:0] = [str(HERE), str(HERE.parent)]

from bench_engine import run_resolve  # noqa: E402
from towns import scattered_grid  # noqa: E402

from districting import solve  # noqa: E402


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--time-limit", type=float, default=30.0, help="per grid town, s")
    ap.add_argument("--rerun-limit", type=float, default=10.0,
                    help="first solve and rerun at 2,000 x 25, s each")
    ap.add_argument("--charge", type=float, default=3000.0,
                    help="metres per student moved against the plan before the lock")
    ap.add_argument("--only", choices=["rerun", "grids"], default=None, help="one part only")
    args = ap.parse_args(argv)
    if args.only != "grids":
        rerun_rows(args)
    if args.only != "rerun":
        grid_rows(args)
    return 0


def rerun_rows(args) -> None:
    print("Rerun after locking 5 border units, 2,000 x 25 (charge "
          f"{args.charge:,.0f} m per student moved; {args.rerun_limit:g} s each solve)")
    print(f"{'seed':>4} {'empty':>5} {'status':>10} {'rerun s':>8} {'gap %':>8}")
    for seed, empty in ((1, 0.3), (2, 0.68), (3, 0.3)):
        r = run_resolve(2000, 25, seed, empty, 1e-4, args.rerun_limit, args.charge)
        print(f"{seed:>4} {empty:>5.2f} {r['status']:>10} {r['resolve_s']:>8.2f} "
              f"{r['gap']:>8.4f}", flush=True)


def grid_rows(args) -> None:
    print(f"\nScattered grid towns, 12 x 10 units, 6 schools, 45% without students "
          f"({args.time_limit:g} s)")
    print(f"{'seed':>4} {'status':>10} {'s':>6} {'objective':>10} {'gap %':>8}")
    for seed in (2, 5, 6, 7, 8, 9, 13, 16):
        problem = scattered_grid(12, 10, 6, 0.45, seed)
        t0 = time.perf_counter()
        plan = solve(problem, gap=1e-4, time_limit=args.time_limit)
        print(f"{seed:>4} {plan.status:>10} {time.perf_counter() - t0:>6.1f} "
              f"{plan.objective:>10.2f} {plan.gap * 100:>8.4f}", flush=True)


if __name__ == "__main__":
    raise SystemExit(main())
