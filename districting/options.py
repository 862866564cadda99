"""Named options (saved plans) and workbench state, kept in the project's GeoPackage store.

The store (``inputs.settings.store``) is a GeoPackage (OGC GeoPackage 1.3, OGC 12-128r18),
an SQLite file. Options live in plain *attribute* tables, each registered in
``gpkg_contents`` with ``data_type = 'attributes'`` (spec clause 2.4) and keyed by an
``INTEGER PRIMARY KEY AUTOINCREMENT`` column, so GIS software lists them next to the
project's layers:

- ``districting_options``: one row per option: name, level, plan year, when it was made
  and saved, the headline figures (status, gap, students moved, distances...), and three
  JSON columns: the run settings (:meth:`~districting.study.RunSettings.to_dict`), the plan
  (status, objective, bound, gap, rounds, open sites...) and the metrics;
- ``districting_assignments``: (option, unit_id, site_id), one row per unit;
- ``districting_state``: (key, updated, state_json, revision) for the workbench; the
  revision rises by one per save, so a session that saves over a record another session
  changed since it read it is told (:class:`StateConflict`) instead of overwriting it;
- ``districting_zones``: a features layer (written by GDAL through pyogrio) with the
  dissolved zones of every option (option, level, site_id, name, n_units, students,
  n_parts), so a GIS user can map any saved option straight from the store.

Every change is atomic: the store is copied to a temporary file beside it, the copy is
edited and fsynced, and only then renamed over the original
(:func:`districting.io.atomic_copy_edit`); a crash or a kill mid-save leaves the previous
file as it was. A lock file beside the store serialises writers (the workbench and the
command line may save at the same time), so no save is lost to another's rename; its
holder removes it when done, and copies a killed writer left are removed at the next
start or save (:func:`tidy_store`). A store SQLite cannot read raises
:class:`StoreDamaged` naming the file; :func:`repair_store` sets it aside and starts anew.
New option names follow :func:`districting.names.check_name`; every statement is
parameterised.
"""

from __future__ import annotations

import contextlib
import glob
import json
import math
import os
import sqlite3
import warnings
from collections.abc import Callable, Iterator, Mapping
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pyogrio

from .intake import Inputs
from .io import atomic_copy_edit
from .names import BadName, check_name, normalise
from .plan import PlanMetrics
from .study import Outcome, RunSettings, level_sites, now_iso, outcome_from_assignment

try:  # POSIX advisory locks; elsewhere writers are not serialised across processes
    import fcntl
except ImportError:  # pragma: no cover - Windows
    fcntl = None

__all__ = [
    "OptionInfo",
    "OptionError",
    "save_option",
    "list_options",
    "load_option",
    "delete_option",
    "rename_option",
    "option_settings",
    "save_state",
    "load_state",
    "state_record",
    "state_keys",
    "StateConflict",
    "StoreDamaged",
    "check_option_name",
    "store_problem",
    "repair_store",
    "tidy_store",
    "metrics_to_dict",
    "OPTIONS_TABLE",
    "ASSIGNMENTS_TABLE",
    "STATE_TABLE",
    "ZONES_LAYER",
]

OPTIONS_TABLE = "districting_options"
ASSIGNMENTS_TABLE = "districting_assignments"
STATE_TABLE = "districting_state"
#: Features layer with the zones of every saved option (column ``option``), for GIS users.
ZONES_LAYER = "districting_zones"

#: "GPKG" in ASCII, and version 1.3.0, per GeoPackage 1.3 clause 1.1.1.1.
GPKG_APPLICATION_ID = 0x47504B47
GPKG_USER_VERSION = 10300

_PLAN_FIELDS = ("status", "objective", "bound", "gap", "rounds", "cuts", "message", "route",
                "build_seconds", "solve_seconds")


class OptionError(ValueError):
    """An unknown option name, a name clash, or a store that cannot be read."""


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


