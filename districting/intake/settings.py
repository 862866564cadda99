"""The project file -> :class:`~districting.intake.records.Settings`.

:func:`read_settings` reads the TOML, checks every key against
:data:`districting.intake.schema.SCHEMA`, then the relations between keys; every problem
goes into the report.
"""

from __future__ import annotations

from pathlib import Path

from ..travel.measures import default_measure
from .feeders import read_feeders
from .practice import read_groups, read_walking
from .records import Lock, Settings, SolveSettings, Source
from .schema import SCHEMA, check_value, default, example, suggest, table_of
from .tomlfile import read_toml

__all__ = ["read_settings"]


# ----------------------------------------------------------------------------- the TOML file
def _checked(path: Path, data: dict, report) -> dict:
    """The project file's tables checked against :data:`SCHEMA`, every problem reported.

    Returns table -> key -> value for the keys that passed (arrays of tables: a list of
    such dicts); unknown tables and keys, wrong kinds and out-of-range values are errors.
    """
    out: dict = {}
    for name, value in data.items():
        if name not in SCHEMA:
            near = suggest(name, SCHEMA)
            report.error(path, f"[{name}]", f"unknown table [{name}]", _unknown_fix(
                name, [_header(t) for t in SCHEMA], near and _header(near), table_of(name),
                "table"))
            continue
        spec = SCHEMA[name]
        if spec.array:
            if not isinstance(value, list) or not all(isinstance(e, dict) for e in value):
                report.error(path, f"[[{name}]]", f"{name} must be an array of tables",
                             f"write each entry as [[{name}]] followed by "
                             f"{', '.join(spec.keys)}")
                continue
            out[name] = [_checked_table(path, name, f"[[{name}]] entry {k}", entry, report)
                         for k, entry in enumerate(value, start=1)]
        elif not isinstance(value, dict):
            report.error(path, f"[{name}]", f"{name} must be a table, not a single value",
                         f"write it as a [{name}] table with its keys on the lines below")
        else:
            out[name] = _checked_table(path, name, f"[{name}]", value, report)
    for name, spec in SCHEMA.items():
        if spec.required and name not in data:
            report.error(path, f"[{name}]", f"the [{name}] table is missing",
                         f"add a [{name}] table with {', '.join(_required(name)) or 'its keys'}"
                         " (see the project file schema in DEVELOPERS.md)")
    return out


def _header(table: str) -> str:
    return f"[[{table}]]" if SCHEMA[table].array else f"[{table}]"


def _required(table: str) -> list[str]:
    return [k for k, spec in SCHEMA[table].keys.items() if spec.required]


def _unknown_fix(name: str, known: list[str], near: str | None, owner: str | None,
                 word: str) -> str:
    if near is not None:
        head = f"did you mean {near}?"
    elif owner is not None:
        head = f"{name} is a key of [{owner}]: move it there"
    else:
        head = f"remove the {word} or correct its spelling"
    return f"{head} ({word}s here: {', '.join(known)})"


def _checked_table(path: Path, table: str, where: str, t: dict, report) -> dict:
    spec = SCHEMA[table]
    out = {}
    for key, value in t.items():
        if key not in spec.keys:
            owner = table_of(key)
            report.error(path, f"{where} {key}", f"unknown key {key} in {where}",
                         _unknown_fix(key, list(spec.keys), suggest(key, spec.keys),
                                      owner if owner != table else None, "key"))
            continue
        v, problem, fix = check_value(table, key, value)
        if problem is not None:
            report.error(path, f"{where} {key}", problem, fix)
        elif spec.keys[key].required and v == "":
            report.error(path, f"{where} {key}", f"{key} is empty",
                         f"write {key} = {example(spec.keys[key])}")
        else:
            out[key] = v
    for key in _required(table):
        if key not in t:
            report.error(path, f"{where} {key}", f"{key} is not given",
                         f"write e.g. {key} = {example(spec.keys[key])}")
    return out


class _Values:
    """Look-ups in the checked tables: the value written, else the schema's default."""

    def __init__(self, path: Path, tables: dict):
        self.path, self.tables = path, tables

    def get(self, table: str, key: str):
        t = self.tables.get(table)
        return t[key] if isinstance(t, dict) and key in t else default(table, key)

    def path_of(self, table: str, key: str) -> Path | None:
        value = self.get(table, key)
        return (self.path.parent / value).resolve() if value else None


