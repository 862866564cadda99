"""The `districting` command: check, solve, options, verify, packet, export, lock, unlock,
forbid, unforbid, demo (and serve, from ui/).

This module builds the parser and runs the chosen command; what each command does is in
:mod:`districting.cli_commands`, thin wrappers over the public functions of the modules
they call, where all the work lives. Sub-commands from outside the engine (the workbench's
``serve``) register through the ``districting.commands`` entry point, so this module never
imports the UI.
"""

from __future__ import annotations

import argparse
import logging
import sys
from collections.abc import Sequence
from importlib.metadata import entry_points

from .cli_commands import (
    check_command,
    check_flags,
    cmd_check,
    cmd_demo,
    cmd_export,
    cmd_forbid,
    cmd_lock,
    cmd_options,
    cmd_packet,
    cmd_solve,
    cmd_unforbid,
    cmd_unlock,
    cmd_verify,
    load,
)
from .cli_options import add_edit_options, add_feeder_options, add_practice_options

__all__ = ["main", "build_parser", "check_command"]

#: Solver detail (rounds, cuts, bound) goes to this log, never to the summary people read.
_log = logging.getLogger("districting")


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
    add_sweep_parser(sub, load=load, check_flags=check_flags, travel_option=_add_travel_option)

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
