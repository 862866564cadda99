"""The project file's schema, declared once: tables -> keys -> kind, default, range, meaning.

:func:`districting.intake.read_settings` checks every key of a project file against
:data:`SCHEMA` (unknown tables and keys are errors that suggest the nearest valid name;
wrong kinds and out-of-range values are errors that say what to write), and the key
reference in DEVELOPERS.md ("Project file (TOML)") is :func:`reference_markdown` of the
same table, so the documentation and the checks cannot drift apart (a test compares them).
Relations between keys (min below max utilization, plan_year among years...) are checked
in :mod:`districting.intake.settings`; their rule is stated in the keys' help here.

``python -m districting.intake.schema`` prints the reference.
"""

from __future__ import annotations

import difflib
import math
import unicodedata
from collections.abc import Mapping
from dataclasses import dataclass, field

from ..travel.measures import MEASURES

__all__ = ["Key", "Table", "SCHEMA", "KINDS", "MAX_SHARE", "check_value", "suggest",
           "table_of", "reference_markdown", "default", "example"]

#: What each kind of value must be, in words, and an example of it.
KINDS: dict[str, tuple[str, str]] = {
    "text": ("text", '"name"'),
    "path": ("a file path (text, relative to the project file)", '"town.gpkg"'),
    "id": ("an id (text)", '"U0412"'),
    "int": ("a whole number", "2027"),
    "number": ("a number", "0.9"),
    "choice": ("one of the listed words", '"rook"'),
    "years": ("a list of years (whole numbers)", "[2027, 2028]"),
    "names": ("a list of names (text)", '["elementary", "middle"]'),
    "level_number": ("a table of level = number", "{ high = 15000 }"),
    "level_int": ("a table of level = whole number", "{ elementary = 6 }"),
    "level_text": ("a table of level = column name", '{ elementary = "zone_el" }'),
    "level_option": ("a table of level = saved option name",
                     '{ elementary = "Option A" }'),
    "bool": ("true or false", "true"),
}
#: Utilization is a share of capacity; above this it was surely written as a percentage.
#: 2.0 (200 %) is a choice of ours, far above the crowding any district plans for.
MAX_SHARE = 2.0
_YEARS = (1900, 2200)  # a year outside these was mistyped (27 for 2027)


@dataclass(frozen=True)
class Key:
    """One key of a table: its kind, default, allowed range and meaning."""

    kind: str
    help: str
    default: object = None  # None: not set unless written
    required: bool = False
    low: float | None = None
    high: float | None = None
    low_open: bool = False  # the bound itself is not allowed
    high_open: bool = False
    choices: tuple[str, ...] = ()
    share: bool = False  # a share of capacity (0.9 = 90 %)

    def allowed(self) -> str:
        """The allowed values in words ("" when any value of the kind goes)."""
        if self.choices:
            return " or ".join(f'"{c}"' for c in self.choices)
        if self.low is None and self.high is None:
            return ""
        if self.low is not None and self.high is not None and not (self.low_open
                                                                    or self.high_open):
            return f"from {self.low:g} to {self.high:g}"
        words = []
        if self.low is not None:
            words.append(f"{'above' if self.low_open else 'at least'} {self.low:g}")
        if self.high is not None:
            words.append(f"{'below' if self.high_open else 'at most'} {self.high:g}")
        return " and ".join(words)


@dataclass(frozen=True)
class Table:
    """One table of the project file; ``array`` for [[locks]]-style arrays of tables."""

    help: str
    keys: dict[str, Key] = field(default_factory=dict)
    required: bool = False
    array: bool = False


def _source(what: str) -> dict[str, Key]:
    return {"source": Key("path", f"file of the {what} (GeoPackage, GeoJSON, zipped Shapefile, "
                          "FlatGeobuf)", required=True),
            "layer": Key("text", "layer name (needed when the file holds several layers)")}


