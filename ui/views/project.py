"""The page's frame: the header and how-to line, the Project tab, the field to open another
project, and the page shown when a project does not load."""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path

import panel as pn

from ..projects import load_inputs, problem_text
from ..text import esc as _esc
from ..text import text_block

__all__ = ["page_header", "project_info", "ProjectOpener", "error_page"]


def page_header(inputs) -> list:
    """The project's name with the draft notice, and the how-to line."""
    header = pn.pane.HTML(
        f"<div class='app-header' style='display:flex;justify-content:space-between;"
        f"align-items:baseline'><span style='font-size:20px;font-weight:600'>"
        f"{_esc(inputs.settings.name)}</span><span style='font-size:12px;color:#8a1c1c'>"
        f"DRAFT - options for discussion; the board decides.</span></div>",
        sizing_mode="stretch_width", margin=(4, 10))
    guide = pn.pane.HTML(
        "<div style='font-size:12px;color:#333'><b>How to:</b> 1&nbsp;pick the level and "
        "settings &middot; 2&nbsp;select units on the map and lock them to a school &middot; "
        "3&nbsp;edit capacities in <i>Schools</i> &middot; 4&nbsp;press <b>Rerun</b> "
        "&middot; 5&nbsp;check <i>Changes</i>, save in <i>Options</i>, download in "
        "<i>Downloads</i>.</div>", sizing_mode="stretch_width", margin=(0, 10))
    return [header, guide]


def project_info(inputs, project) -> pn.pane.HTML:
    s = inputs.settings
    return pn.pane.HTML(
        f"<div style='font-size:13px'><b>{_esc(s.name)}</b><br>File: {_esc(str(project))}"
        f"<br>Planning units: {len(inputs.units):,} &middot; levels: {_esc(', '.join(s.levels))}"
        f" &middot; years {s.current_year} (today) and {', '.join(map(str, s.years))}"
        f"<br>Options and the workbench state are kept in {_esc(str(s.store))}</div>")


def error_page(text: str, opener) -> pn.Column:
    return pn.Column(
        pn.pane.Alert(text_block(text), alert_type="danger",
                      css_classes=["message", "project-error"], sizing_mode="stretch_width"),
        opener, sizing_mode="stretch_width")


class ProjectOpener(pn.viewable.Viewer):
    """A field to open another project (a TOML path on this computer); a project that
    loads is handed to ``open_project``, one that does not gets its report shown here."""

    def __init__(self, open_project: Callable[[Path], None], **params):
        super().__init__(**params)
        self.open_project = open_project
        self.path = pn.widgets.TextInput(name="Open another project (path of its project.toml)",
                                         css_classes=["project-path"], width=520)
        self.button = pn.widgets.Button(name="Open project", css_classes=["open-project"])
        self.note = pn.pane.Alert("", alert_type="danger", visible=False,
                                  css_classes=["open-error"])
        self.button.on_click(self._open)

    def _open(self, event) -> None:
        typed = self.path.value
        target = Path(typed.strip()).expanduser()
        if not typed.strip() or target.suffix.lower() != ".toml" or not target.is_file():
            self.note.object = text_block(f"{typed}: give the full path of an existing "
                                          "project file ending in .toml")
            self.note.visible = True
            return
        try:
            load_inputs(target)
        except Exception as exc:  # noqa: BLE001 - shown as a report on the page
            self.note.object = text_block(problem_text(exc, target))
            self.note.visible = True
            return
        self.open_project(target)

    def __panel__(self):
        return pn.Column(pn.Row(self.path, self.button), self.note)
