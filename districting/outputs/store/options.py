"""Named options (saved plans) in the store: save, list, load, rename, delete.

Each option is a row of ``districting_options`` (headline figures and JSON of the run
settings, plan and metrics), its assignment rows, and its zones in the features layer;
see :mod:`.storefile` for the store itself.
"""

from __future__ import annotations

import json
import os
import sqlite3
import warnings
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pyogrio

from ... import DRAFT_NOTICE
from ...intake import Inputs
from ...names import BadName, check_name, normalise
from ...plan import PlanMetrics
from ...study import Outcome, RunSettings, level_sites, now_iso, outcome_from_assignment
from ..wording import no_plan_error
from ..zones import dissolve_zones
from .storefile import (
    ASSIGNMENTS_TABLE,
    OPTIONS_TABLE,
    ZONES_LAYER,
    OptionError,
    _edit,
    _has_table,
    _plain,
    _read,
    _touch,
)

__all__ = ["OptionInfo", "save_option", "list_options", "load_option", "delete_option",
           "rename_option", "option_settings", "option_zones", "check_option_name",
           "metrics_to_dict"]

_PLAN_FIELDS = ("status", "objective", "bound", "gap", "rounds", "cuts", "message", "route",
                "build_seconds", "solve_seconds")


@dataclass(frozen=True)
class OptionInfo:
    """One saved option as listed (the headline figures; load it for the rest)."""

    name: str
    level: str
    plan_year: int | None
    created: str  # ISO 8601 UTC: when the plan was made
    saved: str  # ISO 8601 UTC: when it was written to the store
    status: str
    objective: float
    gap: float
    students_moved: float
    units_moved: int
    mean_distance: float  # metres, student-weighted over the level
    max_distance: float  # metres
    out_of_band: int  # open schools outside the utilization band in some year
    n_units: int


# ---------------------------------------------------------------------------- JSON helpers
def _dumps(value) -> str:
    return json.dumps(_plain(value), ensure_ascii=False, sort_keys=True)


def metrics_to_dict(metrics: PlanMetrics, site_ids, years) -> dict:
    """A :class:`PlanMetrics` as plain data: per-site lists follow ``site_ids``."""
    return _plain({
        "site_ids": list(site_ids),
        "years": list(years),
        "load": metrics.load,
        "utilization": metrics.utilization,
        "moved_in": metrics.moved_in,
        "moved_out": metrics.moved_out,
        "students_moved": metrics.students_moved,
        "units_moved": metrics.units_moved,
        "mean_distance": metrics.mean_distance,
        "max_distance": metrics.max_distance,
        "overall_mean_distance": metrics.overall_mean_distance,
        "overall_max_distance": metrics.overall_max_distance,
        "out_of_band": metrics.out_of_band,
    })


def _same_metrics(a: dict, b: dict, rtol: float = 1e-9) -> bool:
    if a.keys() != b.keys() or a["site_ids"] != b["site_ids"] or a["years"] != b["years"]:
        return False
    for key in a:
        if key in ("site_ids", "years"):
            continue
        x = np.asarray(a[key], dtype=float)  # None -> nan
        y = np.asarray(b[key], dtype=float)
        if x.shape != y.shape or not np.allclose(x, y, rtol=rtol, atol=1e-9, equal_nan=True):
            return False
    return True


# ---------------------------------------------------------------------------- options
def _lookup_name(name: str) -> str:
    """A name to look up (normalised, not checked: options saved before the rule stay
    reachable, to open, rename or delete)."""
    if not isinstance(name, str) or not normalise(name):
        raise OptionError("give the name of a saved option (`districting options PROJECT` "
                          "lists them)")
    return normalise(name)


def check_option_name(store: str | os.PathLike, name: str, overwrite: bool = False) -> str:
    """The checked name of a new option (:func:`districting.names.check_name`), before any
    work: :class:`OptionError` when it breaks the name rule, when the store is damaged, or
    when the name is taken and ``overwrite`` is false."""
    try:
        name = check_name(name)
    except BadName as exc:
        raise OptionError(str(exc)) from None
    with _read(store) as con:
        taken = name in _names(con)
    if taken and not overwrite:
        raise OptionError(f"{store}: an option named {name!r} exists; choose another name, "
                          "or replace it (--overwrite, or tick 'Replace' in the workbench)")
    return name