# ---------------------------------------------------------------------------- the store file
_GPKG_CORE = [
    """CREATE TABLE IF NOT EXISTS gpkg_spatial_ref_sys (
        srs_name TEXT NOT NULL, srs_id INTEGER PRIMARY KEY, organization TEXT NOT NULL,
        organization_coordsys_id INTEGER NOT NULL, definition TEXT NOT NULL,
        description TEXT)""",
    """CREATE TABLE IF NOT EXISTS gpkg_contents (
        table_name TEXT NOT NULL PRIMARY KEY, data_type TEXT NOT NULL,
        identifier TEXT UNIQUE, description TEXT DEFAULT '',
        last_change DATETIME NOT NULL DEFAULT (strftime('%Y-%m-%dT%H:%M:%fZ','now')),
        min_x DOUBLE, min_y DOUBLE, max_x DOUBLE, max_y DOUBLE, srs_id INTEGER,
        CONSTRAINT fk_gc_r_srs_id FOREIGN KEY (srs_id) REFERENCES gpkg_spatial_ref_sys(srs_id))""",
    """CREATE TABLE IF NOT EXISTS gpkg_geometry_columns (
        table_name TEXT NOT NULL, column_name TEXT NOT NULL, geometry_type_name TEXT NOT NULL,
        srs_id INTEGER NOT NULL, z TINYINT NOT NULL, m TINYINT NOT NULL,
        CONSTRAINT pk_geom_cols PRIMARY KEY (table_name, column_name),
        CONSTRAINT fk_gc_tn FOREIGN KEY (table_name) REFERENCES gpkg_contents(table_name),
        CONSTRAINT fk_gc_srs FOREIGN KEY (srs_id) REFERENCES gpkg_spatial_ref_sys (srs_id))""",
]
# The three rows every GeoPackage holds (GeoPackage 1.3, clause 1.1.2.1.2).
_WGS84_WKT = (
    'GEOGCS["WGS 84",DATUM["WGS_1984",SPHEROID["WGS 84",6378137,298.257223563,'
    'AUTHORITY["EPSG","7030"]],AUTHORITY["EPSG","6326"]],PRIMEM["Greenwich",0,'
    'AUTHORITY["EPSG","8901"]],UNIT["degree",0.0174532925199433,AUTHORITY["EPSG","9122"]],'
    'AXIS["Latitude",NORTH],AXIS["Longitude",EAST],AUTHORITY["EPSG","4326"]]'
)
_SRS_ROWS = [
    ("WGS 84 geodetic", 4326, "EPSG", 4326, _WGS84_WKT, "longitude/latitude on WGS 84"),
    ("Undefined cartesian SRS", -1, "NONE", -1, "undefined", "undefined cartesian"),
    ("Undefined geographic SRS", 0, "NONE", 0, "undefined", "undefined geographic"),
]
_TABLES = {
    OPTIONS_TABLE: (
        """CREATE TABLE IF NOT EXISTS districting_options (
            fid INTEGER PRIMARY KEY AUTOINCREMENT, name TEXT NOT NULL UNIQUE,
            level TEXT NOT NULL, plan_year INTEGER, created TEXT NOT NULL, saved TEXT NOT NULL,
            status TEXT NOT NULL, objective REAL, gap REAL, students_moved REAL,
            units_moved INTEGER, mean_distance_m REAL, max_distance_m REAL,
            out_of_band INTEGER, n_units INTEGER, notice TEXT, settings_json TEXT NOT NULL,
            plan_json TEXT NOT NULL, metrics_json TEXT NOT NULL)""",
        "Saved attendance-zone options (one row per option)",
    ),
    ASSIGNMENTS_TABLE: (
        """CREATE TABLE IF NOT EXISTS districting_assignments (
            fid INTEGER PRIMARY KEY AUTOINCREMENT, option TEXT NOT NULL,
            unit_id TEXT NOT NULL, site_id TEXT NOT NULL, UNIQUE (option, unit_id))""",
        "School site of every planning unit, per saved option",
    ),
    STATE_TABLE: (
        """CREATE TABLE IF NOT EXISTS districting_state (
            fid INTEGER PRIMARY KEY AUTOINCREMENT, key TEXT NOT NULL UNIQUE,
            updated TEXT NOT NULL, state_json TEXT NOT NULL,
            revision INTEGER NOT NULL DEFAULT 1)""",
        "Workbench state (last settings, locks and site edits), per key",
    ),
}


