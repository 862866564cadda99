"""A project: one TOML file -> validated inputs.

The TOML file names where each layer comes from and which column plays which role
(see DEVELOPERS.md, "Project file"). :func:`load_project` reads it, validates everything
before any solve, and returns :class:`Inputs`; every problem found is reported at once in a
:class:`~districting.validate.Report` (errors stop the run, warnings do not). This module
parses the TOML (:func:`read_settings`); :mod:`districting.intake` reads the layers and
tables it names, and :mod:`districting.validate` holds the checks.
"""

from __future__ import annotations

import tomllib
from dataclasses import dataclass, field
from pathlib import Path

import geopandas as gpd
import numpy as np

from .validate import ProjectError, Report

__all__ = [
    "Settings", "SolveSettings", "Lock", "Source", "Inputs", "load_project", "validate_project",
    "read_settings", "ProjectError", "LEVELS", "SITE_STATUSES",
]

LEVELS = ("elementary", "middle", "high")
#: open: open now and in the plan; closing: closes at the plan year (its students move);
#: new: opens at the plan year; candidate: the solver decides; closed: not in use.
SITE_STATUSES = ("open", "closing", "new", "candidate", "closed")


@dataclass(frozen=True)
class SolveSettings:
    """The [solve] table: defaults for every level, overridable per run."""

    max_utilization: float = 1.0
    min_utilization: float = 0.0
    stability_weight: float = 0.0  # extra metres of travel charged per student moved
    max_distance: dict[str, float] = field(default_factory=dict)  # level -> metres
    max_moved: float | None = None  # students (plan year) allowed to change school
    open_count: dict[str, int] = field(default_factory=dict)  # level -> p (with candidates)
    gap: float = 1e-4
    time_limit: float | None = 60.0
    solver: str = "highs"  # "highs" (array route) or any solver name Pyomo drives
    travel_matrix: Path | None = None  # CSV unit_id, site_id, cost (replaces distances)


@dataclass(frozen=True)
class Lock:
    level: str
    unit: str  # unit id
    site: str  # site id


@dataclass(frozen=True)
class Source:
    """One source table of the project file: where the layer is, which column plays which role.

    ``columns`` maps a role ("id", "counts", "capacity"...) to a column name ("" = not
    given); ``level_columns`` maps a level to its column ([zones] ``columns``).
    """

    path: Path
    layer: str | None = None
    columns: dict[str, str] = field(default_factory=dict)
    level_columns: dict[str, str] = field(default_factory=dict)


@dataclass(frozen=True)
class Settings:
    """The parsed project file, paths resolved against the file's folder."""

    path: Path  # the TOML file
    name: str
    current_year: int
    years: tuple[int, ...]  # projected years; capacity must hold in each
    plan_year: int  # the year new zones take effect; one of ``years``
    levels: tuple[str, ...]
    store: Path  # GeoPackage that holds saved options
    solve: SolveSettings
    locks: tuple[Lock, ...] = ()
    forbids: tuple[Lock, ...] = ()
    raw: dict = field(default_factory=dict, repr=False)  # the TOML as read
    #: "units", "sites" and, when the file has them, "counts", "zones", "barriers", "bridges"
    sources: dict[str, Source] = field(default_factory=dict)
    contiguity: str = "rook"  # [adjacency] contiguity: "rook" or "queen"
    links: Path | None = None  # [adjacency] links CSV (unit_a, unit_b, action)

    @property
    def all_years(self) -> tuple[int, ...]:
        """Rows of ``Inputs.counts``: the current year, then the projected years."""
        return (self.current_year, *self.years)


@dataclass(frozen=True, eq=False)
class Inputs:
    """Everything a solve needs, validated, in one projected CRS.

    - ``units``: GeoDataFrame, positional index 0..n-1, columns ``unit_id`` (str),
      ``geometry`` (polygons), ``point`` (shapely Point: population-weighted point if the
      project gives one, else the centroid).
    - ``counts[level]``: float array (len(settings.all_years), n_units).
    - ``sites``: GeoDataFrame, index 0..s-1, columns ``site_id``, ``name``, ``level``,
      ``capacity``, ``status`` (one of SITE_STATUSES), ``min_util``, ``max_util`` (nan =
      project default), ``unit_index`` (int: the unit containing the site), ``geometry``.
    - ``current[level]``: int array (n_units,): index into ``sites`` of today's school, -1
      where the unit has none.
    - ``barriers``, ``bridges``: GeoSeries (possibly empty).
    - ``adjacency``: :class:`districting.adjacency.Adjacency` after barrier cuts, bridges
      and manual links.
    - ``travel``: optional (n_units, n_sites) cost matrix from the travel CSV (inf = none).
    """

    settings: Settings
    units: gpd.GeoDataFrame
    counts: dict[str, np.ndarray]
    sites: gpd.GeoDataFrame
    current: dict[str, np.ndarray]
    barriers: gpd.GeoSeries
    bridges: gpd.GeoSeries
    adjacency: object
    report: object
    travel: np.ndarray | None = None

    @property
    def crs(self):
        return self.units.crs

    def year_row(self, year: int) -> int:
        return self.settings.all_years.index(year)