def _pairs(what: str) -> Table:
    return Table(f"{what}; one [[...]] entry per unit", array=True, keys={
        "level": Key("id", "school level", required=True),
        "unit": Key("id", "planning unit id", required=True),
        "site": Key("id", "site id", required=True),
    })


def _util(help_: str, default: float, high: float, low_open: bool = False) -> Key:
    return Key("number", help_, default, low=0.0, high=high, low_open=low_open, share=True)


SCHEMA: dict[str, Table] = {
    "project": Table("the project", required=True, keys={
        "name": Key("text", "shown on maps and packets (default: the file's name)"),
        "current_year": Key("int", "the year of today's counts and zones", required=True,
                            low=_YEARS[0], high=_YEARS[1]),
        "years": Key("years", "projected years, each after current_year; capacity must "
                     "hold in each", required=True, low=_YEARS[0], high=_YEARS[1]),
        "plan_year": Key("int", "the year new zones take effect, one of years (default: "
                         "the first)", low=_YEARS[0], high=_YEARS[1]),
        "levels": Key("names", "school levels, each named once",
                      ["elementary", "middle", "high"]),
        "store": Key("path", "GeoPackage of saved options (default: <file name>.options.gpkg)"),
    }),
    "units": Table("planning units (polygons)", required=True, keys={
        **_source("planning units"),
        "id": Key("text", "column of the unit ids", "unit_id"),
        "counts": Key("text", "column name template of student counts; holds {year} (and "
                      "{level} with several levels)", "{level}_{year}"),
        "point_x": Key("text", "column of a population-weighted point's x (with point_y)", ""),
        "point_y": Key("text", "column of a population-weighted point's y (with point_x)", ""),
    }),
    "counts": Table("student counts from a CSV joined on the unit id (optional)", keys={
        "source": Key("path", "CSV file, one row per unit", required=True),
        "id": Key("text", "column of the unit ids", "unit_id"),
    }),
    "sites": Table("school sites (points)", required=True, keys={
        **_source("school sites"),
        "id": Key("text", "column of the site ids", "site_id"),
        "name": Key("text", "column of the school names", "name"),
        "level": Key("text", "column of the school level", "level"),
        "capacity": Key("text", "column of the capacity (students)", "capacity"),
        "status": Key("text", "column of the status: open, closing, new, candidate, closed",
                      "status"),
        "min_util": Key("text", "column of a site's own minimum utilization (optional)", ""),
        "max_util": Key("text", "column of a site's own maximum utilization (optional)", ""),
    }),
    "zones": Table("today's attendance zone of each unit, per level (site ids)", keys={
        "source": Key("path", "file holding the zone columns (may be the units' file)",
                      required=True),
        "layer": Key("text", "layer name (needed when the file holds several layers)"),
        "id": Key("text", "column of the unit ids", "unit_id"),
        "columns": Key("level_text", "level = column of today's site id", {}),
    }),
    "barriers": Table("lines that cut adjacency (river, highway, rail)",
                      keys=_source("barrier lines")),
    "bridges": Table("points or short lines that keep a pair connected across a barrier",
                     keys=_source("bridges")),
    "streets": Table("street centrelines (lines) for travel along streets; streets meet only "
                     "at a shared vertex", keys={
        **_source("street lines"),
        "max_access": Key("number", "metres from a unit's point or a site to its nearest "
                          "street beyond which the check names it (500: our choice, a "
                          "few blocks)", 500.0, low=0.0),
    }),
    "adjacency": Table("which units are neighbours", keys={
        "contiguity": Key("choice", "rook: a shared border; queen: a shared corner is enough",
                          "rook", choices=("rook", "queen")),
        "links": Key("path", "CSV of manual links: unit_a, unit_b, action (add | remove)"),
    }),
    "solve": Table("defaults of every run (a run may override them)", keys={
        "max_utilization": _util("highest share of capacity a school may fill, each year "
                                 "(1.0 = 100 %)", 1.0, MAX_SHARE, low_open=True),
        "min_utilization": _util("lowest share of capacity of an open school, at most "
                                 "max_utilization", 0.0, 1.0),
        "stability_weight": Key("number", "metres of travel charged per student moved from "
                                "today's school", 0.0, low=0.0),
        "keep_option_weight": Key("number", "metres of travel charged per student moved away "
                                  "from the option being edited, when a rerun starts from a "
                                  "saved option (0 = a free rerun)", 3000.0, low=0.0),
        "gap": Key("number", "relative optimality gap to prove (1e-4 = 0.01 %)", 1e-4,
                   low=0.0, high=1.0, high_open=True),
        "time_limit": Key("number", "seconds per solve; the best plan found is kept; 0 = no "
                          "limit", 60.0, low=0.0),
        "solver": Key("text", "\"highs\"; \"scip-tree\" (one SCIP branch-and-cut "
                      "tree, opt-in); or any solver name Pyomo drives", "highs"),
        "travel": Key("choice", "how travel is measured: along streets, around barriers "
                      "crossing only at bridges, or the straight line (default: streets "
                      "when the project has [streets], else barrier-aware)",
                      choices=MEASURES),
        "travel_matrix": Key("path", "CSV unit_id, site_id, cost (replaces distances)"),
        "max_moved": Key("number", "students allowed to change school; 0 = no limit", 0.0,
                         low=0.0),
        "max_distance": Key("level_number", "level = longest travel in metres; 0 = no "
                            "limit", {}, low=0.0),
        "open_count": Key("level_int", "level = number of open sites when some are "
                          "candidates", {}, low=1),
    }),
    "feeders": Table("feeder patterns between levels (optional): whose zones stand for a "
                     "level, and the levels solved against a neighbouring level's zones", keys={
        "zones": Key("level_option", "level = saved option whose zones stand for that level "
                     "in feeder tables and feeder rules (default: today's zones)", {}),
        "whole": Key("names", "levels solved with whole feeding: every zone of the level "
                     "below (held fixed) lies inside one zone of this level", []),
        "nested": Key("names", "levels solved nested: every zone of this level lies inside "
                      "one zone of the level above (held fixed)", []),
        "max_splits": Key("level_int", "level (one of whole) = splits allowed: each school "
                          "of the level below feeds at most 1 + this many schools of it (0: "
                          "whole feeding)", {}, low=0),
    }),
    "walking": Table("walking distance per level and the rules on walkers and transport "
                     "(distances along the run's travel measure)", keys={
        "distance": Key("level_number", "level = metres within which students walk to "
                        "school; students beyond it need transport; 0 = no walk zone "
                        "(default 1,600 / 2,400 / 3,200 m: common practice in many "
                        "districts, from memory; the district's policy and local law "
                        "decide)", {"elementary": 1600.0, "middle": 2400.0, "high": 3200.0},
                        low=0.0),
        "keep_walkers": Key("bool", "a unit within walking distance of an open school stays "
                            "in the zone of such a school", False),
        "max_transported": Key("level_number", "level = most students (plan year) living "
                               "beyond walking distance of their school; 0 = no limit", {},
                               low=0.0),
        "transport_charge": Key("number", "metres of travel charged per (plan-year) student "
                                "living beyond walking distance of their school; 0 = none",
                                0.0, low=0.0),
    }),
    "groups": Table("student groups per unit (e.g. meal support), kept near the district's "
                    "share in every open school", keys={
        "columns": Key("names", "column name templates of each group's students, read from "
                       "the units layer or the counts CSV like the counts template: with "
                       "{year}, the band holds in every projected year; without it, the "
                       "column is the plan year's ({level} with several levels)", []),
        "band_points": Key("number", "percentage points a school's share of a group may "
                           "differ from the district's share of that level; 0 = shares "
                           "reported, no band", 0.0, low=0.0, high=100.0),
    }),
    "locks": _pairs("units the board has decided: unit goes to site"),
    "forbids": _pairs("unit may not go to site"),
}


