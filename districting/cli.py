"""The `districting` command: check, solve, options, verify, packet, demo (and serve, from ui/).

Each sub-command is a thin wrapper over the engine's public functions; all the work lives
in the modules it calls. Sub-commands from outside the engine (the workbench's ``serve``)
register through the ``districting.commands`` entry point, so this module never imports
the UI.
"""

from __future__ import annotations

import argparse
import sys
import time
from collections.abc import Sequence
from importlib.metadata import entry_points
from pathlib import Path

from . import DRAFT_NOTICE

__all__ = ["main"]


# ----------------------------------------------------------------------------- helpers
def _load(path: str):
    from .intake import ProjectError, load_project

    try:
        return load_project(path)
    except ProjectError as err:
        print(err.report.format(), file=sys.stderr)
        print(f"\n{path}: fix the errors above, then run again "
              f"(`districting check {path}` lists them).", file=sys.stderr)
        raise SystemExit(1) from None
    except FileNotFoundError as err:
        print(f"{path}: {err}", file=sys.stderr)
        raise SystemExit(1) from None


class Progress:
    """One status line per round on a terminal; silent when output is not a terminal."""

    def __init__(self, label: str, stream=None):
        self.stream = stream or sys.stderr
        self.live = self.stream.isatty()
        self.label = label

    def __call__(self, rnd) -> None:
        if not self.live:
            return
        best = "-" if rnd.objective == float("inf") else f"{rnd.objective:,.0f}"
        gap = "-" if rnd.gap == float("inf") else f"{100 * rnd.gap:.3f}%"
        self.stream.write(
            f"\r{self.label}: round {rnd.number}  best {best}  bound {rnd.bound:,.0f}  "
            f"gap {gap}  {rnd.seconds:.1f} s   "
        )
        self.stream.flush()

    def done(self) -> None:
        if self.live:
            self.stream.write("\n")
            self.stream.flush()


def plan_summary(outcome) -> str:
    """A few lines on a plan: status, travel, moves, schools out of band."""
    plan, prob = outcome.plan, outcome.problem
    if not plan.feasible:
        return f"  {outcome.level}: {plan.status}, no plan\n    " + plan.message.replace(
            "\n", "\n    ")
    m = outcome.metrics
    total = prob.demand[0].sum()
    oob = [outcome.site_ids[j] for j in range(prob.n_sites) if m.out_of_band[j]]
    opened = int(plan.open_sites.sum())
    lines = [
        f"  {outcome.level}: {plan.status}"
        + (f" (gap {100 * plan.gap:.3f}%)" if plan.gap == plan.gap else "")
        + f", {opened} schools open, {total:,.0f} students in {prob.years[0]}",
        f"    mean travel {m.overall_mean_distance / 1000:.2f} km, "
        f"longest {m.overall_max_distance / 1000:.2f} km; "
        f"{m.students_moved:,.0f} students ({m.units_moved} units) change school",
        f"    {outcome.travel_line}; rounds {plan.rounds}, cuts {plan.cuts}, "
        f"build {plan.build_seconds:.2f} s, solve {plan.solve_seconds:.2f} s",
    ]
    if oob:
        lines.append(f"    outside the utilization band in some year: {', '.join(oob)}")
    if plan.message:
        lines.append("    " + plan.message.replace("\n", "\n    "))
    return "\n".join(lines)


# ----------------------------------------------------------------------------- commands
def check_command(path: str | Path) -> int:
    """`districting check PROJECT.toml`: print the report and summary; 0 clean, 1 errors.

    Reads only: nothing is written, not even a cache.
    """
    from .intake import check_summary, validate_project

    inputs, report = validate_project(path, cache=False)
    print(report.format())
    if inputs is not None:
        print()
        print(check_summary(inputs))
    return 1 if report.has_errors else 0


def cmd_check(args) -> int:
    return check_command(args.project)