# ----------------------------------------------------------------------------- the TOML file
_KNOWN_KEYS: dict[str, tuple[str, ...]] = {
    "project": ("name", "current_year", "years", "plan_year", "levels", "store"),
    "units": ("source", "layer", "id", "counts", "point_x", "point_y"),
    "counts": ("source", "id"),
    "sites": ("source", "layer", "id", "name", "level", "capacity", "status", "min_util",
              "max_util"),
    "zones": ("source", "layer", "id", "columns"),
    "barriers": ("source", "layer"),
    "bridges": ("source", "layer"),
    "adjacency": ("contiguity", "links"),
    "solve": ("max_utilization", "min_utilization", "stability_weight", "gap", "time_limit",
              "solver", "travel_matrix", "max_moved", "max_distance", "open_count"),
    "locks": ("level", "unit", "site"),
    "forbids": ("level", "unit", "site"),
}
#: Column roles with their default column names ("" = optional, not used unless given).
_ROLES: dict[str, dict[str, str]] = {
    "units": {"id": "unit_id", "counts": "{level}_{year}", "point_x": "", "point_y": ""},
    "counts": {"id": "unit_id"},
    "sites": {"id": "site_id", "name": "name", "level": "level", "capacity": "capacity",
              "status": "status", "min_util": "", "max_util": ""},
    "zones": {"id": "unit_id"},
    "barriers": {},
    "bridges": {},
}
_EXAMPLES = {"text": '"name"', "int": "2027", "number": "0.9", "years": "[2027, 2028]",
             "names": '["elementary", "middle"]', "level_number": "{ high = 15000 }",
             "level_int": "{ elementary = 6 }", "level_text": '{ elementary = "zone_el" }',
             "id": '"U0412"'}
_EXPECTED = {"text": "text", "int": "a whole number", "number": "a number",
             "years": "a list of years (whole numbers)", "names": "a list of names (text)",
             "level_number": "a table of level = number", "level_int":
             "a table of level = whole number", "level_text": "a table of level = column name",
             "id": "an id (text)"}


def _convert(kind: str, v):
    """(ok, value) for a TOML value of the expected kind."""
    def is_int(x):
        return isinstance(x, int) and not isinstance(x, bool)

    def is_num(x):
        return (is_int(x) or isinstance(x, float)) and np.isfinite(x)

    if kind == "text":
        return isinstance(v, str), v.strip() if isinstance(v, str) else v
    if kind == "id":
        ok = isinstance(v, str) and v.strip() != "" or is_int(v)
        return ok, str(v).strip()
    if kind == "int":
        return is_int(v), v
    if kind == "number":
        return is_num(v), float(v) if is_num(v) else v
    if kind == "years":
        return isinstance(v, list) and len(v) > 0 and all(map(is_int, v)), v
    if kind == "names":
        ok = isinstance(v, list) and len(v) > 0 and all(isinstance(x, str) and x.strip()
                                                        for x in v)
        return ok, [x.strip().lower() for x in v] if ok else v
    check = {"level_number": is_num, "level_int": is_int,
             "level_text": lambda x: isinstance(x, str)}[kind]
    ok = isinstance(v, dict) and all(check(x) for x in v.values())
    return ok, {str(k).strip().lower(): x for k, x in v.items()} if ok else v


