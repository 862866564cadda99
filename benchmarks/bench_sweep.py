"""A sweep on 2 Dask workers against the same settings solved one after another.

On a copy of the demo town, four settings of one level (the high level by default: its
solves are the quickest to prove; stability weights 0, 1500, 3000 and 6000 m) are solved
and saved twice, each time into a fresh option store:

- one after another in this process (``study.run`` then ``save_option``, as
  ``districting solve --save`` does);
- as a sweep on a LocalCluster of ``--workers`` processes (``districting.sweep``): the
  cluster's start-up is timed apart, then the sweep (inputs sent to the workers, the
  solves, each option saved by this process).

Prints both times, their ratio (the target is 0.6 or less on 2 workers) and the start-up
overhead. Speed is measured here, never asserted in tests.

Usage: ``.venv/bin/python benchmarks/bench_sweep.py [--level high] [--time-limit 20]
[--workers 2]``.
"""

from __future__ import annotations

import argparse
import shutil
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

from districting.demo import copy_demo  # noqa: E402
from districting.intake import load_project  # noqa: E402
from districting.outputs.store import save_option  # noqa: E402
from districting.study import run  # noqa: E402
from districting.sweep.cluster import open_client  # noqa: E402
from districting.sweep.grid import settings_grid  # noqa: E402
from districting.sweep.runner import plan_jobs, run_sweep  # noqa: E402

WEIGHTS = (0.0, 1500.0, 3000.0, 6000.0)


def fresh_inputs(folder: Path):
    """The demo project copied into ``folder``, read with an empty option store."""
    project = copy_demo(folder)
    inputs = load_project(project)
    Path(inputs.settings.store).unlink(missing_ok=True)
    return inputs


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--level", default="high")
    parser.add_argument("--time-limit", type=float, default=20.0)
    parser.add_argument("--workers", type=int, default=2)
    args = parser.parse_args()
    tmp = Path(tempfile.mkdtemp(prefix="bench-sweep-"))
    try:
        inputs = fresh_inputs(tmp / "one-by-one")
        grid = settings_grid(inputs, args.level, stability_weights=WEIGHTS)
        todo, _ = plan_jobs(inputs, args.level, grid, "Bench", time_limit=args.time_limit)
        for job in todo:  # the travel matrix once, as the sweep does, so both start alike
            inputs.travel_metres(job.settings.travel)
        started = time.perf_counter()
        for job in todo:
            outcome = run(inputs, job.settings, name=job.name)
            save_option(inputs, outcome, job.name)
            print(f"  one by one: {job.name}: {outcome.plan.status}, "
                  f"gap {outcome.plan.gap:.2e}, {time.perf_counter() - started:.1f} s so far")
        serial = time.perf_counter() - started

        inputs = fresh_inputs(tmp / "sweep")
        todo, done = plan_jobs(inputs, args.level, grid, "Bench", time_limit=args.time_limit)
        started = time.perf_counter()
        with open_client(workers=args.workers) as client:
            client.wait_for_workers(args.workers)
            startup = time.perf_counter() - started
            started = time.perf_counter()
            report = run_sweep(client, inputs, todo, done,
                               say=lambda line: print(f"  sweep: {line}"))
            swept = time.perf_counter() - started
            solves = [r.seconds for r in report.results]
    finally:
        shutil.rmtree(tmp, ignore_errors=True)
    print(f"\n{len(todo)} settings of the demo's {args.level} level, time limit "
          f"{args.time_limit:g} s each")
    print(f"one after another:        {serial:6.1f} s")
    print(f"sweep on {args.workers} workers:        {swept:6.1f} s "
          f"(solved {report.solved}, failed {len(report.failed)})")
    print(f"  (each solve on a worker took {', '.join(f'{x:.1f}' for x in solves)} s)")
    print(f"ratio sweep / one by one: {swept / serial:6.2f}  (target <= 0.6)")
    print(f"cluster start-up:         {startup:6.1f} s (not in the sweep's time; with it the "
          f"ratio is {(swept + startup) / serial:.2f})")


if __name__ == "__main__":
    main()
