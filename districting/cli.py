"""The `districting` command: check, solve, options, verify, packet, export, lock, unlock,
forbid, unforbid, demo (and serve, from ui/).

Each sub-command is a thin wrapper over the engine's public functions; all the work lives
in the modules it calls. Sub-commands from outside the engine (the workbench's ``serve``)
register through the ``districting.commands`` entry point, so this module never imports
the UI.
"""

from __future__ import annotations

import argparse
import functools
import json
import logging
import sys
import time
from collections.abc import Sequence
from importlib.metadata import entry_points
from pathlib import Path

from . import DRAFT_NOTICE
from .cli_options import (
    add_edit_options,
    add_feeder_options,
    add_practice_options,
    edit_fields,
    feeder_fields,
)

__all__ = ["main"]

#: Solver detail (rounds, cuts, bound) goes to this log, never to the summary people read.
_log = logging.getLogger("districting")


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
        keep_walkers=args.keep_walkers,
        max_transported=args.max_transported,
        group_band=args.group_band,
        transport_charge=args.transport_charge,
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
    out = _out_folder(args, inputs)
    if not args.save:
        return {lv: (f"{lv}-latest", path_inside(out, slug(f"{lv}-latest"))) for lv in levels}
    if len(levels) > 1:
        raise ValueError(f"--save names one option, and this project has {len(levels)} "
                         f"levels; add --level ({', '.join(levels)})")
    name = check_option_name(inputs.settings.store, args.save, overwrite=args.overwrite)
    return {levels[0]: (name, export_folder(out, name, args.overwrite))}


def export_folder(out: Path, name: str, overwrite: bool) -> Path:
    """The export folder of an option (a slug of its name inside ``out``), refused when it
    already holds files and ``overwrite`` is not given."""
    from .names import path_inside, slug

    folder = path_inside(out, slug(name))
    if not overwrite and folder.exists() and any(folder.iterdir()):
        raise ValueError(f"{folder} already holds exports; choose another option name or "
                         "folder, or add --overwrite to replace them")
    return folder


def _out_folder(args, inputs) -> Path:
    return Path(args.out) if args.out else inputs.settings.path.parent / "out"


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
    from .outputs.console import Progress, plan_summary, solve_record
    from .outputs.exports import export_all
    from .outputs.store import save_option, tidy_store
    from .study import run

    if args.save:
        check_name(args.save)  # before the project is read: the rule needs no data
    check_flags(args)
    inputs = _load(args.project)
    tidy_store(inputs.settings.store)
    edit, start = edit_fields(args, inputs)
    targets = _solve_targets(args, inputs)
    # with --json, stdout holds one JSON object per level and nothing else
    say = functools.partial(print, file=sys.stderr) if args.json else print
    status = 0
    feeders = {level: feeder_fields(args, inputs, level) for level in targets}
    for level, (name, folder) in targets.items():
        progress = Progress(level)
        outcome = run(inputs, _run_settings(args, level).replace(**feeders[level], **edit),
                      name=name if args.save else "", progress=progress, previous=start)
        progress.done()
        say(plan_summary(outcome))
        if args.json:
            print(json.dumps(solve_record(outcome)), flush=True)
        if not outcome.plan.feasible:
            status = 1
            continue
        if args.save:  # the store first: a name taken meanwhile leaves no exports behind
            save_option(inputs, outcome, name, overwrite=args.overwrite)
            say(f"    saved as option {name!r} in {inputs.settings.store}")
        files = export_all(outcome.renamed(name), folder)
        say(f"    wrote {len(files)} files to {folder}")
    return status


