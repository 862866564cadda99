"""Options of `districting solve` for the practice rules: feeder patterns, walk zones,
transport and group bands (kept apart so cli.py stays small)."""

from __future__ import annotations

import argparse

__all__ = ["feeder_fields", "add_feeder_options", "add_practice_options", "add_edit_options",
           "edit_fields"]


def feeder_fields(args, inputs, level: str) -> dict:
    """The run's feeder rule and fixed zones (--feeding, --given, else [feeders])."""
    from .outputs.feeders import feeder_run

    fields = feeder_run(inputs, level, args.feeding, args.given)
    if args.max_splits is not None:
        if args.max_splits < 0 or fields["feeding"] != "whole":
            raise ValueError(f"--max-splits {args.max_splits}: a limit on split feeders (0 or "
                             f"more) applies to whole feeding; fix: add --feeding whole")
        fields["max_splits"] = args.max_splits
    return fields


def add_feeder_options(p: argparse.ArgumentParser) -> None:
    p.add_argument("--feeding", choices=("whole", "nested", "none"),
                   help="feeder rule against the neighbouring level's zones, held fixed: "
                        "whole (every zone of the level below lies inside one zone of this "
                        "level), nested (every zone of this level lies inside one zone of the "
                        "level above) or none (default: the project's [feeders])")
    p.add_argument("--given", metavar="OPTION",
                   help="saved option of the neighbouring level whose zones the feeder rule "
                        "holds fixed (default: the one [feeders] zones names, else today's "
                        "zones)")
    p.add_argument("--max-splits", type=int, metavar="N",
                   help="with --feeding whole: each school of the level below may feed at "
                        "most 1 + N schools of this level (default: the project's "
                        "[feeders] max_splits, else 0: whole feeding)")


def add_practice_options(p: argparse.ArgumentParser) -> None:
    p.add_argument("--keep-walkers", action=argparse.BooleanOptionalAction, default=None,
                   help="keep each unit within walking distance of an open school in the "
                        "zone of such a school (default: the project's [walking] keep_walkers)")
    p.add_argument("--max-transported", type=float, metavar="STUDENTS",
                   help="most plan-year students living beyond walking distance of their "
                        "school (0: no limit; default: the project's [walking] value)")
    p.add_argument("--group-band", type=float, metavar="POINTS",
                   help="percentage points a school's share of each group may differ from "
                        "the district's (0: none; default: the project's [groups] band_points)")
    p.add_argument("--transport-charge", type=float, metavar="METRES",
                   help="metres of travel charged per student living beyond walking distance "
                        "of their school (0: none; default: the project's [walking] value)")


def add_edit_options(p: argparse.ArgumentParser) -> None:
    """`solve --from-option NAME [--keep-weight METRES]`: rerun a saved option after an edit."""
    p.add_argument("--from-option", metavar="NAME",
                   help="rerun a saved option after a lock, forbid or cap change: start from "
                        "its plan and charge every student moved away from it, so the rest of "
                        "the option stays (its level is solved; the project's locks and the "
                        "flags here apply)")
    p.add_argument("--keep-weight", type=float, metavar="METRES",
                   help="with --from-option: metres of travel charged per student moved away "
                        "from that option; 0 = a free rerun (default: the project's "
                        "[solve] keep_option_weight)")


def edit_fields(args, inputs) -> tuple[dict, object | None]:
    """The run fields of `--from-option` (the option's zones, name, charge) and its plan as
    the start; ({}, None) without it. Sets ``args.level`` to the option's level."""
    name = getattr(args, "from_option", None)
    weight = getattr(args, "keep_weight", None)
    if weight is not None and not name:
        raise ValueError("--keep-weight charges moves away from a saved option; fix: add "
                         "--from-option NAME")
    if weight is not None and not weight >= 0:
        raise ValueError(f"--keep-weight {weight:g}: metres per student moved, 0 or more "
                         "(0 = a free rerun)")
    if not name:
        return {}, None
    from .outputs.store import load_option

    option = load_option(inputs, name)
    if args.level not in ("all", option.level):
        raise ValueError(f"--from-option {name!r} is a {option.level} option, not "
                         f"{args.level}; fix: write --level {option.level} or leave it out")
    args.level = option.level
    zones = dict(zip(option.unit_ids, option.site_id_of(option.assignment).tolist(),
                     strict=True))
    return ({"keep_option": {u: s for u, s in zones.items() if s},
             "keep_option_name": option.name, "keep_option_weight": weight}, option.plan)