def _names(con: sqlite3.Connection | None) -> list[str]:
    if con is None:
        return []
    return [r[0] for r in con.execute(f"SELECT name FROM {OPTIONS_TABLE} ORDER BY fid")]


def _unknown(store: Path, name: str, names: list[str]) -> OptionError:
    listed = ", ".join(repr(n) for n in names) if names else "none saved yet"
    return OptionError(f"{store}: no option named {name!r} (options: {listed})")


def save_option(inputs: Inputs, outcome: Outcome, name: str, overwrite: bool = False) -> None:
    """Save ``outcome`` under ``name`` in the project's store, atomically.

    Stores the resolved run settings, the plan (assignment by unit id and site id, open
    sites, status, objective, bound, gap, rounds) and its metrics. A name already in use
    raises :class:`OptionError` unless ``overwrite`` is true.
    """
    store = Path(inputs.settings.store)
    name = check_option_name(store, name, overwrite)
    if not outcome.plan.feasible:
        raise OptionError(no_plan_error(
            f"option {name!r}", outcome.plan.message,
            "Change the settings and run it again before saving."))
    if len(outcome.unit_ids) != len(inputs.units):
        raise OptionError(
            f"option {name!r} has {len(outcome.unit_ids)} units but the project has "
            f"{len(inputs.units)}; re-run it on this project before saving"
        )
    plan = outcome.plan
    site_ids = outcome.site_ids
    metrics = outcome.metrics
    years = list(outcome.problem.years)
    site_of_unit = outcome.site_id_of(np.asarray(plan.assignment))
    plan_data = {f: getattr(plan, f) for f in _PLAN_FIELDS}
    plan_data["open_sites"] = [s for s, o in zip(site_ids, plan.open_sites, strict=True) if o]
    plan_data["history"] = [
        {"number": r.number, "objective": r.objective, "bound": r.bound, "gap": r.gap,
         "cuts_added": r.cuts_added, "fragments": r.fragments, "seconds": r.seconds}
        for r in plan.history
    ]
    row = {
        "name": name,
        "level": outcome.level,
        "plan_year": outcome.settings.plan_year,
        "created": outcome.created or now_iso(),
        "saved": now_iso(),
        "status": plan.status,
        "objective": _plain(float(plan.objective)),
        "gap": _plain(float(plan.gap)),
        "students_moved": float(metrics.students_moved),
        "units_moved": int(metrics.units_moved),
        "mean_distance_m": float(metrics.overall_mean_distance),
        "max_distance_m": float(metrics.overall_max_distance),
        "out_of_band": int(np.count_nonzero(metrics.out_of_band)),
        "n_units": len(site_of_unit),
        "notice": DRAFT_NOTICE,
        "settings_json": _dumps(outcome.settings.to_dict()),
        "plan_json": _dumps(plan_data),
        "metrics_json": _dumps(metrics_to_dict(metrics, site_ids, years)),
    }
    units = [(name, u, s) for u, s in zip(outcome.unit_ids, site_of_unit.tolist(), strict=True)]
    zones = _zones_layer(outcome, name, site_of_unit)

    def add_zones(path: Path) -> None:
        exists = ZONES_LAYER in {n for n, _ in pyogrio.list_layers(path)}
        # no R-tree: its triggers call SpatiaLite functions that plain sqlite3 lacks, and
        # delete / rename edit this layer with plain SQL
        pyogrio.write_dataframe(zones, path, layer=ZONES_LAYER, driver="GPKG", append=exists,
                                promote_to_multi=True, geometry_type="MultiPolygon",
                                layer_options=None if exists else {
                                    "SPATIAL_INDEX": "NO",
                                    "DESCRIPTION": "Zones of the saved options"})

    with _edit(store, then=add_zones) as con:
        if name in _names(con):
            if not overwrite:
                raise OptionError(
                    f"{store}: an option named {name!r} exists; choose another name or "
                    "overwrite it"
                )
            _delete(con, name)
        cols = ", ".join(row)
        marks = ", ".join("?" for _ in row)
        con.execute(f"INSERT INTO {OPTIONS_TABLE} ({cols}) VALUES ({marks})", list(row.values()))
        con.executemany(
            f"INSERT INTO {ASSIGNMENTS_TABLE} (option, unit_id, site_id) VALUES (?, ?, ?)", units
        )
        _touch(con, OPTIONS_TABLE, ASSIGNMENTS_TABLE)


