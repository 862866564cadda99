"""Locks and forbids written into the project file (`districting lock`, `unlock`, `forbid`...).

A lock (unit goes to school) or a forbid (unit may not go to school) is one ``[[locks]]`` or
``[[forbids]]`` table of the project file, as :mod:`districting.intake.settings` reads them.
The file is edited as text so that everything else in it stays byte for byte (comments,
order, spacing, line endings): a new entry is a block appended at the end; a removed entry is
cut out from its header line to its last key line. Every request is checked against the
project first (the unit exists; the school is of that level and, for a lock, takes
students; the unit is not locked elsewhere), then the edited text is written to a temporary
file beside the project file, read again by :func:`districting.intake.load_project`, and
only then renamed over it: a refused edit leaves the file as it was.
"""

from __future__ import annotations

import re
import shlex
import tomllib
from dataclasses import dataclass
from pathlib import Path

from . import rules
from .intake import Inputs, ProjectError, load_project, project_file
from .io import atomic_path

__all__ = ["KINDS", "EditRefused", "Edit", "add_entries", "remove_entries", "entry_spans"]

#: The two arrays of tables this module edits.
KINDS = ("locks", "forbids")
_HEADER = re.compile(r"^\s*\[")
_ENTRY = re.compile(r"^\s*\[\[\s*(locks|forbids)\s*\]\]\s*(#.*)?$")
_BLANK_OR_COMMENT = re.compile(r"^\s*(#.*)?$")


class EditRefused(ValueError):
    """An edit that was not made; the message gives every reason and the way forward."""


@dataclass(frozen=True)
class Edit:
    """What an edit did: the lines to print and whether the file changed."""

    path: Path
    changed: tuple[str, ...]
    unchanged: tuple[str, ...]

    @property
    def wrote(self) -> bool:
        return bool(self.changed)


# ----------------------------------------------------------------------------- the text
def _read(path: Path) -> tuple[str, list[str], str]:
    """(byte-order mark, lines with their endings, newline) of the project file."""
    raw = path.read_bytes()
    bom = "\ufeff" if raw.startswith(b"\xef\xbb\xbf") else ""
    text = raw.decode("utf-8-sig")
    newline = "\r\n" if "\r\n" in text else "\n"
    return bom, text.splitlines(keepends=True), newline


def entry_spans(lines: list[str], kind: str, count: int) -> list[tuple[int, int]]:
    """(first, last) line of each ``[[kind]]`` entry, in file order.

    An entry runs from its header to its last line that is neither blank nor a comment
    before the next header. :class:`EditRefused` when the headers found are not as many as
    the entries (the file writes them in a form this edit does not handle, e.g. an inline
    list); :func:`_located` checks each span against the entry the whole file gives.
    """
    heads = [k for k, line in enumerate(lines) if (m := _ENTRY.match(line)) and m[1] == kind]
    if len(heads) != count:
        raise EditRefused(f"the project file writes its {kind} in a form this command "
                          f"cannot edit ({count} entries, {len(heads)} [[{kind}]] headers); "
                          f"write each as a [[{kind}]] table with level, unit and site")
    spans = []
    for first in heads:
        nxt = next((k for k in range(first + 1, len(lines)) if _HEADER.match(lines[k])),
                   len(lines))
        last = nxt - 1
        while last > first and _BLANK_OR_COMMENT.match(lines[last]):
            last -= 1
        spans.append((first, last))
    return spans


def _entry_of(lines: list[str], span: tuple[int, int], kind: str) -> dict:
    try:
        return tomllib.loads("".join(lines[span[0]: span[1] + 1]))[kind][0]
    except (tomllib.TOMLDecodeError, KeyError, IndexError) as err:
        raise EditRefused(f"the [[{kind}]] entry on line {span[0] + 1} cannot be edited "
                          f"here ({err}); edit it by hand") from None


def _located(path: Path, lines: list[str], kind: str,
             entries: list[dict]) -> list[tuple[tuple[int, int], dict]]:
    """Each entry of the file with its span, checked to be the entry the file gives."""
    try:
        spans = entry_spans(lines, kind, len(entries))
        found = [(span, _entry_of(lines, span, kind)) for span in spans]
    except EditRefused as err:
        raise _refused(path, [str(err)]) from None
    for (span, entry), expected in zip(found, entries, strict=True):
        if entry != expected:
            raise _refused(path, [f"the [[{kind}]] entry on line {span[0] + 1} reads "
                                  "differently on its own than in the file; edit it by hand"])
    return found


