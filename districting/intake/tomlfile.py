"""Reading the project's TOML file, with syntax errors told in words that fit them.

:func:`read_toml` returns the parsed file, or reports one error naming the line and column,
quoting the line, and giving a fix chosen for the kind of mistake (an unclosed string, a
missing ``=``, a key or table written twice, a Windows path with backslashes, text
without quotes...). Python's :mod:`tomllib` finds the error; its message is kept in the
report for the record.
"""

from __future__ import annotations

import re
import tomllib
from pathlib import Path

from .schema import KINDS, SCHEMA, example, table_of

__all__ = ["read_toml", "syntax_fix", "project_file", "PROJECT_FILE"]

#: The file a command looks for when it is given a folder instead of a project file.
PROJECT_FILE = "project.toml"

_AT = re.compile(r"\s*\(at line (\d+), column (\d+)\)$|\s*\(at end of document\)$")

# (pattern in tomllib's message, fix); the first match wins. The line's text refines a few.
_FIXES: tuple[tuple[str, str], ...] = (
    ("Unterminated string", 'close the text with the same quote it opens with, e.g. '
     'name = "Hill Elementary" (a text on several lines uses triple quotes """...""")'),
    ("Unescaped '\\' in a string", "a backslash starts an escape in double-quoted text: write "
     "paths with forward slashes (\"data/town.gpkg\") or in single quotes ('C:\\data\\town."
     "gpkg')"),
    ("Invalid hex value", "a backslash starts an escape in double-quoted text: write paths "
     "with forward slashes or in single quotes"),
    ("Illegal character", "remove the control character (a tab or a stray byte pasted into "
     "the text), or write it as an escape such as \\t"),
    ("Cannot overwrite a value", "a key is written twice: keep one line per key in each "
     "table"),
    ("Duplicate inline table key", "a key is written twice inside { }: keep one"),
    ("Cannot declare", "a table is written twice: merge the two [...] sections into one"),
    ("Cannot redefine namespace", "a table is written twice: merge the two sections into one"),
    ("Cannot mutate immutable namespace", "a table given inline with { } cannot get more "
     "keys later: write all its keys inside the { }, or use a [table] section"),
    ("Expected '=' after a key", "write each setting as key = value on its own line (text "
     "in quotes)"),
    ("Invalid initial character for a key part", "start the line with a key name (letters, "
     "digits, _ or -), a [table] header, or # for a comment"),
    ("Expected ']' at the end of a table declaration", "close the table header: [solve]"),
    ("Expected ']]' at the end of an array declaration", "close the header: [[locks]]"),
    ("Unclosed array", "close the list with ] and separate its items with commas, e.g. "
     "years = [2027, 2028]"),
    ("Unclosed inline table", "close the { } on the same line and separate its items with "
     "commas, e.g. max_distance = { high = 15000 }"),
    ("Invalid date or datetime", "write the value in quotes if it is text, or as a plain "
     "number (2027, not 2027-01)"),
    ("Expected newline or end of document after a statement", "put one setting per line; a "
     "list of values goes in [ ] with commas, e.g. years = [2027, 2028]"),
    ("Invalid value", "put text in double quotes (solver = \"highs\"), write numbers with a "
     "dot for decimals (0.9, not 0,9) and true/false in lower case"),
    ("Invalid statement", "start the line with a key name, a [table] header, or #"),
)
_GENERIC = "correct the syntax at the line and column named (see toml.io for the rules)"


def _open_list(before: list[str]) -> int | None:
    """The line number (1-based) of a list left open above the error, if any."""
    depth = 0
    for number in range(len(before), 0, -1):
        text = re.sub(r'"[^"]*"|\'[^\']*\'|#.*$', "", before[number - 1])
        if text.strip().startswith("["):  # a table header: no list is open across it
            return None
        depth += text.count("[") - text.count("]")
        if depth > 0:
            return number
        if "=" in text:
            return None
    return None