def _init_store(con: sqlite3.Connection, fresh: bool) -> None:
    """Make ``con`` a GeoPackage holding our attribute tables (idempotent)."""
    if fresh:
        con.execute(f"PRAGMA application_id = {GPKG_APPLICATION_ID}")
        con.execute(f"PRAGMA user_version = {GPKG_USER_VERSION}")
    for sql in _GPKG_CORE:
        con.execute(sql)
    con.executemany(
        "INSERT OR IGNORE INTO gpkg_spatial_ref_sys (srs_name, srs_id, organization, "
        "organization_coordsys_id, definition, description) VALUES (?, ?, ?, ?, ?, ?)",
        _SRS_ROWS,
    )
    for table, (sql, description) in _TABLES.items():
        con.execute(sql)
        con.execute(
            "INSERT OR IGNORE INTO gpkg_contents (table_name, data_type, identifier, "
            "description) VALUES (?, 'attributes', ?, ?)",
            (table, table, description),
        )
    columns = {r[1] for r in con.execute(f"PRAGMA table_info({STATE_TABLE})")}
    if "revision" not in columns:  # a store written before records had revisions
        con.execute(f"ALTER TABLE {STATE_TABLE} ADD COLUMN revision INTEGER NOT NULL DEFAULT 1")


def _touch(con: sqlite3.Connection, *tables: str) -> None:
    con.executemany(
        "UPDATE gpkg_contents SET last_change = strftime('%Y-%m-%dT%H:%M:%fZ','now') "
        "WHERE table_name = ?",
        [(t,) for t in tables],
    )


class StoreDamaged(OptionError):
    """The option store cannot be read or written as SQLite: the message names the file and
    the way out (:func:`repair_store`)."""

    def __init__(self, store: Path, detail: str):
        self.store = Path(store)
        super().__init__(
            f"{self.store}: the option store is damaged or is not a GeoPackage ({detail}). "
            "The project's other files are untouched. To go on, set it aside and start a new, "
            "empty store: `districting options PROJECT --repair` (it is kept as "
            f"{self.store.stem}.damaged-<time>{self.store.suffix}, so its options can still be "
            "recovered with a GIS or SQLite tool), or point [project] store at another file."
        )


def _check_sqlite(path: Path) -> None:
    with open(path, "rb") as fh:
        head = fh.read(16)
    if head and head != b"SQLite format 3\x00":
        raise StoreDamaged(path, "it does not start as an SQLite file")


def _lock_path(store: Path) -> Path:
    return store.parent / f".{store.name}.lock"


@contextlib.contextmanager
def _writer_lock(store: Path, wait: bool = True) -> Iterator[bool]:
    """Hold an exclusive advisory lock on ``.<store>.lock`` while a save runs.

    Yields False (holding nothing) when ``wait`` is false and another writer holds it.
    The lock file is removed by its holder before release; a writer that locked a file
    someone removed meanwhile locks the new one instead, so two writers never both hold it.
    """
    store.parent.mkdir(parents=True, exist_ok=True)
    if fcntl is None:  # pragma: no cover
        yield True
        return
    path = _lock_path(store)
    while True:
        fd = os.open(path, os.O_RDWR | os.O_CREAT, 0o644)
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | (0 if wait else fcntl.LOCK_NB))
        except BlockingIOError:
            os.close(fd)
            yield False
            return
        try:
            same = os.stat(path).st_ino == os.fstat(fd).st_ino
        except FileNotFoundError:
            same = False
        if same:
            break
        os.close(fd)
    try:
        yield True
    finally:
        path.unlink(missing_ok=True)
        fcntl.flock(fd, fcntl.LOCK_UN)
        os.close(fd)


def _remove_stale(store: Path) -> None:
    """Remove copies (and their -journal files) left by a writer killed mid-save
    (io.atomic_path names); call only while holding the writer lock."""
    pattern = f".tmp-{glob.escape(store.stem)}-{'?' * 8}{glob.escape(store.suffix)}*"
    for stale in store.parent.glob(pattern):
        stale.unlink(missing_ok=True)


def tidy_store(store: str | os.PathLike) -> None:
    """Remove what a killed writer left beside the store, unless a writer is at work now."""
    store = Path(store)
    if not store.parent.is_dir():
        return
    with _writer_lock(store, wait=False) as held:
        if held:
            _remove_stale(store)


