"""What each sub-command of the `districting` command does (:mod:`districting.cli` builds
the parser and runs them): thin wrappers over the public functions of the modules they
call, with the project loaded and its errors reported the same way for every command.
"""

from __future__ import annotations

import functools
import json
import sys
import time
from pathlib import Path

from . import DRAFT_NOTICE
from .cli_options import edit_fields, feeder_fields

__all__ = ["check_command", "check_flags", "export_folder", "load", "cmd_check", "cmd_solve",
           "cmd_options", "cmd_verify", "cmd_packet", "cmd_demo", "cmd_export", "cmd_lock",
           "cmd_forbid", "cmd_unlock", "cmd_unforbid"]


# ----------------------------------------------------------------------------- helpers
def load(path: str):
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
    inputs = load(args.project)
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

    inputs = load(args.project)
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

    inputs = load(args.project)
    outcome = load_option(inputs, args.option)
    facts = facts_of_outcome(outcome)
    findings = check_plan(facts, outcome.plan.assignment)
    print(report(findings, facts, label=f"option {outcome.name!r} ({outcome.level})"))
    return 1 if findings else 0


def cmd_packet(args) -> int:
    from .outputs.packet import write_packet
    from .outputs.store import load_option

    inputs = load(args.project)
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
    inputs = load(args.project)
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