def cmd_options(args) -> int:
    from .outputs.store import delete_option, list_options, rename_option, repair_store, tidy_store
    from .outputs.wording import status_words_of

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
    print(f"{'name':24} {'level':11} {'created (UTC)':20} {'students moved':>14} "
          f"{'mean km':>8}  status")
    for o in infos:
        print(f"{o.name[:24]:24} {o.level:11} {o.created[:19].replace('T', ' '):20} "
              f"{o.students_moved:14,.0f} {o.mean_distance / 1000:8.2f}  "
              f"{status_words_of(o.status, o.gap)}")
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
    extra = []
    if args.sweep:  # the level's latest sweep chart, as the last page
        from .sweep.page import sweep_page_maker
        extra.append(sweep_page_maker(inputs, outcomes[0].level))
    written = write_packet(outcomes, pdf, png_folder=pdf.parent / f"{pdf.stem}-pages",
                           extra_pages=extra)
    print(f"wrote {pdf} ({len(written) - 1} pages, PNG copies in {pdf.stem}-pages/) "
          f"for options {', '.join(names)}")
    return 0


def cmd_demo(args) -> int:
    """Solve the demo town for every level, save two options, export, write the packets."""
    from .demo import copy_demo
    from .intake import check_summary, load_project
    from .outputs.console import Progress, plan_summary
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


def cmd_export(args) -> int:
    """Write the exports of a saved option again, without solving."""
    from .names import check_name
    from .outputs.exports import export_all
    from .outputs.store import load_option

    name = check_name(args.option)
    inputs = _load(args.project)
    folder = export_folder(_out_folder(args, inputs), name, args.overwrite)
    outcome = load_option(inputs, name)
    files = export_all(outcome.renamed(name), folder)
    print(f"option {name!r} ({outcome.level}): wrote {len(files)} files to {folder}")
    return 0


def _edit(args, action) -> int:
    """Run a lock/forbid edit and print what it did; a refused edit exits with 1."""
    from .locks import EditRefused

    try:
        edit = action()
    except EditRefused as err:
        print(f"districting {args.command}: {err}", file=sys.stderr)
        return 1
    for line in edit.changed + edit.unchanged:
        print(line)
    print(f"wrote {edit.path}" if edit.wrote else f"nothing to change in {edit.path}")
    return 0


def cmd_lock(args) -> int:
    from .locks import add_entries

    return _edit(args, lambda: add_entries(args.project, "locks", args.level, args.units,
                                           args.school))


def cmd_forbid(args) -> int:
    from .locks import add_entries

    return _edit(args, lambda: add_entries(args.project, "forbids", args.level, args.units,
                                           args.school))


def cmd_unlock(args) -> int:
    from .locks import remove_entries

    return _edit(args, lambda: remove_entries(args.project, "locks", args.level, args.units))


def cmd_unforbid(args) -> int:
    from .locks import remove_entries

    return _edit(args, lambda: remove_entries(args.project, "forbids", args.level, args.units,
                                              args.school))


# ----------------------------------------------------------------------------- parser
def _add_solve_options(p: argparse.ArgumentParser) -> None:
    p.add_argument("--details", action="store_true",
                   help="also print the solver's own account of each plan (rounds, cuts, "
                        "lower bound, times) for technical review")
    p.add_argument("--plan-year", type=int, metavar="YEAR",
                   help="the year the new zones take effect, one of the projected years "
                        "(default: the project's plan_year)")
    p.add_argument("--max-util", type=float, metavar="SHARE",
                   help="most students a school may hold, as a share of its capacity: "
                        "0.9 for 90%% (default: the project's max_utilization)")
    p.add_argument("--min-util", type=float, metavar="SHARE",
                   help="fewest students an open school must hold, as a share of its "
                        "capacity: 0.6 for 60%% (default: the project's min_utilization)")
    p.add_argument("--stability-weight", type=float, metavar="METRES",
                   help="metres of travel charged for each student moved away from "
                        "today's school: higher keeps more students where they are (0: none)")
    p.add_argument("--max-distance", type=float, metavar="METRES",
                   help="longest trip allowed from a unit to its school, in metres "
                        "(0: no limit)")
    p.add_argument("--gap", type=float, metavar="SHARE",
                   help="how close to the best possible plan the answer must be proven, as "
                        "a share: 0.001 for 0.1%% (default: the project's gap)")
    p.add_argument("--time-limit", type=float, metavar="SECONDS",
                   help="seconds per level; at the limit the best valid plan found is kept "
                        "and says how close to the best possible it is")
    p.add_argument("--solver", help="'highs' (default), 'scip-tree' (one SCIP branch-and-cut "
                   "tree, opt-in) or any solver name Pyomo drives")
    _add_travel_option(p)
    add_practice_options(p)