class _TomlReader:
    """Typed look-ups in the parsed TOML; every bad value becomes a report item."""

    def __init__(self, path: Path, data: dict, report):
        self.path, self.data, self.report = path, data, report

    def table(self, name: str, required: bool = False) -> dict | None:
        t = self.data.get(name)
        if t is None:
            if required:
                self.report.error(self.path, f"[{name}]", f"the [{name}] table is missing",
                                  f"add a [{name}] table (see the project file schema)")
            return None
        if not isinstance(t, dict):
            self.report.error(self.path, f"[{name}]", f"{name} must be a table",
                              f"write it as a [{name}] table")
            return None
        self.unknown_keys(f"[{name}]", t, _KNOWN_KEYS[name])
        return t

    def unknown_keys(self, where: str, t: dict, known: tuple[str, ...]) -> None:
        extra = [k for k in t if k not in known]
        if extra:
            self.report.warning(self.path, where, f"unknown key{'s' if len(extra) > 1 else ''} "
                                f"{', '.join(extra)} (ignored)",
                                f"known keys: {', '.join(known)}; check the spelling")

    def get(self, where: str, t: dict, key: str, kind: str, default=None):
        if key not in t:
            return default
        ok, value = _convert(kind, t[key])
        if not ok:
            self.report.error(self.path, f"{where} {key}",
                              f"must be {_EXPECTED[kind]}, not {t[key]!r}",
                              f"write e.g. {key} = {_EXAMPLES[kind]}")
            return default
        return value

    def path_of(self, where: str, t: dict, key: str, required: bool = False) -> Path | None:
        value = self.get(where, t, key, "text", "")
        if not value:
            if required:
                self.report.error(self.path, f"{where} {key}", f"{key} is not given",
                                  f'write {key} = "file.gpkg" (relative to the project file)')
            return None
        return (self.path.parent / value).resolve()


def read_settings(path: str | Path, report) -> Settings | None:
    """Parse a project file into :class:`Settings`, reporting every bad key or value.

    Returns None when the file cannot be read or a required part is missing or wrong (the
    report says why); other bad values fall back to their defaults after being reported.
    """
    path = Path(path)
    if not path.is_file():
        report.error(path, "", "the project file does not exist",
                     "give the path of the project's .toml file")
        return None
    try:
        data = tomllib.loads(path.read_text(encoding="utf-8-sig"))
    except (tomllib.TOMLDecodeError, UnicodeDecodeError) as err:
        report.error(path, "", f"the project file is not valid TOML ({err})",
                     "correct the syntax at the line and column named")
        return None
    reader = _TomlReader(path, data, report)
    unknown = [k for k in data if k not in _KNOWN_KEYS]
    if unknown:
        report.warning(path, "", f"unknown table{'s' if len(unknown) > 1 else ''} "
                       f"{', '.join(unknown)} (ignored)",
                       f"known tables: {', '.join(_KNOWN_KEYS)}; check the spelling")
    n_errors = len(report.errors)

    proj = reader.table("project", required=True) or {}
    w = "[project]"
    name = reader.get(w, proj, "name", "text", "") or path.stem
    current_year = reader.get(w, proj, "current_year", "int")
    years = reader.get(w, proj, "years", "years")
    for key, value in (("current_year", current_year), ("years", years)):
        if value is None and key not in proj:
            example = _EXAMPLES["int" if key == "current_year" else "years"]
            report.error(path, f"{w} {key}", f"{key} is not given",
                         f"write e.g. {key} = {example}")
    levels = tuple(reader.get(w, proj, "levels", "names", list(LEVELS)))
    if len(set(levels)) != len(levels):
        report.error(path, f"{w} levels", f"a level is named twice ({', '.join(levels)})",
                     "name each school level once")
    plan_year = reader.get(w, proj, "plan_year", "int")
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
    store = reader.path_of(w, proj, "store") or path.with_name(f"{path.stem}.options.gpkg")

    sources: dict[str, Source] = {}
    for key, roles in _ROLES.items():
        t = reader.table(key, required=key in ("units", "sites"))
        if t is None:
            continue
        where = f"[{key}]"
        src = reader.path_of(where, t, "source", required=True)
        layer = reader.get(where, t, "layer", "text", "") or None
        columns = {role: reader.get(where, t, role, "text", default) for role, default
                   in roles.items()}
        level_columns = {}
        if key == "zones":
            level_columns = reader.get(where, t, "columns", "level_text", {})
            for level in [lv for lv in level_columns if lv not in levels]:
                report.warning(path, f"{where} columns", f"level {level!r} is not one of the "
                               f"project's levels ({', '.join(levels)}); its column is ignored",
                               "correct the level name or add it to [project] levels")
                del level_columns[level]
        if src is not None:
            sources[key] = Source(src, layer, columns, level_columns)
    units = sources.get("units")
    if units is not None:
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

    adj = reader.table("adjacency") or {}
    contiguity = reader.get("[adjacency]", adj, "contiguity", "text", "rook").lower()
    if contiguity not in ("rook", "queen"):
        report.error(path, "[adjacency] contiguity", f"contiguity must be 'rook' or 'queen', "
                     f"not {contiguity!r}", 'write contiguity = "rook" (shared border) or '
                     '"queen" (a shared corner is enough)')
        contiguity = "rook"
    links = reader.path_of("[adjacency]", adj, "links")

    solve = _read_solve(reader, levels)
    locks = _read_pairs(reader, "locks")
    forbids = _read_pairs(reader, "forbids")
    if len(report.errors) > n_errors and (current_year is None or years is None
                                          or "units" not in sources or "sites" not in sources):
        return None
    return Settings(
        path=path.resolve(), name=name, current_year=current_year, years=tuple(years),
        plan_year=plan_year if plan_year in years else years[0], levels=levels, store=store,
        solve=solve, locks=locks, forbids=forbids, raw=data, sources=sources,
        contiguity=contiguity, links=links,
    )


