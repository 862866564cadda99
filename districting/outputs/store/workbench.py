"""Workbench records in the store: one JSON state per key, with a revision per save."""

from __future__ import annotations

import json
import os
from pathlib import Path

from ...study import now_iso
from .storefile import (
    STATE_TABLE,
    OptionError,
    _edit,
    _has_table,
    _plain,
    _read,
    _touch,
)

__all__ = ["StateConflict", "save_state", "load_state", "state_record", "state_keys"]


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