def _add_travel_option(p: argparse.ArgumentParser) -> None:
    from .travel.measures import MEASURES, WORDS

    p.add_argument("--travel", choices=MEASURES, help="how travel is measured: "
                   + "; ".join(f"{m}: {WORDS[m]}" for m in MEASURES)
                   + " (default: the project's [solve] travel)")


def _project_arg(p: argparse.ArgumentParser) -> None:
    p.add_argument("project", metavar="PROJECT",
                   help="the project file (PROJECT.toml), or a folder holding project.toml")


def _edit_args(p: argparse.ArgumentParser, school: str | None) -> None:
    _project_arg(p)
    p.add_argument("--level", required=True,
                   help="the school level, as named in the project (e.g. elementary)")
    p.add_argument("units", nargs="+", metavar="UNIT",
                   help="planning unit ids, as in the units layer's id column")
    if school is not None:
        p.add_argument("--school", required=school == "required", metavar="SITE",
                       help="the school's site id, as in the sites layer's id column"
                            + (" (default: every school)" if school == "optional" else ""))


_EXAMPLES = """\
examples:
  districting check town/                # a folder: checks town/project.toml
  districting solve town/ --level elementary --save "Option A" --time-limit 120
  districting lock town/ --level elementary U0412 U0413 --school E07
  districting export town/ --option "Option A" --out exports
  districting packet town/ --options "Option A,Option B" --out packet.pdf

Distances are in metres, times in seconds, shares of capacity as 0.9 for 90%.
Results are decision support; the board decides under its policy and law.
"""


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="districting",
        description="Attendance-zone options for school district planning staff: check a "
                    "project, solve a level, lock units, save, export and print options.",
        epilog=_EXAMPLES, formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    sub = parser.add_subparsers(dest="command", required=True, metavar="COMMAND")

    p = sub.add_parser("check", help="validate a project and print a summary",
                       description="Read every layer the project names and report every "
                                   "problem at once (file, row or unit, and the fix). "
                                   "Writes nothing.")
    _project_arg(p)
    p.set_defaults(func=cmd_check)

    p = sub.add_parser("solve", help="solve one level (or all) and write the plan",
                       description="Compute new zones for a level, print a summary and write "
                                   "the exports (GeoPackage, GeoJSON, Shapefile, CSV).")
    _project_arg(p)
    p.add_argument("--level", default="all",
                   help="the school level to solve (e.g. elementary), or all (default)")
    p.add_argument("--save", metavar="NAME",
                   help="save the plan as a named option in the project's option store")
    p.add_argument("--overwrite", action="store_true",
                   help="replace an option of that name and its exports")
    p.add_argument("--out", metavar="FOLDER",
                   help="folder for the exports (default: out/ beside the project file)")
    p.add_argument("--json", action="store_true",
                   help="for scripts: print one JSON object per level on standard output "
                        "(level, status, objective, bound, gap as a fraction, seconds, "
                        "students_moved_vs_today, students_moved_vs_option) and send every "
                        "other message to standard error; students_moved_vs_option is "
                        "null unless --from-option names the option edited")
    _add_solve_options(p)
    add_feeder_options(p)
    add_edit_options(p)
    p.set_defaults(func=cmd_solve)

    p = sub.add_parser("options", help="list, delete, rename saved options; repair the store",
                       description="List the saved options (level, status, students moved, "
                                   "mean travel), or rename or delete one.")
    _project_arg(p)
    p.add_argument("--delete", metavar="NAME", help="delete the saved option NAME")
    p.add_argument("--rename", nargs=2, metavar=("OLD", "NEW"),
                   help="give the saved option OLD the name NEW")
    p.add_argument("--repair", action="store_true",
                   help="set a damaged option store aside and start a new, empty one")
    p.set_defaults(func=cmd_options)

    p = sub.add_parser("verify", help="check a saved option against every rule, independently",
                       description="Check a saved option rule by rule with a checker written "
                                   "apart from the solver; exits with 1 when a rule is broken.")
    _project_arg(p)
    p.add_argument("--option", required=True, metavar="NAME", help="the saved option to check")
    p.set_defaults(func=cmd_verify)

    p = sub.add_parser("packet", help="write the hearing packet (PDF + PNG pages)",
                       description="Write the hearing packet comparing saved options with "
                                   "today's zones: a PDF and a PNG copy of each page.")
    _project_arg(p)
    p.add_argument("--options", required=True, metavar="NAMES",
                   help="comma-separated names of saved options, e.g. \"Option A,Option B\"")
    p.add_argument("--out", default="packet.pdf", metavar="FILE.pdf",
                   help="the PDF to write (default packet.pdf); the pages go beside it")
    p.add_argument("--sweep", action="store_true",
                   help="end with the trade-off chart of the level's latest sweep "
                        "(`districting sweep`, its table in out/ beside the project)")
    p.set_defaults(func=cmd_packet)

    p = sub.add_parser("export", help="write a saved option's exports again, without solving",
                       description="Write a saved option's GeoPackage, GeoJSON, Shapefile and "
                                   "CSV files, as solve --save does, without solving again.")
    _project_arg(p)
    p.add_argument("--option", required=True, metavar="NAME", help="the saved option to export")
    p.add_argument("--out", metavar="FOLDER",
                   help="folder for the exports; the option's files go into a sub-folder "
                        "named after it (default: out/ beside the project file)")
    p.add_argument("--overwrite", action="store_true",
                   help="replace files already in the option's export folder")
    p.set_defaults(func=cmd_export)

    for verb, kind, school, func in (
        ("lock", "lock units to a school (the board's decision)", "required", cmd_lock),
        ("unlock", "remove the locks of units", None, cmd_unlock),
        ("forbid", "forbid units from going to a school", "required", cmd_forbid),
        ("unforbid", "remove forbids of units (all, or those to one school)", "optional",
         cmd_unforbid),
    ):
        p = sub.add_parser(verb, help=kind, description=kind[0].upper() + kind[1:] + " in "
                           "the project file. Every unit and school is checked first and the "
                           "edited file is read again before it replaces the old one; the "
                           "rest of the file (comments, order) stays as it was.")
        _edit_args(p, school)
        p.set_defaults(func=func)

    p = sub.add_parser("demo", help="solve the bundled demo town and write everything",
                       description="Copy the invented demo town, solve every level twice, save "
                                   "the options and write every export and the packets.")
    p.add_argument("--out", default="out/demo", metavar="FOLDER",
                   help="output folder (default out/demo)")
    p.add_argument("--stability-weight", type=float, default=3000.0, metavar="METRES",
                   help="metres of travel charged per student moved, for the 'fewer-moves' "
                        "option (default 3000)")
    p.add_argument("--time-limit", type=float, default=60.0, metavar="SECONDS",
                   help="seconds per solve; the best plan found is kept, with how close to "
                        "the best possible it is (default 60)")
    _add_travel_option(p)
    p.set_defaults(func=cmd_demo)

    from .sweep.command import add_sweep_parser  # its own package; light until it runs
    add_sweep_parser(sub, load=_load, check_flags=check_flags, travel_option=_add_travel_option)

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
    handler = None
    if getattr(args, "details", False):
        handler = logging.StreamHandler(sys.stdout)
        handler.setFormatter(logging.Formatter("    solver detail: %(message)s"))
        _log.addHandler(handler)
        _log.setLevel(logging.INFO)
    try:
        return int(args.func(args) or 0)
    except KeyboardInterrupt:
        print("stopped", file=sys.stderr)
        return 130
    except ValueError as err:  # bad settings from the command line, named in the message
        print(f"districting {args.command}: {err}", file=sys.stderr)
        return 2
    finally:
        if handler is not None:
            _log.removeHandler(handler)


if __name__ == "__main__":
    raise SystemExit(main())
