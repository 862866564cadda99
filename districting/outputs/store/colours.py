"""School colours kept in the store: chosen the first time, the same ever after.

:func:`stored_school_colours` is what the packet, the exports and the workbench call: it
reads the level's colours from ``districting_colours``, lets
:func:`districting.outputs.colours.school_colours` choose colours only for schools without
one (a school added later gets a colour none of its neighbours has), and writes those new
rows. A colour once stored is never replaced (``INSERT OR IGNORE``: when two sessions
choose at once, the first to save wins and both return what the store holds).
"""

from __future__ import annotations

import os
import re
import warnings

from ...study import now_iso
from ..colours import school_colours
from .storefile import COLOURS_TABLE, OptionError, _edit, _has_table, _read, _touch

__all__ = ["load_school_colours", "save_school_colours", "stored_school_colours"]

_HEX = re.compile(r"^#[0-9A-Fa-f]{6}$")


def load_school_colours(store: str | os.PathLike, level: str) -> dict[str, str]:
    """The stored colours of ``level``: {site_id: '#RRGGBB'} (empty when none yet)."""
    with _read(store) as con:
        if con is None or not _has_table(con, COLOURS_TABLE):
            return {}
        rows = con.execute(f"SELECT site_id, colour FROM {COLOURS_TABLE} WHERE level = ? "
                           "ORDER BY site_id", (level,)).fetchall()
    return {s: c for s, c in rows}


def save_school_colours(store: str | os.PathLike, level: str, colours: dict[str, str]) -> None:
    """Add colours for schools of ``level`` that have none yet (stored ones are kept)."""
    bad = sorted(s for s, c in colours.items() if not _HEX.match(str(c)))
    if bad:
        raise ValueError(f"school colours must be #RRGGBB; not so for {', '.join(bad[:5])}")
    stamp = now_iso()
    with _edit(store) as con:
        con.executemany(
            f"INSERT OR IGNORE INTO {COLOURS_TABLE} (level, site_id, colour, chosen) "
            "VALUES (?, ?, ?, ?)",
            [(level, s, c.upper(), stamp) for s, c in sorted(colours.items())])
        _touch(con, COLOURS_TABLE)


def stored_school_colours(inputs, level: str) -> dict[str, str]:
    """Each school's colour for ``level``, stored with the project.

    When the store cannot be read or written (damaged, read-only), the colours are chosen
    as they would be for a new store and a warning says they are not kept.
    """
    store = inputs.settings.store
    try:
        saved = load_school_colours(store, level)
        colours = school_colours(inputs, level, saved)
        new = {s: c for s, c in colours.items() if s not in saved}
        if new:
            save_school_colours(store, level, new)
            colours = {**colours, **load_school_colours(store, level)}
        return colours
    except (OptionError, OSError) as exc:
        warnings.warn(f"school colours not kept in the store: {exc}", stacklevel=2)
        return school_colours(inputs, level)
