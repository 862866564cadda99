"""Undo and redo of a session's locks and site edits, with a history in plain words.

:class:`History` (a param class, no UI library) holds one :class:`Step` per edit: what it
did in words ("locked unit U0123 to Alder Hill Elementary (E03)"), the level, and the
edited fields of the level's settings before and after. Undo puts the "before" fields
back, redo the "after" ones; a new edit after an undo drops the steps that were undone,
as in any editor. Only the fields of locks, forbids and site edits are put back
(:data:`EDIT_FIELDS`): a band or time limit changed since stays as it is.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import param

__all__ = ["History", "Step", "EDIT_FIELDS", "fields_of", "describe_units"]

#: RunSettings fields that undo and redo put back.
EDIT_FIELDS = ("locks", "forbids", "capacity", "status", "site_max_util", "site_min_util")


def fields_of(settings) -> dict:
    """The edited fields of a RunSettings, copied (so later edits cannot change them)."""
    out = {}
    for name in EDIT_FIELDS:
        value = getattr(settings, name)
        out[name] = {k: list(v) if isinstance(v, list) else v for k, v in value.items()}
    return out


def describe_units(units: Sequence[str], shown: int = 3) -> str:
    """'unit U1', 'units U1, U2 and U3', '5 units (U1, U2, U3 and 2 more)'."""
    units = list(units)
    if len(units) == 1:
        return f"unit {units[0]}"
    if len(units) <= shown:
        return f"units {', '.join(units[:-1])} and {units[-1]}"
    return f"{len(units)} units ({', '.join(units[:shown])} and {len(units) - shown} more)"


@dataclass(frozen=True)
class Step:
    """One edit: its words, its level and the edited fields before and after."""

    text: str
    level: str
    before: Mapping
    after: Mapping


class History(param.Parameterized):
    """The steps of one session; ``position`` steps are done, the rest are undone."""

    steps = param.List(default=[], item_type=Step, doc="every step, oldest first")
    position = param.Integer(0, bounds=(0, None), doc="number of steps done")

    @property
    def can_undo(self) -> bool:
        return self.position > 0

    @property
    def can_redo(self) -> bool:
        return self.position < len(self.steps)

    def record(self, text: str, level: str, before, after) -> Step | None:
        """Add a step from the level's settings before and after an edit; an edit that
        changed none of the edited fields adds nothing. Undone steps are dropped."""
        b, a = fields_of(before), fields_of(after)
        if a == b:
            return None
        step = Step(text, level, b, a)
        self.param.update(steps=[*self.steps[: self.position], step],
                          position=self.position + 1)
        return step

    def undo(self) -> Step | None:
        """The step to take back (its ``before`` fields go back in force), or None."""
        if not self.can_undo:
            return None
        self.position -= 1
        return self.steps[self.position]

    def redo(self) -> Step | None:
        """The step to do again (its ``after`` fields go back in force), or None."""
        if not self.can_redo:
            return None
        self.position += 1
        return self.steps[self.position - 1]

    def clear(self) -> None:
        self.param.update(steps=[], position=0)

    def lines(self) -> list[tuple[str, bool]]:
        """(words, done) per step, newest first: what the history list shows."""
        return [(s.text, k < self.position) for k, s in reversed(list(enumerate(self.steps)))]
