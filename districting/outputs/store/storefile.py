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
- ``districting_colours``: (level, site_id, colour, chosen): each school's display colour,
  chosen once and kept (:mod:`.colours`);
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
import math
import os
import sqlite3
from collections.abc import Callable, Iterator, Mapping
from pathlib import Path

import numpy as np

from ...io import atomic_copy_edit
from ...study import now_iso

try:  # POSIX advisory locks; elsewhere writers are not serialised across processes
    import fcntl
except ImportError:  # pragma: no cover - Windows
    fcntl = None


__all__ = ["OptionError", "StoreDamaged", "store_problem", "repair_store", "tidy_store",
           "OPTIONS_TABLE", "ASSIGNMENTS_TABLE", "STATE_TABLE", "ZONES_LAYER", "COLOURS_TABLE"]

OPTIONS_TABLE = "districting_options"
ASSIGNMENTS_TABLE = "districting_assignments"
STATE_TABLE = "districting_state"
COLOURS_TABLE = "districting_colours"
#: Features layer with the zones of every saved option (column ``option``), for GIS users.
ZONES_LAYER = "districting_zones"

#: "GPKG" in ASCII, and version 1.3.0, per GeoPackage 1.3 clause 1.1.1.1.
GPKG_APPLICATION_ID = 0x47504B47
GPKG_USER_VERSION = 10300


class OptionError(ValueError):
    """An unknown option name, a name clash, or a store that cannot be read."""


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
    COLOURS_TABLE: (
        """CREATE TABLE IF NOT EXISTS districting_colours (
            fid INTEGER PRIMARY KEY AUTOINCREMENT, level TEXT NOT NULL,
            site_id TEXT NOT NULL, colour TEXT NOT NULL, chosen TEXT NOT NULL,
            UNIQUE (level, site_id))""",
        "Display colour of each school (#RRGGBB), chosen once per level and kept",
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


def _has_table(con: sqlite3.Connection, table: str) -> bool:
    return con.execute("SELECT 1 FROM sqlite_master WHERE type='table' AND name = ?",
                       (table,)).fetchone() is not None