def _checkpoint(store: Path) -> None:
    """Fold a write-ahead log into the main file so a plain file copy holds every row."""
    if Path(str(store) + "-wal").exists():
        con = sqlite3.connect(store)
        try:
            con.execute("PRAGMA wal_checkpoint(TRUNCATE)")
        finally:
            con.close()


@contextlib.contextmanager
def _edit(store: str | os.PathLike, then: Callable[[Path], None] | None = None
          ) -> Iterator[sqlite3.Connection]:
    """A connection to a temporary copy of ``store``; committed and swapped in on success.

    ``then(path)`` runs on the committed copy before the swap (e.g. GDAL adding a layer).
    A store SQLite cannot read or write raises :class:`StoreDamaged`; the store is left
    as it was.
    """
    store = Path(store)
    with _writer_lock(store):
        _remove_stale(store)
        fresh = not store.exists()
        try:
            if not fresh:
                _check_sqlite(store)
                _checkpoint(store)
            with atomic_copy_edit(store) as tmp:
                con = sqlite3.connect(tmp, isolation_level=None)
                try:
                    # The copy is scratch until renamed: no journal or syncs are needed inside
                    # it; atomic_copy_edit fsyncs the finished file before the rename.
                    con.execute("PRAGMA journal_mode = OFF")
                    con.execute("PRAGMA synchronous = OFF")
                    con.execute("BEGIN")
                    _init_store(con, fresh)
                    yield con
                    con.execute("COMMIT")
                finally:
                    con.close()
                if then is not None:
                    then(tmp)
        except (sqlite3.IntegrityError, sqlite3.ProgrammingError):
            raise  # a statement's fault, not the file's
        except sqlite3.DatabaseError as exc:
            raise StoreDamaged(store, str(exc)) from None


@contextlib.contextmanager
def _read(store: str | os.PathLike) -> Iterator[sqlite3.Connection | None]:
    """A read-only connection, or ``None`` when the store or our tables do not exist yet."""
    store = Path(store)
    if not store.exists():
        yield None
        return
    _check_sqlite(store)
    try:
        con = sqlite3.connect(f"{store.resolve().as_uri()}?mode=ro", uri=True)
    except sqlite3.DatabaseError as exc:
        raise StoreDamaged(store, str(exc)) from None
    try:
        have = {r[0] for r in con.execute("SELECT name FROM sqlite_master WHERE type='table'")}
        yield con if OPTIONS_TABLE in have else None
    except sqlite3.DatabaseError as exc:
        raise StoreDamaged(store, str(exc)) from None
    finally:
        con.close()


def store_problem(store: str | os.PathLike) -> str:
    """'' when the store is absent or whole, else what SQLite's integrity check reports."""
    store = Path(store)
    if not store.exists():
        return ""
    try:
        _check_sqlite(store)
        with _read(store) as con:
            if con is None:
                return ""
            rows = [r[0] for r in con.execute("PRAGMA quick_check").fetchall()]
    except StoreDamaged as exc:
        return str(exc)
    except sqlite3.DatabaseError as exc:
        return str(exc)
    return "" if rows == ["ok"] else "; ".join(rows[:3])


def repair_store(store: str | os.PathLike) -> Path | None:
    """Set a damaged store aside (renamed ``<name>.damaged-<UTC time><suffix>``) and start
    a new, empty one; returns the damaged copy's path, or None when the store is whole."""
    store = Path(store)
    if not store_problem(store):
        return None
    stamp = now_iso().replace(":", "").replace("-", "")[:15]
    aside = store.with_name(f"{store.stem}.damaged-{stamp}{store.suffix}")
    with _writer_lock(store):
        os.replace(store, aside)
        for side in ("-wal", "-shm", "-journal"):
            extra = Path(str(store) + side)
            if extra.exists():
                os.replace(extra, Path(str(aside) + side))
    with _edit(store):
        pass  # a new store holding our empty tables
    return aside