def _zones_layer(outcome: Outcome, name: str, site_of_unit: np.ndarray):
    """The option's dissolved zones as rows of :data:`ZONES_LAYER`."""
    zones = dissolve_zones(outcome.inputs.units[["unit_id", "geometry"]], site_of_unit,
                           site_ids=outcome.site_ids, counts=outcome.problem.demand[0],
                           coverage=outcome.inputs.units_coverage)
    names = dict(zip(outcome.site_ids, outcome.sites["name"].astype(str), strict=True))
    zones = zones[["site_id", "n_units", "students", "n_parts", "geometry"]].copy()
    zones.insert(0, "name", zones["site_id"].map(names))
    zones.insert(0, "level", outcome.level)
    zones.insert(0, "option", name)
    return zones


def _info(row: sqlite3.Row) -> OptionInfo:
    def num(v):
        return float("nan") if v is None else float(v)

    return OptionInfo(
        name=row["name"], level=row["level"], plan_year=row["plan_year"],
        created=row["created"], saved=row["saved"], status=row["status"],
        objective=num(row["objective"]), gap=num(row["gap"]),
        students_moved=num(row["students_moved"]), units_moved=int(row["units_moved"] or 0),
        mean_distance=num(row["mean_distance_m"]), max_distance=num(row["max_distance_m"]),
        out_of_band=int(row["out_of_band"] or 0), n_units=int(row["n_units"] or 0),
    )


def list_options(store_path: str | os.PathLike) -> list[OptionInfo]:
    """The saved options, oldest first (an empty list when nothing is saved yet)."""
    with _read(store_path) as con:
        if con is None:
            return []
        con.row_factory = sqlite3.Row
        return [_info(r) for r in con.execute(f"SELECT * FROM {OPTIONS_TABLE} ORDER BY fid")]


def _fetch(store: Path, name: str) -> tuple[sqlite3.Row, dict[str, str]]:
    with _read(store) as con:
        names = _names(con)
        if name not in names:
            raise _unknown(store, name, names)
        con.row_factory = sqlite3.Row
        row = con.execute(f"SELECT * FROM {OPTIONS_TABLE} WHERE name = ?", (name,)).fetchone()
        pairs = dict(con.execute(
            f"SELECT unit_id, site_id FROM {ASSIGNMENTS_TABLE} WHERE option = ?", (name,)
        ).fetchall())
    return row, pairs


def option_settings(store_path: str | os.PathLike, name: str) -> RunSettings:
    """The run settings an option was made with (to re-run or edit it)."""
    row, _ = _fetch(Path(store_path), _lookup_name(name))
    return RunSettings.from_dict(json.loads(row["settings_json"]))


def option_zones(store_path: str | os.PathLike, name: str) -> tuple[str, dict[str, str]]:
    """(level, unit id -> site id) of a saved option, without rebuilding it (feeder tables
    and rules read only its zones). Raises :class:`OptionError` for an unknown name."""
    row, pairs = _fetch(Path(store_path), _lookup_name(name))
    level = json.loads(row["settings_json"]).get("level", "")
    return str(level), {u: s for u, s in pairs.items() if s}