def _read_solve(reader: _TomlReader, levels: tuple[str, ...]) -> SolveSettings:
    t = reader.table("solve") or {}
    w, d = "[solve]", SolveSettings()
    report, path = reader.report, reader.path

    def number(key: str, default, low: float = 0.0, high: float | None = None):
        v = reader.get(w, t, key, "number", default)
        if v is not None and (v < low or (high is not None and v > high)):
            span = f"between {low:g} and {high:g}" if high is not None else f"{low:g} or more"
            report.error(path, f"{w} {key}", f"{key} = {v:g} is out of range",
                         f"use a value {span}")
            return default
        return v

    max_u = number("max_utilization", d.max_utilization)
    min_u = number("min_utilization", d.min_utilization)
    if max_u <= 0:
        report.error(path, f"{w} max_utilization", "max_utilization must be above 0",
                     "write e.g. max_utilization = 1.0 (100% of capacity)")
        max_u = d.max_utilization
    if min_u > max_u:
        report.error(path, f"{w} min_utilization", f"min_utilization {min_u:g} is above "
                     f"max_utilization {max_u:g}", "lower min_utilization or raise "
                     "max_utilization")
    per_level = {}
    for key, kind, low in (("max_distance", "level_number", 0), ("open_count", "level_int", 1)):
        table = reader.get(w, t, key, kind, {})
        for level, v in list(table.items()):
            if level not in levels:
                report.error(path, f"{w} {key}", f"level {level!r} is not one of the "
                             f"project's levels ({', '.join(levels)})",
                             "correct the level name")
                del table[level]
            elif v < low:
                report.error(path, f"{w} {key}", f"{key} for {level} must be {low} or more, "
                             f"not {v}", "correct the value")
                del table[level]
        per_level[key] = table
    time_limit = number("time_limit", d.time_limit)
    max_moved = number("max_moved", 0.0)
    solver = reader.get(w, t, "solver", "text", d.solver) or d.solver
    return SolveSettings(
        max_utilization=max_u,
        min_utilization=min_u,
        stability_weight=number("stability_weight", d.stability_weight),
        max_distance={k: float(v) for k, v in per_level["max_distance"].items()},
        max_moved=max_moved or None,
        open_count={k: int(v) for k, v in per_level["open_count"].items()},
        gap=number("gap", d.gap, 0.0, 1.0),
        time_limit=time_limit or None,
        solver=solver.lower(),
        travel_matrix=reader.path_of(w, t, "travel_matrix"),
    )


def _read_pairs(reader: _TomlReader, key: str) -> tuple[Lock, ...]:
    """[[locks]] / [[forbids]] entries; ids are checked against the data later."""
    entries = reader.data.get(key, [])
    if not isinstance(entries, list) or not all(isinstance(e, dict) for e in entries):
        reader.report.error(reader.path, f"[[{key}]]", f"{key} must be an array of tables",
                            f"write each entry as [[{key}]] with level, unit and site")
        return ()
    out = []
    for k, entry in enumerate(entries, start=1):
        where = f"[[{key}]] entry {k}"
        reader.unknown_keys(where, entry, _KNOWN_KEYS[key])
        values = {}
        for field_name in ("level", "unit", "site"):
            if field_name not in entry:
                reader.report.error(reader.path, where, f"{field_name} is not given",
                                    f"give level, unit and site in every [[{key}]] entry")
            values[field_name] = reader.get(where, entry, field_name, "id")
        if all(values.values()):
            out.append(Lock(values["level"].lower(), values["unit"], values["site"]))
    return tuple(out)


def validate_project(path: str | Path) -> tuple[Inputs | None, Report]:
    """Read and check a project: (Inputs, report), Inputs None when there are errors.

    Reads only (nothing is written). Every problem found is in the report at once; see
    :mod:`districting.validate` for the checks.
    """
    report = Report(path)
    settings = read_settings(path, report)
    if settings is None:
        return None, report
    from .intake import Intake  # intake reads the sources; it imports this module

    return Intake(settings, report).run(), report


def load_project(path: str | Path) -> Inputs:
    """Read, validate and return a project's inputs; raise ProjectError listing every error."""
    inputs, report = validate_project(path)
    if inputs is None:
        raise ProjectError(report)
    return inputs