def read_settings(path: str | Path, report) -> Settings | None:
    """Parse a project file into :class:`Settings`, reporting every bad table, key or value.

    Every key is checked against :data:`districting.intake.schema.SCHEMA`. Returns None when the
    file cannot be read or a required part is missing or wrong (the report says why);
    after other errors the settings are returned with defaults for the bad keys, so that
    the data can still be checked in the same run (any error stops a solve).
    """
    path = Path(path)
    data = read_toml(path, report)
    if data is None:
        return None
    n_errors = len(report.errors)
    values = _Values(path, _checked(path, data, report))
    get = values.get

    name = get("project", "name") or path.stem
    current_year, years = get("project", "current_year"), get("project", "years")
    levels = tuple(get("project", "levels"))
    w = "[project]"
    if len(set(levels)) != len(levels):
        report.error(path, f"{w} levels", f"a level is named twice ({', '.join(levels)})",
                     "name each school level once")
    plan_year = get("project", "plan_year")
    if years is not None:
        if len(set(years)) != len(years):
            report.error(path, f"{w} years", f"a year is listed twice ({years})",
                         "list each projected year once")
        if current_year is not None and any(y <= current_year for y in years):
            report.error(path, f"{w} years", f"projected years must come after current_year "
                         f"{current_year} (years: {years})",
                         "remove the earlier years, or correct current_year")
        if plan_year is None:
            plan_year = years[0]
        elif plan_year not in years:
            report.error(path, f"{w} plan_year", f"plan_year {plan_year} is not one of the "
                         f"projected years {years}", "choose plan_year from years")
    store = values.path_of("project", "store") or path.with_name(f"{path.stem}.options.gpkg")

    sources: dict[str, Source] = {}
    for key in _SOURCES:
        if not isinstance(values.tables.get(key), dict) or not get(key, "source"):
            continue
        columns = {role: get(key, role) for role in SCHEMA[key].keys
                   if role not in ("source", "layer", "columns", "max_access")}
        level_columns = dict(get(key, "columns")) if key == "zones" else {}
        for level in [lv for lv in level_columns if lv not in levels]:
            report.warning(path, f"[{key}] columns", f"level {level!r} is not one of the "
                           f"project's levels ({', '.join(levels)}); its column is ignored",
                           "correct the level name or add it to [project] levels")
            del level_columns[level]
        layer = get(key, "layer") if "layer" in SCHEMA[key].keys else None
        sources[key] = Source(values.path_of(key, "source"), layer or None, columns,
                              level_columns)
    _check_units_columns(path, sources.get("units"), levels, report)

    solve = _read_solve(values, levels, report)
    feeders = read_feeders(path, values.tables.get("feeders"), levels, report)
    locks, forbids = (tuple(Lock(e["level"].lower(), e["unit"], e["site"])
                            for e in values.tables.get(key, []) if len(e) == 3)
                      for key in ("locks", "forbids"))
    if len(report.errors) > n_errors and (current_year is None or years is None
                                          or "units" not in sources or "sites" not in sources):
        return None
    return Settings(
        path=path.resolve(), name=name, current_year=current_year, years=tuple(years),
        plan_year=plan_year if plan_year in years else years[0], levels=levels, store=store,
        solve=solve, locks=locks, forbids=forbids, raw=data, sources=sources,
        contiguity=get("adjacency", "contiguity"), links=values.path_of("adjacency", "links"),
        max_access=get("streets", "max_access"), feeders=feeders,
        walking=read_walking(path, values.tables.get("walking"), get, levels, report),
        groups=read_groups(path, get, levels, report),
    )


#: Tables that name a source file, in reading order.
_SOURCES = ("units", "counts", "sites", "zones", "barriers", "bridges", "streets")


def _check_units_columns(path: Path, units: Source | None, levels, report) -> None:
    if units is None:
        return
    template = units.columns["counts"]
    try:
        template.format(level="x", year=2000)
        ok = "{year}" in template and ("{level}" in template or len(levels) == 1)
    except (KeyError, IndexError, ValueError):
        ok = False
    if not ok:
        report.error(path, "[units] counts", f"the count column template {template!r} "
                     "must contain {year} (and {level} when there are several levels)",
                     'write e.g. counts = "{level}_{year}"')
    if bool(units.columns["point_x"]) != bool(units.columns["point_y"]):
        report.error(path, "[units] point_x / point_y", "give both point columns or neither",
                     "set point_x and point_y, or leave both empty")


#: A longest-travel limit under this many metres was surely meant in kilometres.
_SHORTEST_TRIP = 100.0


def _read_solve(values: _Values, levels: tuple[str, ...], report) -> SolveSettings:
    """[solve] with defaults; each value was range-checked against the schema."""
    path, w = values.path, "[solve]"

    def get(key):
        return values.get("solve", key)

    max_u, min_u = get("max_utilization"), get("min_utilization")
    if min_u > max_u:
        report.error(path, f"{w} min_utilization", f"min_utilization {min_u:g} is above "
                     f"max_utilization {max_u:g}", "lower min_utilization or raise "
                     "max_utilization")
    per_level = {}
    for key in ("max_distance", "open_count"):
        table = dict(get(key))
        for level in [lv for lv in table if lv not in levels]:
            report.error(path, f"{w} {key}", f"level {level!r} is not one of the "
                         f"project's levels ({', '.join(levels)})", "correct the level name"
                         + (f" (did you mean {near}?)" if (near := suggest(level, levels))
                            else ""))
            del table[level]
        per_level[key] = table
    for level, metres in per_level["max_distance"].items():
        if 0 < metres < _SHORTEST_TRIP:
            report.warning(path, f"{w} max_distance", f"max_distance for {level} is "
                           f"{metres:g} m, shorter than any trip to school",
                           f"the value is in metres: write {metres * 1000:g} for {metres:g} km")
    travel = get("travel")
    has_streets = isinstance(values.tables.get("streets"), dict)
    if travel == "streets" and not has_streets:
        report.error(path, f"{w} travel", 'travel = "streets" but the project has no '
                     "[streets] table", "add a [streets] table naming the street lines, or "
                     'write travel = "barrier-aware"')
    return SolveSettings(
        max_utilization=max_u,
        min_utilization=min_u,
        stability_weight=get("stability_weight"),
        keep_option_weight=get("keep_option_weight"),
        max_distance={k: float(v) for k, v in per_level["max_distance"].items()},
        max_moved=get("max_moved") or None,
        open_count={k: int(v) for k, v in per_level["open_count"].items()},
        gap=get("gap"),
        time_limit=get("time_limit") or None,
        solver=(get("solver") or default("solve", "solver")).lower(),
        travel_matrix=values.path_of("solve", "travel_matrix"),
        travel=travel or default_measure(has_streets),
    )