# ---------------------------------------------------------------------------- JSON helpers
def _plain(value):
    """JSON-ready copy: arrays to lists, NaN to None (other non-finite floats kept)."""
    if isinstance(value, np.ndarray):
        return _plain(value.tolist())
    if isinstance(value, Mapping):
        return {str(k): _plain(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [_plain(v) for v in value]
    if isinstance(value, np.generic):
        return _plain(value.item())
    if isinstance(value, float) and math.isnan(value):
        return None
    return value


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
        raise OptionError(
            f"option {name!r} has no valid plan (status {outcome.plan.status}"
            f"{': ' + outcome.plan.message if outcome.plan.message else ''}); change the "
            "settings and run it again before saving"
        )
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
    from . import DRAFT_NOTICE

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
    from .zones import dissolve_zones

    zones = dissolve_zones(outcome.inputs.units[["unit_id", "geometry"]], site_of_unit,
                           site_ids=outcome.site_ids, counts=outcome.problem.demand[0])
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


def _has_table(con: sqlite3.Connection, table: str) -> bool:
    return con.execute("SELECT 1 FROM sqlite_master WHERE type='table' AND name = ?",
                       (table,)).fetchone() is not None


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


# ---------------------------------------------------------------------------- workbench state
class StateConflict(OptionError):
    """The record changed since the caller read it (another session saved it meanwhile)."""

    def __init__(self, store: Path, key: str, expected: int, found: int):
        self.expected, self.found = expected, found
        super().__init__(f"{store}: the workbench record {key!r} was saved by another session "
                         f"(revision {found}; this session started from revision {expected})")


def save_state(store_path: str | os.PathLike, key: str, state: dict,
               expected: int | None = None) -> int:
    """Store ``state`` (JSON-ready: dicts, lists, str, numbers, bools, None) under ``key``.

    Each save raises the record's revision by one and returns the new revision. With
    ``expected`` (the revision this writer last read or wrote; 0 = no record yet) the save
    is refused with :class:`StateConflict` when someone else saved the record since, and
    nothing is written.
    """
    if not isinstance(key, str) or not key:
        raise ValueError("save_state needs a non-empty text key (e.g. 'workbench')")
    try:
        text = json.dumps(_plain(state), ensure_ascii=False, sort_keys=True, allow_nan=True)
    except TypeError as exc:
        raise ValueError(f"workbench state {key!r} is not JSON data: {exc}") from exc
    with _edit(store_path) as con:
        row = con.execute(f"SELECT revision FROM {STATE_TABLE} WHERE key = ?",
                          (key,)).fetchone()
        found = 0 if row is None else int(row[0])
        if expected is not None and found != expected:
            raise StateConflict(Path(store_path), key, expected, found)
        con.execute(
            f"INSERT INTO {STATE_TABLE} (key, updated, state_json, revision) "
            "VALUES (?, ?, ?, ?) ON CONFLICT(key) DO UPDATE SET updated = excluded.updated, "
            "state_json = excluded.state_json, revision = excluded.revision",
            (key, now_iso(), text, found + 1),
        )
        _touch(con, STATE_TABLE)
    return found + 1


def state_record(store_path: str | os.PathLike, key: str) -> tuple[dict | None, int]:
    """The state last saved under ``key`` and its revision (``(None, 0)`` when none)."""
    with _read(store_path) as con:
        if con is None or not _has_table(con, STATE_TABLE):
            return None, 0
        columns = {r[1] for r in con.execute(f"PRAGMA table_info({STATE_TABLE})")}
        rev = "revision" if "revision" in columns else "1"
        row = con.execute(
            f"SELECT state_json, {rev} FROM {STATE_TABLE} WHERE key = ?", (key,)
        ).fetchone()
    return (None, 0) if row is None else (json.loads(row[0]), int(row[1]))


def state_keys(store_path: str | os.PathLike) -> list[str]:
    """Keys of the stored workbench records, oldest first."""
    with _read(store_path) as con:
        if con is None or not _has_table(con, STATE_TABLE):
            return []
        return [r[0] for r in con.execute(f"SELECT key FROM {STATE_TABLE} ORDER BY fid")]


def load_state(store_path: str | os.PathLike, key: str) -> dict | None:
    """The state last saved under ``key``, or ``None`` when there is none."""
    return state_record(store_path, key)[0]
