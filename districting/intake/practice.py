"""The [walking] and [groups] tables: walk zones, transport and demographic balance.

Each value was range-checked against the schema already; here the relations: a per-level
table names project levels, a group template can be formatted and names each group once.
"""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path

from .records import GroupSettings, WalkSettings
from .schema import suggest

__all__ = ["read_walking", "read_groups"]


def _levels_only(path: Path, table: dict, key: str, levels, written: bool, report) -> dict:
    """``table`` without levels the project lacks (an error when the planner wrote them)."""
    kept = {}
    for level, value in table.items():
        if level in levels:
            kept[level] = float(value)
        elif written:
            near = suggest(level, levels)
            report.error(path, f"[walking] {key}", f"level {level!r} is not one of the "
                         f"project's levels ({', '.join(levels)})", "correct the level name"
                         + (f" (did you mean {near}?)" if near else ""))
    return kept


def read_walking(path: Path, raw: dict, get: Callable, levels, report) -> WalkSettings:
    """[walking] with defaults (the default distances of levels the project lacks are
    dropped silently; a level the planner wrote must exist)."""
    written = raw if isinstance(raw, dict) else {}
    walking = WalkSettings(
        distance=_levels_only(path, dict(get("walking", "distance")), "distance", levels,
                              "distance" in written, report),
        keep_walkers=bool(get("walking", "keep_walkers")),
        max_transported=_levels_only(path, dict(get("walking", "max_transported")),
                                     "max_transported", levels, True, report),
        transport_charge=float(get("walking", "transport_charge") or 0.0),
    )
    for level, cap in walking.max_transported.items():
        if cap and not walking.distance.get(level):
            report.error(path, "[walking] max_transported", f"a limit on {level} students "
                         f"needing transport, but {level} has no walking distance",
                         f"set [walking] distance for {level}, or remove its limit")
    return walking


def read_groups(path: Path, get: Callable, levels, report) -> GroupSettings:
    """[groups]: every template formats with {level} and {year}, holds {level} when the
    project has several levels, and each group is named once."""
    columns = tuple(get("groups", "columns") or ())
    settings = GroupSettings(columns, float(get("groups", "band_points") or 0.0))
    for template in columns:
        try:
            template.format(level="x", year=2000)
            ok = "{level}" in template or len(levels) == 1
        except (KeyError, IndexError, ValueError):
            ok = False
        if not ok:
            report.error(path, "[groups] columns", f"the group column template {template!r} "
                         "must hold {level} when there are several levels (and no other "
                         "{...} than {level} and {year})",
                         'write e.g. columns = ["meal_support_{level}_{year}"]')
    names = settings.names
    twice = sorted({n for n in names if names.count(n) > 1})
    if twice:
        report.error(path, "[groups] columns", f"group {twice[0]!r} is named twice",
                     "list each group's column template once")
    if settings.band_points and not columns:
        report.warning(path, "[groups] band_points", "a band is set but no group column is "
                       "named, so no band applies", "name the group columns in [groups] "
                       "columns, or remove band_points")
    return settings