def _run_settings(args, level: str):
    from .study import RunSettings

    return RunSettings(
        level=level,
        plan_year=args.plan_year,
        max_utilization=args.max_util,
        min_utilization=args.min_util,
        stability_weight=args.stability_weight,
        max_distance=args.max_distance,
        gap=args.gap,
        time_limit=args.time_limit,
        solver=args.solver,
        travel=args.travel,
    )


def _solve_targets(args, inputs) -> dict[str, tuple[str, Path]]:
    """Level -> (option name, export folder), every check done before any solve or write.

    Refuses a second level under one option name, a name the store already has (without
    --overwrite), a damaged store, and an export folder that already holds files (without
    --overwrite). The folder is a slug of the name, checked to lie inside the output folder.
    """
    from .names import path_inside, slug
    from .outputs.store import check_option_name

    levels = list(inputs.settings.levels) if args.level == "all" else [args.level]
    out = Path(args.out) if args.out else inputs.settings.path.parent / "out"
    if not args.save:
        return {lv: (f"{lv}-latest", path_inside(out, slug(f"{lv}-latest"))) for lv in levels}
    if len(levels) > 1:
        raise ValueError(f"--save names one option, and this project has {len(levels)} "
                         f"levels; add --level ({', '.join(levels)})")
    name = check_option_name(inputs.settings.store, args.save, overwrite=args.overwrite)
    folder = path_inside(out, slug(name))
    if not args.overwrite and folder.exists() and any(folder.iterdir()):
        raise ValueError(f"{folder} already holds exports; choose another option name, or "
                         "add --overwrite to replace them")
    return {levels[0]: (name, folder)}


#: Command-line settings -> the [solve] keys whose schema they obey.
_FLAGS = {"max_util": "max_utilization", "min_util": "min_utilization",
          "stability_weight": "stability_weight", "gap": "gap", "time_limit": "time_limit"}


def check_flags(args) -> None:
    """Refuse a command-line setting the project file's schema would refuse (ValueError)."""
    from .intake.schema import check_value

    for attr, key in _FLAGS.items():
        value = getattr(args, attr, None)
        if value is None:
            continue
        flag = "--" + attr.replace("_", "-")
        _value, problem, fix = check_value("solve", key, value)
        if problem is not None:
            what = problem.split(", which is ", 1)[-1]  # "out of range (...)"
            raise ValueError(f"{flag} {value:g} is {what}; fix: "
                             f"{fix.replace(f'{key} = ', f'{flag} ')}")
    if getattr(args, "max_distance", None) is not None and not args.max_distance >= 0:
        raise ValueError(f"--max-distance {args.max_distance:g}: the longest travel is in "
                         "metres, 0 or more (0 = no limit)")


def cmd_solve(args) -> int:
    from .names import check_name
    from .outputs.exports import export_all
    from .outputs.store import save_option, tidy_store
    from .study import run

    if args.save:
        check_name(args.save)  # before the project is read: the rule needs no data
    check_flags(args)
    inputs = _load(args.project)
    tidy_store(inputs.settings.store)
    targets = _solve_targets(args, inputs)
    status = 0
    for level, (name, folder) in targets.items():
        progress = Progress(level)
        outcome = run(inputs, _run_settings(args, level), name=name if args.save else "",
                      progress=progress)
        progress.done()
        print(plan_summary(outcome))
        if not outcome.plan.feasible:
            status = 1
            continue
        if args.save:  # the store first: a name taken meanwhile leaves no exports behind
            save_option(inputs, outcome, name, overwrite=args.overwrite)
            print(f"    saved as option {name!r} in {inputs.settings.store}")
        files = export_all(outcome.renamed(name), folder)
        print(f"    wrote {len(files)} files to {folder}")
    return status


