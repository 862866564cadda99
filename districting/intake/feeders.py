"""The [feeders] table: which zones stand for each level in feeder tables and rules, and
which levels are solved with whole feeding or nesting.

A level solved with whole feeding takes the zones of the level below as fixed (every zone of
the level below lies inside one zone of this level); a level solved with nesting takes the
zones of the level above as fixed (every zone of this level lies inside one zone above).
The zones of a neighbouring level are a saved option named in ``zones``, or today's zones.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

from .schema import suggest

__all__ = ["FeederSettings", "read_feeders", "neighbour"]


@dataclass(frozen=True)
class FeederSettings:
    """[feeders], checked: ``zones`` level -> saved option; ``whole``, ``nested`` levels;
    ``max_splits`` level -> splits allowed under whole feeding."""

    zones: dict[str, str] = field(default_factory=dict)
    whole: tuple[str, ...] = ()
    nested: tuple[str, ...] = ()
    max_splits: dict[str, int] = field(default_factory=dict)  # level of whole -> splits

    def rule(self, level: str) -> str:
        """The feeder rule a solve of ``level`` keeps: "whole", "nested" or ""."""
        return "whole" if level in self.whole else "nested" if level in self.nested else ""


def neighbour(levels: tuple[str, ...] | list[str], level: str, rule: str) -> str | None:
    """The level whose zones a ``rule`` solve of ``level`` holds fixed (None: there is none):
    the level below for "whole", the level above for "nested"."""
    k = list(levels).index(level)
    k += -1 if rule == "whole" else 1
    return levels[k] if 0 <= k < len(levels) else None


def read_feeders(path: Path, table, levels: tuple[str, ...], report) -> FeederSettings:
    """[feeders] (each value already checked against the schema) against the project's
    levels: every named level exists, a whole-feeding level has a level below it, a nested
    level one above it, and no level is both."""
    where = "[feeders]"
    table = table if isinstance(table, dict) else {}

    def known(key: str, names) -> list[str]:
        good = []
        for level in names:
            if level in levels:
                good.append(level)
                continue
            near = suggest(level, levels)
            report.error(path, f"{where} {key}", f"level {level!r} is not one of the "
                         f"project's levels ({', '.join(levels)})", "correct the level name"
                         + (f" (did you mean {near}?)" if near else ""))
        return good

    zones = {lv: str(v).strip() for lv, v in dict(table.get("zones", {})).items()}
    zones = {lv: zones[lv] for lv in known("zones", list(zones))}
    whole, nested = known("whole", table.get("whole", [])), known("nested", table.get("nested", []))
    for level in whole:
        if neighbour(levels, level, "whole") is None:
            report.error(path, f"{where} whole", f"{level} is the lowest level "
                         f"({', '.join(levels)}): there is no level below it to feed it",
                         f"remove {level!r} from whole; to keep its zones inside those of "
                         f"the level above, write nested = [\"{level}\"]")
    for level in nested:
        if neighbour(levels, level, "nested") is None:
            report.error(path, f"{where} nested", f"{level} is the highest level "
                         f"({', '.join(levels)}): there is no level above it to nest in",
                         f"remove {level!r} from nested; to have the level below feed it "
                         f"whole, write whole = [\"{level}\"]")
    splits = {lv: int(v) for lv, v in dict(table.get("max_splits", {})).items()}
    splits = {lv: splits[lv] for lv in known("max_splits", list(splits))}
    for level in [lv for lv in splits if lv not in whole]:
        report.error(path, f"{where} max_splits", f"max_splits names {level}, which is not "
                     "solved with whole feeding", f"add {level!r} to whole, or remove it "
                     "from max_splits")
        del splits[level]
    for level in set(whole) & set(nested):
        report.error(path, f"{where} whole / nested", f"{level} is listed in both",
                     "a level is solved against one neighbouring level: keep it in one list")
    return FeederSettings(zones, tuple(whole), tuple(nested), splits)