def syntax_fix(message: str, line: str = "", before: list[str] | None = None) -> str:
    """The fix for a tomllib error message, given the offending line and the lines above."""
    stripped = line.strip()
    if re.search(r"=\s*-?\d+,\d+\s*$", stripped):
        return "write decimals with a dot: 0.9, not 0,9"
    if message.startswith("Illegal character '\\n'"):
        return _FIXES[0][1]  # the text's closing quote is missing on this line
    opened = _open_list(before or [])
    if opened is not None and "Invalid value" in message:
        return (f"the list opened on line {opened} is not closed: end it with ] (items "
                "separated by commas)")
    if "Invalid value" in message and re.search(r"=\s*[A-Za-z]", stripped):
        key, value = (part.strip() for part in stripped.split("=", 1))
        owner = table_of(key)
        spec = SCHEMA[owner].keys[key] if owner else None
        if spec is not None and spec.kind in ("number", "int"):
            return f"{key} takes {KINDS[spec.kind][0]}, e.g. {key} = {example(spec)}"
        if value.lower() in ("true", "false"):
            return "write true or false in lower case"
        return f'put the text in double quotes: {key} = "{value}"'
    if "Expected newline" in message and re.search(r"=\s*\S+\s+\S", stripped) and (
            "[" not in stripped):
        key = stripped.split("=", 1)[0].strip()
        owner = table_of(key)
        kind = SCHEMA[owner].keys[key].kind if owner else ""
        if kind in ("years", "names"):
            return (f"{key} takes several values as a list in [ ] with commas, e.g. "
                    f"{key} = {KINDS[kind][1]}")
        shown = f" (e.g. {key} = {KINDS[kind][1]})" if kind else ""
        return (f"{key} takes one value{shown}: keep one, and put text with spaces in "
                "double quotes")
    for pattern, fix in _FIXES:
        if pattern in message:
            return fix
    return _GENERIC


def project_file(path: str | Path) -> Path:
    """The project file a command was given: ``path`` itself, or ``path/project.toml``
    when ``path`` is a folder holding one (a folder without it is reported by
    :func:`read_toml`)."""
    path = Path(path)
    if path.is_dir() and (path / PROJECT_FILE).is_file():
        return path / PROJECT_FILE
    return path


def read_toml(path: Path, report) -> dict | None:
    """The parsed project file, or None after reporting why it cannot be read."""
    if path.is_dir():
        tomls = sorted(p.name for p in path.glob("*.toml") if p.is_file())
        shown = (f"; its .toml files: {', '.join(tomls)}" if tomls
                 else "; the folder has no .toml file at all")
        report.error(path, "", f"the folder holds no {PROJECT_FILE}{shown}",
                     "give the project file's path (FOLDER/NAME.toml), or name the project "
                     f"file {PROJECT_FILE}")
        return None
    if not path.is_file():
        report.error(path, "", "the project file does not exist",
                     "give the path of the project's .toml file")
        return None
    raw = path.read_bytes()
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as err:
        line = raw[: err.start].count(b"\n") + 1
        report.error(path, f"line {line}", "the project file is not UTF-8 text (a character "
                     f"at byte {err.start} cannot be read)",
                     "save the file as UTF-8 (in most editors: Save as > Encoding UTF-8)")
        return None
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as err:
        message = str(err)
        found = _AT.search(message)
        what = _AT.sub("", message)
        if found and found.group(1):
            number, column = int(found.group(1)), int(found.group(2))
            lines = text.splitlines()
            line = lines[number - 1] if number <= len(lines) else ""
            where = f"line {number}, column {column}"
            shown = f"; the line reads: {line.strip()}" if line.strip() else ""
        else:
            lines, line, where, shown = [], "", "end of file", ""
        before = lines[: number - 1] if found and found.group(1) else []
        report.error(path, where, f"the project file is not valid TOML ({what}){shown}",
                     syntax_fix(what, line, before))
        return None