def cmd_options(args) -> int:
    from .outputs.store import delete_option, list_options, rename_option, repair_store, tidy_store

    inputs = _load(args.project)
    store = inputs.settings.store
    tidy_store(store)
    if args.repair:
        aside = repair_store(store)
        if aside is None:
            print(f"{store}: the option store is whole; nothing to repair")
        else:
            print(f"{store}: the damaged store is kept as {aside}; a new, empty store "
                  "is in its place (solve and save the options again)")
    if args.delete:
        delete_option(store, args.delete)
        print(f"deleted option {args.delete!r}")
    if args.rename:
        rename_option(store, args.rename[0], args.rename[1])
        print(f"renamed option {args.rename[0]!r} to {args.rename[1]!r}")
    infos = list_options(store)
    if not infos:
        print(f"no saved options in {store}")
        return 0
    print(f"{'name':24} {'level':11} {'created':20} {'status':10} {'moved':>8} {'mean km':>8}")
    for o in infos:
        print(f"{o.name[:24]:24} {o.level:11} {o.created[:19]:20} {o.status:10} "
              f"{o.students_moved:8,.0f} {o.mean_distance / 1000:8.2f}")
    return 0


def cmd_verify(args) -> int:
    """Check a saved option independently of the engine (districting.verify)."""
    from .outputs.store import load_option
    from .verify import check_plan, facts_of_outcome, report

    inputs = _load(args.project)
    outcome = load_option(inputs, args.option)
    facts = facts_of_outcome(outcome)
    findings = check_plan(facts, outcome.plan.assignment)
    print(report(findings, facts, label=f"option {outcome.name!r} ({outcome.level})"))
    return 1 if findings else 0


def cmd_packet(args) -> int:
    from .outputs.packet import write_packet
    from .outputs.store import load_option

    inputs = _load(args.project)
    names = [n.strip() for n in args.options.split(",") if n.strip()]
    outcomes = [load_option(inputs, n) for n in names]
    pdf = Path(args.out)
    written = write_packet(outcomes, pdf, png_folder=pdf.parent / f"{pdf.stem}-pages")
    print(f"wrote {pdf} ({len(written) - 1} pages, PNG copies in {pdf.stem}-pages/) "
          f"for options {', '.join(names)}")
    return 0


def cmd_demo(args) -> int:
    """Solve the demo town for every level, save two options, export, write the packets."""
    from .demo import copy_demo
    from .intake import check_summary, load_project
    from .outputs.exports import export_all
    from .outputs.packet import write_packet
    from .outputs.store import save_option
    from .study import RunSettings, run

    check_flags(args)
    out = Path(args.out).resolve()
    toml = copy_demo(out / "project")
    inputs = load_project(toml)
    print(f"{inputs.settings.name}: demo project copied to {toml.parent}")
    print(check_summary(inputs))
    started = time.perf_counter()
    # Two options a planner would bring to a hearing: shortest travel, and fewer moves.
    variants = [
        ("shortest-travel", {}),
        ("fewer-moves", {"stability_weight": args.stability_weight}),
    ]
    for level in inputs.settings.levels:
        outcomes = []
        for suffix, extra in variants:
            name = f"{level}-{suffix}"
            progress = Progress(name)
            rs = RunSettings(level=level, time_limit=args.time_limit, travel=args.travel,
                             **extra)
            outcome = run(inputs, rs, name=name, progress=progress)
            progress.done()
            print(f"option {name}:")
            print(plan_summary(outcome))
            if not outcome.plan.feasible:
                print(f"    no plan for {name}; see the message above", file=sys.stderr)
                return 1
            save_option(inputs, outcome, name, overwrite=True)
            export_all(outcome, out / name)
            outcomes.append(outcome)
        pdf = out / f"packet-{level}.pdf"
        written = write_packet(outcomes, pdf, png_folder=out / f"packet-{level}-pages")
        print(f"  hearing packet: {pdf} ({len(written) - 1} pages)")
    print(f"\nAll outputs in {out} ({time.perf_counter() - started:.1f} s).")
    print(DRAFT_NOTICE)
    return 0


