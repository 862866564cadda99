"""The feeder rule the workbench settings card chooses for a rerun, with no UI code.

The card picks a rule ("none", "whole" or "nested"), the zones of the neighbouring level it
holds fixed (today's zones, or a saved option of that level) and, for whole feeding, how
many splits a school of the level below may have. The run fields are built by
:func:`districting.outputs.feeders.feeder_run`, as for the CLI; this module only checks the
card's choice first, so a choice that cannot apply is refused in plain words.
"""

from __future__ import annotations

from districting.intake import Inputs
from districting.intake.feeders import neighbour
from districting.outputs.feeders import feeder_run, given_zones
from districting.outputs.store import OptionError, option_zones
from districting.study import RunSettings

__all__ = ["FEEDER_RULES", "feeder_edit", "feeder_choice", "feeder_level"]

#: The card's rules ("none": the rerun keeps no feeder rule).
FEEDER_RULES = ("none", "whole", "nested")


def feeder_level(inputs: Inputs, level: str, rule: str) -> str | None:
    """The level whose zones ``rule`` holds fixed for ``level`` (None: none, or no rule)."""
    if rule not in ("whole", "nested"):
        return None
    return neighbour(inputs.settings.levels, level, rule)


def feeder_edit(inputs: Inputs, rs: RunSettings, rule: str | None = None,
                given_name: str | None = None, max_splits: int | None = None) -> dict:
    """The RunSettings fields of the card's feeder choice for the run ``rs``.

    ``None`` keeps that part of the choice as ``rs`` has it (the project's ``[feeders]``
    when the run leaves the rule open); ``given_name`` "" holds today's zones fixed.
    Raises ValueError in words when the choice cannot apply.
    """
    level = rs.level
    now_rule, now_given, now_splits = feeder_choice(inputs, rs)
    rule = now_rule if rule is None else rule
    if rule not in FEEDER_RULES:
        raise ValueError(f"feeder rule {rule!r} is not known; pick one of "
                         f"{', '.join(FEEDER_RULES)}")
    if rule == "none":
        return {"feeding": "", "given": {}, "given_name": "", "max_splits": 0}
    other = feeder_level(inputs, level, rule)
    if other is None:
        levels = ", ".join(inputs.settings.levels)
        if rule == "whole":
            raise ValueError(f"Whole feeding needs a level below {level} to take whole zones "
                             f"from, and {level} is the lowest level here ({levels}). Choose "
                             "nested, or no feeder rule.")
        raise ValueError(f"Nested zones need a level above {level} to lie inside, and {level} "
                         f"is the highest level here ({levels}). Choose whole feeding, or no "
                         "feeder rule.")
    if given_name is None:  # keep the held zones when they still belong to that level
        given_name = now_given if now_given and _level_of(inputs, now_given) == other else None
    elif given_name:
        saved = _level_of(inputs, given_name)
        if saved is None:
            raise ValueError(f"There is no saved option named {given_name!r}. Pick a saved "
                             f"{other} option, or today's {other} zones.")
        if saved != other:
            raise ValueError(f"{given_name!r} is a {saved} option, and this rule holds the "
                             f"{other} zones fixed. Pick a saved {other} option, or today's "
                             f"{other} zones.")
    splits = now_splits if max_splits is None else int(max_splits)
    if splits < 0:
        raise ValueError(f"Splits per school must be 0 or more; got {splits}.")
    if rule != "whole" and splits:
        raise ValueError(f"At most {splits} splits applies to whole feeding only. Set the "
                         "splits to 0, or choose whole feeding.")
    fields = feeder_run(inputs, level, rule, given_name or None)
    if given_name == "":  # today's zones, even where [feeders] names an option
        fields.update(given={}, given_name="")
    return {**fields, "max_splits": splits}


def feeder_choice(inputs: Inputs, rs: RunSettings) -> tuple[str, str, int]:
    """(rule, saved option held fixed or "" for today's zones, splits) a rerun of ``rs``
    keeps: the run's own choice, else the project's ``[feeders]``."""
    if rs.feeding is not None:
        rule = rs.feeding or "none"
        return rule, rs.given_name if rule != "none" else "", int(rs.max_splits or 0)
    s = inputs.settings.feeders
    rule = s.rule(rs.level) or "none"
    other = feeder_level(inputs, rs.level, rule)
    name = given_zones(inputs, other)[1] if other else ""
    splits = s.max_splits.get(rs.level, 0) if rule == "whole" else 0
    return rule, name, int(splits if rs.max_splits is None else rs.max_splits)


def _level_of(inputs: Inputs, name: str) -> str | None:
    """The level of the saved option ``name`` (None: the store has no such option)."""
    try:
        return option_zones(inputs.settings.store, name)[0]
    except OptionError:
        return None