def example(spec: Key) -> str:
    """A value to show in a fix: the key's default when it has a telling one."""
    v = spec.default
    if spec.choices and v is None:
        return f'"{spec.choices[0]}"'
    if spec.kind in ("number", "int") and isinstance(v, int | float) and v:
        return repr(v)
    if spec.kind in ("text", "choice") and isinstance(v, str) and v:
        return f'"{v}"'
    return KINDS[spec.kind][1]


def default(table: str, key: str):
    """The schema's default of ``table.key`` (a fresh copy of a list or table)."""
    value = SCHEMA[table].keys[key].default
    return type(value)(value) if isinstance(value, list | dict) else value


# ----------------------------------------------------------------------------- checks
def _is_int(x) -> bool:
    return isinstance(x, int) and not isinstance(x, bool)


def _is_num(x) -> bool:
    return (_is_int(x) or isinstance(x, float)) and math.isfinite(x)


def _convert(kind: str, v) -> tuple[bool, object]:
    """(ok, value) for a TOML value that should be of ``kind``."""
    if kind in ("text", "path"):
        return isinstance(v, str), v.strip() if isinstance(v, str) else v
    if kind == "choice":
        return isinstance(v, str), v.strip().lower() if isinstance(v, str) else v
    if kind == "id":  # NFC, as ids read from the data (validate.text_values)
        ok = (isinstance(v, str) and v.strip() != "") or _is_int(v)
        return ok, unicodedata.normalize("NFC", str(v).strip())
    if kind == "int":
        return _is_int(v), v
    if kind == "bool":
        return isinstance(v, bool), v
    if kind == "number":
        return _is_num(v), float(v) if _is_num(v) else v
    if kind == "years":
        return isinstance(v, list) and len(v) > 0 and all(map(_is_int, v)), v
    if kind == "names":
        ok = isinstance(v, list) and len(v) > 0 and all(isinstance(x, str) and x.strip()
                                                        for x in v)
        return ok, [x.strip().lower() for x in v] if ok else v
    check = {"level_number": _is_num, "level_int": _is_int,
             "level_text": lambda x: isinstance(x, str),
             "level_option": lambda x: isinstance(x, str) and x.strip() != ""}[kind]
    ok = isinstance(v, dict) and all(check(x) for x in v.values())
    return ok, {str(k).strip().lower(): x for k, x in v.items()} if ok else v