def load_option(inputs: Inputs, name: str) -> Outcome:
    """Rebuild a saved option on ``inputs``: the same assignment, plan fields and metrics.

    Raises :class:`OptionError` for an unknown name (listing the saved ones), or when the
    project's units or sites no longer match the option. Warns when the recomputed metrics
    differ from the saved ones (the project's counts or sites changed since it was saved).
    """
    name = _lookup_name(name)
    store = Path(inputs.settings.store)
    row, pairs = _fetch(store, name)
    rs = RunSettings.from_dict(json.loads(row["settings_json"]))
    plan_data = json.loads(row["plan_json"])
    site_ids = inputs.sites["site_id"].astype(str).to_numpy()[level_sites(inputs, rs.level)]
    site_pos = {s: j for j, s in enumerate(site_ids.tolist())}
    unit_ids = inputs.units["unit_id"].astype(str).tolist()
    missing = [u for u in unit_ids if u not in pairs]
    extra = sorted(set(pairs) - set(unit_ids))
    if missing or extra:
        raise OptionError(
            f"{store}: option {name!r} does not match the project's units ("
            f"{len(missing)} units without a school, e.g. {missing[:3]}; {len(extra)} unknown "
            f"units, e.g. {extra[:3]}); re-run the option on the current units"
        )
    bad = sorted({s for s in pairs.values() if s and s not in site_pos})
    if bad:
        raise OptionError(
            f"{store}: option {name!r} assigns units to {rs.level} sites {bad} that the "
            f"project no longer has (sites: {', '.join(site_pos)})"
        )
    assignment = np.array([site_pos.get(pairs[u], -1) for u in unit_ids], dtype=np.int64)
    fields = {k: v for k, v in plan_data.items() if k in _PLAN_FIELDS}
    fields = {k: (float("nan") if v is None else v) for k, v in fields.items()}
    outcome = outcome_from_assignment(inputs, rs, assignment, fields, name=row["name"],
                                      created=row["created"])
    saved = json.loads(row["metrics_json"])
    fresh = metrics_to_dict(outcome.metrics, outcome.site_ids, outcome.problem.years)
    if not _same_metrics(saved, fresh):
        warnings.warn(
            f"option {name!r}: its figures differ from those saved on {row['saved']} (the "
            "project's student counts, capacities or sites changed since); the figures shown "
            "are recomputed on the current project",
            stacklevel=2,
        )
    return outcome


def _delete(con: sqlite3.Connection, name: str) -> None:
    con.execute(f"DELETE FROM {OPTIONS_TABLE} WHERE name = ?", (name,))
    con.execute(f"DELETE FROM {ASSIGNMENTS_TABLE} WHERE option = ?", (name,))
    if _has_table(con, ZONES_LAYER):
        con.execute(f"DELETE FROM {ZONES_LAYER} WHERE option = ?", (name,))


def delete_option(store: str | os.PathLike, name: str) -> None:
    """Remove an option (atomically); unknown names raise :class:`OptionError`."""
    name = _lookup_name(name)
    store = Path(store)
    with _read(store) as con:  # fail before copying the store
        names = _names(con)
    if name not in names:
        raise _unknown(store, name, names)
    with _edit(store) as con:
        _delete(con, name)
        _touch(con, OPTIONS_TABLE, ASSIGNMENTS_TABLE)


def rename_option(store: str | os.PathLike, old: str, new: str) -> None:
    """Rename an option (atomically); the new name must be free."""
    old = _lookup_name(old)
    try:
        new = check_name(new)
    except BadName as exc:
        raise OptionError(str(exc)) from None
    store = Path(store)
    with _read(store) as con:
        names = _names(con)
    if old not in names:
        raise _unknown(store, old, names)
    if new == old:
        return
    if new in names:
        raise OptionError(f"{store}: an option named {new!r} exists; choose another name")
    with _edit(store) as con:
        con.execute(f"UPDATE {OPTIONS_TABLE} SET name = ? WHERE name = ?", (new, old))
        con.execute(f"UPDATE {ASSIGNMENTS_TABLE} SET option = ? WHERE option = ?", (new, old))
        if _has_table(con, ZONES_LAYER):
            con.execute(f"UPDATE {ZONES_LAYER} SET option = ? WHERE option = ?", (new, old))
        _touch(con, OPTIONS_TABLE, ASSIGNMENTS_TABLE)
