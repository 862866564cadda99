"""The :class:`Report` every check adds to: severity, file, where, what, fix.

Every check adds :class:`Item` s to a :class:`Report` instead of raising, so one run lists
every problem at once; :func:`districting.intake.load_project` raises :class:`ProjectError`
(carrying the report) when any item is an error. Warnings (a repaired geometry, a
reprojection, an island) do not stop a run.
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from dataclasses import dataclass
from pathlib import Path

__all__ = ["Item", "Report", "ProjectError", "ERROR", "WARNING", "ids_text", "where_units",
           "plural"]

ERROR = "error"
WARNING = "warning"
_LIST_LIMIT = 8  # ids printed per item; the item keeps them all in ``ids``


# ----------------------------------------------------------------------------- the report
@dataclass(frozen=True)
class Item:
    """One problem: how bad, which file, where in it, what is wrong, how to fix it.

    ``where`` is words ("unit U0412", "row 7", "column elementary_2027", "[solve]
    gap"); ``ids`` holds every unit, site or row id the item is about (``where`` prints
    the first few).
    """

    severity: str  # ERROR or WARNING
    file: Path | None
    where: str
    what: str
    fix: str
    ids: tuple[str, ...] = ()

    @property
    def is_error(self) -> bool:
        return self.severity == ERROR

    def text(self) -> str:
        head = f"{self.where}: {self.what}" if self.where else self.what
        return f"{head}\n      fix: {self.fix}" if self.fix else head


class Report:
    """Every problem found in a project, in the order found; :meth:`format` groups them."""

    def __init__(self, project: str | Path | None = None):
        self.project = None if project is None else Path(project)
        self._base = None if project is None else Path(project).resolve().parent
        self.items: list[Item] = []

    def add(self, severity: str, file, where: str, what: str, fix: str = "",
            ids: Iterable = ()) -> Item:
        if severity not in (ERROR, WARNING):
            raise ValueError(f"severity must be {ERROR!r} or {WARNING!r}, not {severity!r}")
        item = Item(severity, None if file is None else Path(file), where, what, fix,
                    tuple(str(i) for i in ids))
        self.items.append(item)
        return item

    def error(self, file, where: str, what: str, fix: str = "", ids: Iterable = ()) -> Item:
        return self.add(ERROR, file, where, what, fix, ids)

    def warning(self, file, where: str, what: str, fix: str = "", ids: Iterable = ()) -> Item:
        return self.add(WARNING, file, where, what, fix, ids)

    @property
    def errors(self) -> list[Item]:
        return [it for it in self.items if it.is_error]

    @property
    def warnings(self) -> list[Item]:
        return [it for it in self.items if not it.is_error]

    @property
    def has_errors(self) -> bool:
        return any(it.is_error for it in self.items)

    def __len__(self) -> int:
        return len(self.items)

    def __iter__(self):
        return iter(self.items)

    def _file_label(self, file: Path | None) -> str:
        if file is None:
            return "(project)"
        if self._base is not None:
            try:
                return str(file.resolve().relative_to(self._base))
            except ValueError:
                pass
        return str(file)

    def format(self) -> str:
        """The report as text: errors first, then warnings, grouped by file."""
        name = "project" if self.project is None else str(self.project)
        n_err, n_warn = len(self.errors), len(self.warnings)
        if not self.items:
            return f"{name}: no problems found."
        lines = [f"{name}: {plural(n_err, 'error')}, {plural(n_warn, 'warning')}"]
        for title, items in (("ERRORS (the run stops)", self.errors),
                             ("WARNINGS (the run goes on)", self.warnings)):
            if not items:
                continue
            lines += ["", title]
            files: dict[str, list[Item]] = {}
            for it in items:
                files.setdefault(self._file_label(it.file), []).append(it)
            for label, group in files.items():
                lines.append(f"  {label}")
                lines += [f"    - {it.text()}" for it in group]
        return "\n".join(lines)


class ProjectError(ValueError):
    """A project with errors; ``report`` lists every one of them (and the warnings)."""

    def __init__(self, report: Report):
        self.report = report
        super().__init__(report.format())


def plural(k: int, word: str) -> str:
    return f"{k} {word}" + ("" if k == 1 else "s")


def ids_text(ids: Sequence, limit: int = _LIST_LIMIT) -> str:
    """'U1, U2, U3' or 'U1, U2, ... and 40 more'."""
    ids = [str(i) for i in ids]
    if len(ids) <= limit:
        return ", ".join(ids)
    return f"{', '.join(ids[:limit])} and {len(ids) - limit} more"


def where_units(labels: Sequence, word: str = "unit") -> str:
    return f"{word}{'s' if len(labels) > 1 else ''} {ids_text(labels)}"