def _in_range(spec: Key, x: float) -> bool:
    if spec.low is not None and (x < spec.low or (spec.low_open and x == spec.low)):
        return False
    return not (spec.high is not None and (x > spec.high or (spec.high_open and x == spec.high)))


def _shown(v) -> str:
    return f"{v:g}" if isinstance(v, float) else repr(v) if isinstance(v, str) else str(v)


def check_value(table: str, key: str, value) -> tuple[object, str | None, str | None]:
    """(value, problem, fix): ``value`` converted, or a problem in words and how to fix it.

    ``problem`` is None when the value is fine. For per-level tables the range applies to
    each level's value; for year lists, to each year.
    """
    spec = SCHEMA[table].keys[key]
    what = KINDS[spec.kind][0]
    ok, v = _convert(spec.kind, value)
    if not ok:
        return value, f"{key} must be {what}, not {_shown(value)}", (
            f"write e.g. {key} = {example(spec)}")
    if spec.choices and v not in spec.choices:
        near = suggest(str(v), spec.choices)
        return value, (f"{key} = {_shown(v)} is not one of {spec.allowed()}"), (
            f"write {key} = \"{near or spec.choices[0]}\"")
    numbers = (list(v.values()) if isinstance(v, dict) else v if isinstance(v, list)
               else [v] if _is_num(v) else [])
    bad = [x for x in numbers if _is_num(x) and not _in_range(spec, x)]
    if bad:
        x = bad[0]
        fix = f"use a value {spec.allowed()}"
        if spec.share and MAX_SHARE < x <= 100 * MAX_SHARE:
            fix = (f"utilization is a share of capacity: write {key} = {x / 100:g} for "
                   f"{x:g}%")
        elif spec.share:
            fix = f"utilization is a share of capacity (0.9 = 90%): {fix}"
        elif spec.kind in ("int", "years") and spec.low and 0 <= x < 100:
            fix = f"write the year in full (e.g. {2000 + x} for {x})"
        shown = (f"{key} = {_shown(value)}" if spec.kind in ("number", "int")
                 else f"{key} holds {_shown(x)}")
        return value, f"{shown}, which is out of range ({spec.allowed()})", fix
    return v, None, None


