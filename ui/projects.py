"""The projects the workbench server opens: read and validated once per file version.

The Inputs of a project are read-only and shared by every session on it (and so is their
map data, :class:`ui.mapdata.MapData`). No Panel here.
"""

from __future__ import annotations

import threading
from pathlib import Path

__all__ = ["load_inputs", "problem_text"]

_CACHE: dict[Path, tuple[float, object]] = {}
_CACHE_LOCK = threading.Lock()


def load_inputs(path: str | Path):
    """Validated Inputs of a project, read once per file version and shared by sessions.

    Raises ``districting.intake.ProjectError`` (with ``.report``) or ``OSError``.
    """
    from districting.intake import load_project

    path = Path(path).resolve()
    mtime = path.stat().st_mtime
    with _CACHE_LOCK:
        hit = _CACHE.get(path)
        if hit is not None and hit[0] == mtime:
            return hit[1]
        inputs = load_project(path)
        _CACHE[path] = (mtime, inputs)
        return inputs


def problem_text(exc: BaseException, path) -> str:
    """Words for a project that does not load: the validation report, or the OS error."""
    report = getattr(exc, "report", None)
    if report is not None and hasattr(report, "format"):
        return f"The project {path} has problems to fix before it can be planned:\n\n" + (
            report.format())
    return f"The project {path} could not be opened: {exc}"
