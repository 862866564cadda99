"""`districting sweep PROJECT --level LEVEL ...`: every combination of settings, saved and
charted.

Registered by :func:`add_sweep_parser` from ``districting.cli``, which hands over its
project loader and its check of solve flags, so both read exactly as ``solve``'s do. The
heavy imports (the engine, Dask) happen only when the command runs.
"""

from __future__ import annotations

import argparse
import contextlib
import sys
from collections.abc import Callable
from pathlib import Path
from types import SimpleNamespace

__all__ = ["add_sweep_parser", "number_list"]


def number_list(flag: str) -> Callable[[str], list[float]]:
    """An argparse type: '0,1500,3000' -> [0.0, 1500.0, 3000.0], refused in words."""
    def parse(text: str) -> list[float]:
        try:
            values = [float(v) for v in text.split(",") if v.strip()]
        except ValueError:
            raise argparse.ArgumentTypeError(
                f"{flag} {text!r}: write numbers separated by commas, e.g. 0,1500,3000"
            ) from None
        if not values:
            raise argparse.ArgumentTypeError(f"{flag} {text!r}: give at least one number")
        return values
    return parse


def _check_lists(args, check_flags: Callable) -> None:
    """Every value of every list obeys the same rule as ``solve``'s flag (ValueError)."""
    for attr in ("stability_weight", "max_util", "min_util"):
        for value in getattr(args, attr) or ():
            check_flags(SimpleNamespace(**{attr: value}))
    check_flags(SimpleNamespace(time_limit=args.time_limit, gap=args.gap))
    if args.workers is not None and args.workers < 1:
        raise ValueError(f"--workers {args.workers}: give 1 or more worker processes")


def cmd_sweep(args, load: Callable, check_flags: Callable) -> int:
    from ..names import check_name
    from ..travel.measures import measure_words
    from .chart import write_chart
    from .cluster import ClusterUnreachable, open_client
    from .grid import parse_scenario, settings_grid
    from .runner import plan_jobs, run_sweep
    from .table import default_folder, write_table

    _check_lists(args, check_flags)
    prefix = check_name(args.save or f"{args.level} sweep", what="option prefix")
    scenarios = [parse_scenario(text) for text in args.scenario or ()]
    with contextlib.ExitStack() as stack:
        try:  # an existing cluster first: a wrong address is told before anything is read
            client = (stack.enter_context(open_client(scheduler=args.scheduler))
                      if args.scheduler else None)
            inputs = load(args.project)
            grid = settings_grid(inputs, args.level, stability_weights=args.stability_weight,
                                 max_utils=args.max_util, min_utils=args.min_util,
                                 scenarios=scenarios)
            fixed = {k: v for k, v in {"time_limit": args.time_limit, "gap": args.gap,
                                       "travel": args.travel}.items() if v is not None}
            todo, done = plan_jobs(inputs, args.level, grid, prefix,
                                   overwrite=args.overwrite, **fixed)
            print(f"{inputs.settings.name}, {args.level}: {len(grid)} combinations of "
                  f"settings, {len(todo)} to solve")
            if todo and client is None:
                client = stack.enter_context(open_client(workers=args.workers))
        except ClusterUnreachable as err:
            print(f"districting sweep: {err}", file=sys.stderr)
            return 1
        if client is not None:
            print(f"running on {len(client.scheduler_info()['workers'])} Dask workers "
                  f"({client.scheduler.address})")
        report = run_sweep(client, inputs, todo, done)
    out = Path(args.out) if args.out else default_folder(inputs)
    measure = next(job.settings.travel for job in [*todo, *done])
    travel = measure_words(measure, table=inputs.travel is not None)
    paths = write_table(report.results, inputs, args.level, out, travel)
    title = (f"{inputs.settings.name}, {args.level}: students moved against mean travel "
             f"({len(report.results)} options)")
    write_chart(paths["sheet"], paths["png"], title)
    print(f"solved {report.solved}, already saved {report.resumed}; options saved in "
          f"{inputs.settings.store}")
    print(f"chart: {paths['png']}\ntable: {paths['csv']} (about: {paths['about'].name})")
    for line in report.failed:
        print(f"  not done: {line}", file=sys.stderr)
    return 1 if report.failed else 0


def add_sweep_parser(sub, *, load: Callable, check_flags: Callable,
                     travel_option: Callable) -> None:
    """Add `sweep` to the command's sub-parsers."""
    p = sub.add_parser(
        "sweep", help="solve a level for every combination of settings; chart the trade-off",
        description="Solve one level for every combination of the listed settings on a Dask "
                    "cluster (this machine's cores by default), save each as a named option "
                    "and write the trade-off chart (PNG) and table (CSV): students moved "
                    "against mean travel. Combinations already saved with the same settings "
                    "are not solved again, so a stopped sweep resumes.")
    p.add_argument("project", metavar="PROJECT",
                   help="the project file (PROJECT.toml), or a folder holding project.toml")
    p.add_argument("--level", required=True, help="the school level to sweep (e.g. elementary)")
    p.add_argument("--stability-weight", type=number_list("--stability-weight"),
                   metavar="METRES,...", help="charges per student moved, in metres of travel, "
                   "e.g. 0,1500,3000 (default: the project's stability_weight)")
    p.add_argument("--max-util", type=number_list("--max-util"), metavar="SHARE,...",
                   help="limits of the band as shares of capacity, e.g. 0.9,1.0")
    p.add_argument("--min-util", type=number_list("--min-util"), metavar="SHARE,...",
                   help="floors of the band as shares of capacity, e.g. 0.5,0.6")
    p.add_argument("--scenario", action="append", metavar='"NAME: SITE=status,..."',
                   help="site statuses to try (repeat for each scenario), e.g. "
                        '--scenario "E14 opens: E14=new" --scenario "E14 shut: E14=closed"; '
                        "statuses: open, closing, new, candidate, closed "
                        "(default: the project's statuses)")
    p.add_argument("--time-limit", type=float, metavar="SECONDS",
                   help="seconds per combination; the best plan found is kept")
    p.add_argument("--gap", type=float, metavar="SHARE",
                   help="how close to the best possible each plan must be proven")
    travel_option(p)
    p.add_argument("--save", metavar="PREFIX",
                   help="options are named PREFIX and the values, e.g. 'Sweep – moves 1500 – "
                        "band 60–100' (default: '<level> sweep')")
    p.add_argument("--overwrite", action="store_true",
                   help="solve again and replace options of these names saved with other "
                        "settings")
    p.add_argument("--out", metavar="FOLDER",
                   help="folder for the chart and table (default: out/ beside the project)")
    where = p.add_mutually_exclusive_group()
    where.add_argument("--workers", type=int, metavar="N",
                       help="worker processes on this machine (default: one per core)")
    where.add_argument("--scheduler", metavar="ADDRESS",
                       help="run on an existing Dask cluster, e.g. tcp://10.0.0.5:8786 "
                            "(its workers need districting installed)")
    p.set_defaults(func=lambda args: cmd_sweep(args, load, check_flags))