def suggest(word: str, known) -> str | None:
    """The known name nearest to ``word`` (difflib), or None when none is close."""
    known = list(known)
    folded = {k.lower().replace("-", "_").replace(" ", "_"): k for k in known}
    key = word.lower().replace("-", "_").replace(" ", "_")
    if key in folded:
        return folded[key]
    near = difflib.get_close_matches(key, list(folded), n=1, cutoff=0.6)
    return folded[near[0]] if near else None


def table_of(key: str) -> str | None:
    """The one table that has ``key`` (to say "time_limit belongs in [solve]"), if any."""
    owners = [t for t, spec in SCHEMA.items() if key in spec.keys]
    return owners[0] if len(owners) == 1 else None


# ----------------------------------------------------------------------------- the docs
def _default_text(spec: Key) -> str:
    if spec.required:
        return "required"
    v = spec.default
    if v is None or v == "" or v == {}:
        return "-"
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, list):
        return "[" + ", ".join(f'"{x}"' for x in v) + "]"
    if isinstance(v, dict):
        return "{ " + ", ".join(f"{k} = {x:g}" for k, x in v.items()) + " }"
    return f'"{v}"' if isinstance(v, str) else f"{v:g}" if isinstance(v, float) else str(v)


#: The [solve] keys a single run may override (command-line flags, the workbench, the API).
RUN_KEYS = ("max_utilization", "min_utilization", "stability_weight", "gap", "time_limit",
            "max_moved", "travel", "keep_option_weight")


def check_run(values: Mapping[str, object], where: str = "run settings") -> None:
    """Refuse run settings that the project file's [solve] table would refuse (ValueError).

    ``values`` maps [solve] keys (see :data:`RUN_KEYS`) to a run's values; the same ranges
    hold for a run as for the file, and the lowest utilization may not exceed the highest.
    """
    problems = []
    for key in RUN_KEYS:
        if values.get(key) is None:
            continue
        _v, problem, fix = check_value("solve", key, values[key])
        if problem is not None:
            problems.append(f"{problem}; fix: {fix}")
    low, high = values.get("min_utilization"), values.get("max_utilization")
    if low is not None and high is not None and _is_num(low) and _is_num(high) and low > high:
        problems.append(f"min_utilization {low:g} is above max_utilization {high:g}; fix: "
                        "lower the lowest utilization or raise the highest")
    if problems:
        raise ValueError(f"{where}: " + "; ".join(problems))


def reference_markdown(schema: Mapping[str, Table] = SCHEMA) -> str:
    """The key reference of DEVELOPERS.md: one table of keys per project-file table."""
    lines = []
    for name, table in schema.items():
        head = f"[[{name}]]" if table.array else f"[{name}]"
        need = " (required)" if table.required else ""
        lines += [f"`{head}`{need}: {table.help}.", "",
                  "| key | value | default | allowed | meaning |", "|---|---|---|---|---|"]
        for key, spec in table.keys.items():
            allowed = spec.allowed()
            if spec.share:
                allowed += " (a share of capacity)"
            lines.append(f"| `{key}` | {KINDS[spec.kind][0]} | {_default_text(spec)} | "
                         f"{allowed or '-'} | {spec.help} |")
        lines.append("")
    return "\n".join(lines).rstrip("\n")


if __name__ == "__main__":
    print(reference_markdown())
