"""The zone bound by column generation (engine.columns) on published p-median instances,
beside the engine's own bound and the published optimum.

Per instance: the engine runs first in a child process (``--engine-limit`` seconds; its
plan is the column generation's start, as the engine always has one, and its bound is the
comparison; a child still running 30 s after its limit is stopped: the engine's HiGHS MIP
overran its limit by minutes on SJC4a, 2026-12-04, and the engine's own first plan
without contiguity, ``greedy.median_start``, is the start instead), then ``column_bound``
runs with ``--time-limit``. Instances and optima as in
bench_published.py (Osman & Christofides 1994; Lorena & Senne 2004; Beasley 1985).

    .venv/bin/python benchmarks/bench_columns.py [--time-limit 60] [--engine-limit 20] [NAME ...]

Columns: build s (master, start columns, the assignment LP's duals), CG s (all of it,
price-and-branch included), rounds (master LP solves), exact pricing passes, columns, the
master LP value, the Lagrangian bound, the price-and-branch plan, the optimum, the engine's
bound and plan, and the gap of each bound below the optimum. A measurement, not a test.
"""

from __future__ import annotations

import argparse
import multiprocessing as mp
import queue
import sys
import time
from pathlib import Path

sys.path[:0] = [str(Path(__file__).resolve().parent)]

from bench_published import instance  # noqa: E402

from districting import solve  # noqa: E402
from districting.engine.columns import column_bound  # noqa: E402
from districting.engine.connectivity import plan_checks  # noqa: E402
from districting.engine.greedy import median_start  # noqa: E402

NAMES = ([f"osman{k}" for k in range(1, 21)]
         + ["SJC1", "SJC2", "SJC3a", "SJC3b", "SJC4a", "SJC4b", "pmed16"])


def _pct(bound: float, opt: float) -> str:
    return f"{100 * (1 - bound / opt):.2f}%" if opt and bound > -1e300 else "-"


def _engine(name: str, limit: float, out) -> None:
    problem, _dist, _opt = instance(name)
    plan = solve(problem, gap=1e-7, time_limit=limit)
    out.put((plan.assignment if plan.feasible else None, plan.objective, plan.bound))


def engine_run(name: str, limit: float) -> tuple:
    """(plan or None, its cost, the engine's bound), or (None, nan, nan) when it hung."""
    spawn = mp.get_context("spawn")  # HiGHS's thread pool does not survive a fork
    out = spawn.Queue()
    child = spawn.Process(target=_engine, args=(name, limit, out))
    child.start()
    try:  # read before joining: a child holding queued data does not end until it is read
        result = out.get(timeout=limit + 30)
    except queue.Empty:
        result = (None, float("nan"), float("nan"))
    child.join(5)
    if child.is_alive():
        child.terminate()
        child.join()
    return result


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("names", nargs="*", default=NAMES)
    ap.add_argument("--time-limit", type=float, default=60.0)
    ap.add_argument("--engine-limit", type=float, default=20.0)
    args = ap.parse_args()
    head = (f"{'instance':<9} {'build s':>7} {'CG s':>6} {'rounds':>6} {'exact':>5} "
            f"{'columns':>7} {'master LP':>11} {'CG bound':>11} {'P&B plan':>11} "
            f"{'optimum':>11} {'engine bd':>11} {'engine plan':>11} {'CG gap':>7} "
            f"{'eng gap':>7}")
    print(head, flush=True)
    for name in args.names:
        problem, _dist, opt = instance(name)
        start, eng_plan, eng_bound = engine_run(name, args.engine_limit)
        note = ""
        if start is None:
            start, note = median_start(problem, None, 2.0), " (engine hung: greedy start)"
            if start is not None and plan_checks(problem, start):
                start = None
        t = time.monotonic()
        res = column_bound(problem, start=start, time_limit=args.time_limit)
        s = time.monotonic() - t
        if res is None:
            print(f"{name:<9} (the master cannot state this problem)")
            continue
        print(f"{name:<9} {res.build_seconds:>7.1f} {s:>6.1f} {res.rounds:>6} "
              f"{res.exact_passes:>5} {res.columns:>7} {res.master_lp:>11.2f} "
              f"{res.bound:>11.2f} {res.plan_cost:>11.2f} {opt:>11.2f} {eng_bound:>11.2f} "
              f"{eng_plan:>11.2f} {_pct(res.bound, opt):>7} {_pct(eng_bound, opt):>7}{note}",
              flush=True)


if __name__ == "__main__":
    main()