# ----------------------------------------------------------------------------- parser
def _add_solve_options(p: argparse.ArgumentParser) -> None:
    p.add_argument("--plan-year", type=int, help="year the zones take effect")
    p.add_argument("--max-util", type=float, help="highest share of capacity, e.g. 1.0")
    p.add_argument("--min-util", type=float, help="lowest share of capacity, e.g. 0.7")
    p.add_argument("--stability-weight", type=float,
                   help="metres of travel charged per student moved from today's school")
    p.add_argument("--max-distance", type=float, help="longest allowed travel in metres")
    p.add_argument("--gap", type=float, help="relative optimality gap to prove, e.g. 1e-4")
    p.add_argument("--time-limit", type=float, help="seconds; the best plan found is kept")
    p.add_argument("--solver", help="'highs' (default) or any solver name Pyomo drives")
    _add_travel_option(p)


def _add_travel_option(p: argparse.ArgumentParser) -> None:
    from .travel.measures import MEASURES, WORDS

    p.add_argument("--travel", choices=MEASURES, help="how travel is measured: "
                   + "; ".join(f"{m}: {WORDS[m]}" for m in MEASURES)
                   + " (default: the project's [solve] travel)")


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="districting",
        description="Attendance-zone options for school district planning staff.",
        epilog="Results are decision support; the board decides under its policy and law.",
    )
    sub = parser.add_subparsers(dest="command", required=True)

    p = sub.add_parser("check", help="validate a project and print a summary")
    p.add_argument("project")
    p.set_defaults(func=cmd_check)

    p = sub.add_parser("solve", help="solve one level (or all) and write the plan")
    p.add_argument("project")
    p.add_argument("--level", default="all", help="elementary, middle, high, or all")
    p.add_argument("--save", metavar="NAME", help="save the plan as a named option")
    p.add_argument("--overwrite", action="store_true", help="replace an option of that name")
    p.add_argument("--out", help="folder for the exports (default: <project>/out)")
    _add_solve_options(p)
    p.set_defaults(func=cmd_solve)

    p = sub.add_parser("options", help="list, delete, rename saved options; repair the store")
    p.add_argument("project")
    p.add_argument("--delete", metavar="NAME")
    p.add_argument("--rename", nargs=2, metavar=("OLD", "NEW"))
    p.add_argument("--repair", action="store_true",
                   help="set a damaged option store aside and start a new, empty one")
    p.set_defaults(func=cmd_options)

    p = sub.add_parser("verify", help="check a saved option against every rule, independently")
    p.add_argument("project")
    p.add_argument("--option", required=True, metavar="NAME")
    p.set_defaults(func=cmd_verify)

    p = sub.add_parser("packet", help="write the hearing packet (PDF + PNG pages)")
    p.add_argument("project")
    p.add_argument("--options", required=True, help="comma-separated option names")
    p.add_argument("--out", default="packet.pdf")
    p.set_defaults(func=cmd_packet)

    p = sub.add_parser("demo", help="solve the bundled demo town and write everything")
    p.add_argument("--out", default="out/demo", help="output folder (default out/demo)")
    p.add_argument("--stability-weight", type=float, default=3000.0,
                   help="weight of the 'fewer-moves' option (metres per student moved)")
    p.add_argument("--time-limit", type=float, default=60.0,
                   help="seconds per solve; the best plan found is kept, with its gap")
    _add_travel_option(p)
    p.set_defaults(func=cmd_demo)

    for ep in entry_points(group="districting.commands"):
        try:
            ep.load()(sub)
        except ImportError as err:  # the workbench's extras are missing: say so, go on
            reason = f"{ep.name} is unavailable here: {err}"
            q = sub.add_parser(ep.name, help=reason)
            q.set_defaults(func=lambda _args, why=reason: print(why, file=sys.stderr) or 1)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    args = build_parser().parse_args(argv)
    try:
        return int(args.func(args) or 0)
    except KeyboardInterrupt:
        print("stopped", file=sys.stderr)
        return 130
    except ValueError as err:  # bad settings from the command line, named in the message
        print(f"districting {args.command}: {err}", file=sys.stderr)
        return 2


if __name__ == "__main__":
    raise SystemExit(main())