def _block(kind: str, level: str, unit: str, site: str, newline: str) -> list[str]:
    return [f"[[{kind}]]{newline}", f"level = {_quoted(level)}{newline}",
            f"unit = {_quoted(unit)}{newline}", f"site = {_quoted(site)}{newline}"]


def _quoted(value: str) -> str:
    """A TOML basic string (ids are plain text; quotes and backslashes escaped)."""
    escaped = value.replace("\\", "\\\\").replace('"', '\\"')
    return '"' + "".join(c if c.isprintable() else f"\\u{ord(c):04x}" for c in escaped) + '"'


def _cut(lines: list[str], span: tuple[int, int]) -> list[str]:
    """``lines`` without the span; one blank line that only separated it goes too."""
    first, last = span
    after_blank = last + 1 >= len(lines) or not lines[last + 1].strip()
    if first > 0 and not lines[first - 1].strip() and after_blank:
        first -= 1
    return lines[:first] + lines[last + 1:]


# ----------------------------------------------------------------------------- checks
def _project(path: Path) -> Inputs:
    try:
        return load_project(path)
    except ProjectError as err:
        raise EditRefused(err.report.format() + f"\n\n{path}: the project has errors; fix "
                          "them first (nothing was changed)") from None


def _level(path: Path, inputs: Inputs, level: str) -> str:
    levels = inputs.settings.levels
    for lv in levels:
        if lv.lower() == level.strip().lower():
            return lv
    raise _refused(path, [f"level {level!r} is not one of the project's levels "
                          f"({', '.join(levels)}); give --level {' or '.join(levels)}"])


def _unit_problems(inputs: Inputs, units: list[str]) -> list[str]:
    ids = set(inputs.units["unit_id"].astype(str))
    folded = {i.casefold(): i for i in ids}
    out = []
    for unit in units:
        if unit in ids:
            continue
        near = folded.get(unit.casefold())
        hint = (f" (ids are exact, upper/lower case included: did you mean {near}?)" if near
                else "; give the id as in the units layer's id column")
        out.append(f"unit {unit!r} is not a planning unit of this project{hint}")
    return out


def _site_problem(inputs: Inputs, level: str, site: str, kind: str) -> str | None:
    sites = inputs.sites
    row = sites[sites["site_id"].astype(str) == site]
    of_level = sites.loc[sites["level"].str.lower() == level.lower(), "site_id"].astype(str)
    listed = ", ".join(of_level) or "none"
    if row.empty:
        return (f"school {site!r} is not in the sites layer; {level} schools: {listed}")
    row = row.iloc[0]
    if str(row["level"]).lower() != level.lower():
        return (f"school {site} ({row['name']}) is a {row['level']} school, not {level}; "
                f"{level} schools: {listed}")
    if kind == "locks" and not rules.takes_students([row["status"]])[0]:
        return (f"school {site} ({row['name']}) is {row['status']} and takes no students in "
                "the plan year; lock the unit to a school that is open, new or a candidate, "
                "or change the school's status in the sites layer")
    return None


def _pairs(inputs: Inputs, kind: str, level: str) -> dict[str, list[str]]:
    """Unit -> schools of the project's ``kind`` entries at ``level``."""
    out: dict[str, list[str]] = {}
    for lk in getattr(inputs.settings, kind):
        if lk.level == level.lower():
            out.setdefault(str(lk.unit), []).append(str(lk.site))
    return out


# ----------------------------------------------------------------------------- writing
def _write(path: Path, bom: str, lines: list[str]) -> None:
    """Write the edited text beside ``path``, re-read it as a project, then rename it over."""
    text = bom + "".join(lines)
    with atomic_path(path) as tmp:
        tmp.write_bytes(text.encode("utf-8"))
        try:
            load_project(tmp)
        except ProjectError as err:
            shown = err.report.format().replace(str(tmp), str(path)).replace(tmp.name,
                                                                             path.name)
            raise EditRefused(f"{shown}\n\nthe edited project would not load, so it was not "
                              "written (the file is as it was)") from None


def _command(path: Path, verb: str, level: str, unit: str, site: str = "") -> str:
    school = f" --school {site}" if site else ""
    return f"`districting {verb} {shlex.quote(str(path))} --level {level} {unit}{school}`"


