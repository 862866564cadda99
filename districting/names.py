"""The one rule for names a planner gives (options, drafts) and the file names made from them.

A name is text people read: it is normalised (Unicode NFC, spaces trimmed) and then must
be 1 to :data:`MAX_LENGTH` characters of letters and digits in any script, spaces and the
marks in :data:`MARKS`; it may not start with a dot. So no path separators, no control
characters or line breaks, no ``<`` or ``>``, and never ``.`` or ``..``.

A name never becomes a path as typed: :func:`slug` derives a file name from it, and
:func:`path_inside` checks that the final path stays inside the chosen folder before
anything is written there.
"""

from __future__ import annotations

import re
import unicodedata
from pathlib import Path

__all__ = ["MAX_LENGTH", "MARKS", "NAME_RULE", "BadName", "check_name", "normalise",
           "slug", "path_inside"]

MAX_LENGTH = 80
#: Punctuation allowed in a name besides letters, digits and spaces.
MARKS = "-–—_.,:()'&+#"
NAME_RULE = (f"a name is 1 to {MAX_LENGTH} characters: letters and digits (any language), "
             f"spaces and the marks {' '.join(MARKS)}; it may not start with a dot")


class BadName(ValueError):
    """A name that breaks the rule; the message quotes the rule and the character at fault."""


def normalise(text: str) -> str:
    """Unicode NFC with surrounding white space removed (how every name is compared)."""
    return unicodedata.normalize("NFC", str(text)).strip()


def _allowed(ch: str) -> bool:
    if ch == " " or ch in MARKS:
        return True
    cat = unicodedata.category(ch)
    return cat[0] in "LM" or cat == "Nd"  # letters, combining marks, decimal digits


def _describe(ch: str) -> str:
    label = unicodedata.name(ch, "").lower() or (
        "a line break" if ch in "\n\r" else "a control character")
    shown = f"{ch!r} " if ch.isprintable() and not ch.isspace() else ""
    return f"{shown}{label} (U+{ord(ch):04X})"


def check_name(text: str, what: str = "option") -> str:
    """The normalised name, or :class:`BadName` saying what is wrong and the rule."""
    if not isinstance(text, str):
        raise BadName(f"the {what} name must be text; {NAME_RULE}")
    name = normalise(text)
    if not name:
        raise BadName(f"the {what} name is empty; type a name such as 'Option A - two "
                      f"moves' ({NAME_RULE})")
    if len(name) > MAX_LENGTH:
        raise BadName(f"the {what} name is {len(name)} characters long; shorten it to "
                      f"{MAX_LENGTH} or fewer ({NAME_RULE})")
    if name.startswith("."):
        raise BadName(f"the {what} name {name!r} starts with a dot; start it with a letter "
                      f"or digit ({NAME_RULE})")
    bad = sorted({ch for ch in name if not _allowed(ch)}, key=name.index)
    if bad:
        listed = ", ".join(_describe(ch) for ch in bad[:5])
        raise BadName(f"the {what} name {name!r} contains {listed}; remove or replace "
                      f"{'it' if len(bad) == 1 else 'them'} ({NAME_RULE})")
    return name


def slug(text: str, fallback: str = "option") -> str:
    """A file-name-safe form of a name: letters, digits, '-' and '_', lower case.

    Accents are dropped where a plain letter remains (é -> e); letters of other scripts stay.
    Never empty (``fallback``), never a path: no separators, no dots.
    """
    plain = "".join(c for c in unicodedata.normalize("NFKD", str(text))
                    if unicodedata.category(c) != "Mn")
    plain = unicodedata.normalize("NFC", plain)
    s = re.sub(r"[^\w-]+", "-", plain).strip("-_").lower()
    return s[:MAX_LENGTH].strip("-_") or fallback


def path_inside(folder: str | Path, name: str) -> Path:
    """``folder / name`` resolved, after checking it lies strictly inside ``folder``.

    Raises :class:`BadName` otherwise (a name such as ``..`` or an absolute path), before
    anything is written.
    """
    base = Path(folder).resolve()
    target = (base / name).resolve()
    if target == base or not target.is_relative_to(base):
        raise BadName(f"{name!r} would be written outside {base}; choose a plain name "
                      f"({NAME_RULE})")
    return target