def add_entries(path: str | Path, kind: str, level: str, units: list[str],
                site: str) -> Edit:
    """Lock (``kind="locks"``) or forbid each of ``units`` to ``site`` at ``level``.

    Every check runs before anything is written; :class:`EditRefused` lists every reason.
    Units already locked (or forbidden) to that school are left as they are and reported.
    """
    path = project_file(path)
    if kind not in KINDS:
        raise ValueError(f"kind must be one of {KINDS}")
    inputs = _project(path)
    level = _level(path, inputs, level)
    site = site.strip()
    problems = _unit_problems(inputs, units)
    if (bad := _site_problem(inputs, level, site, kind)) is not None:
        problems.append(bad)
    locks, forbids = _pairs(inputs, "locks", level), _pairs(inputs, "forbids", level)
    word = "locked" if kind == "locks" else "forbidden"
    changed, unchanged = [], []
    for unit in dict.fromkeys(units):
        same = locks if kind == "locks" else forbids
        if site in same.get(unit, []):
            unchanged.append(f"unit {unit} is already {word} {_to(kind)} {site} ({level})")
            continue
        if kind == "locks" and (other := [s for s in locks.get(unit, []) if s != site]):
            problems.append(f"unit {unit} is already locked to {other[0]} ({level}); a unit "
                            "has one lock per level: to move it, first run "
                            + _command(path, "unlock", level, unit))
        elif kind == "locks" and site in forbids.get(unit, []):
            problems.append(f"unit {unit} is forbidden from {site} ({level}); to lock it "
                            "there, first run " + _command(path, "unforbid", level, unit, site))
        elif kind == "forbids" and site in locks.get(unit, []):
            problems.append(f"unit {unit} is locked to {site} ({level}); to forbid the pair, "
                            "first run " + _command(path, "unlock", level, unit))
        else:
            changed.append(unit)
    if problems:
        raise _refused(path, problems)
    if not changed:
        return Edit(path, (), tuple(unchanged))
    bom, lines, newline = _read(path)
    if lines and not lines[-1].endswith(("\n", "\r")):
        lines[-1] += newline
    for unit in changed:
        lines += [newline, *_block(kind, level, unit, site, newline)]
    _write(path, bom, lines)
    return Edit(path, tuple(f"unit {u} {word} {_to(kind)} {site} ({level})" for u in changed),
                tuple(unchanged))


def _refused(path: Path, problems: list[str]) -> EditRefused:
    return EditRefused(f"nothing was changed in {path}:\n"
                       + "\n".join(f"- {p}" for p in problems))


def _to(kind: str) -> str:
    return "to" if kind == "locks" else "from"


def remove_entries(path: str | Path, kind: str, level: str, units: list[str],
                   site: str | None = None) -> Edit:
    """Remove the ``kind`` entries of ``units`` at ``level`` (only those to ``site`` if given).

    A unit with no such entry is refused (:class:`EditRefused`), with the units that have
    one; nothing is written then.
    """
    path = project_file(path)
    if kind not in KINDS:
        raise ValueError(f"kind must be one of {KINDS}")
    inputs = _project(path)
    level = _level(path, inputs, level)
    site = site.strip() if site else None
    word = "locked" if kind == "locks" else "forbidden"
    have = _pairs(inputs, kind, level)
    problems = []
    for unit in dict.fromkeys(units):
        sites = have.get(unit, [])
        if not sites or (site is not None and site not in sites):
            target = f" {_to(kind)} {site}" if site else ""
            listed = ", ".join(sorted(have)[:10]) or "none"
            problems.append(f"unit {unit} is not {word}{target} at the {level} level "
                            f"({word} units there: {listed})")
    if problems:
        raise _refused(path, problems)
    bom, lines, _newline = _read(path)
    entries = inputs.settings.raw.get(kind, [])
    wanted = set(units)
    cut, done = [], []
    for span, entry in _located(path, lines, kind, entries):
        if (str(entry.get("level", "")).lower() == level.lower()
                and str(entry.get("unit")) in wanted
                and (site is None or str(entry.get("site")) == site)):
            cut.append(span)
            done.append(f"unit {entry['unit']} no longer {word} {_to(kind)} "
                        f"{entry['site']} ({level})")
    for span in reversed(cut):
        lines = _cut(lines, span)
    _write(path, bom, lines)
    return Edit(path, tuple(done), ())
