"""Undo, redo and the list of edits in plain words (the session's :class:`ui.history.History`)."""

from __future__ import annotations

import panel as pn

from ..session import Session
from ..text import esc as _esc

__all__ = ["HistoryPanel"]

DONE = "class='done'"
UNDONE = "class='undone' style='color:#888;text-decoration:line-through'"


class HistoryPanel(pn.viewable.Viewer):
    """Undo and Redo buttons over the list of locks and site edits, newest first."""

    def __init__(self, session: Session, **params):
        super().__init__(**params)
        self.session = session
        self.history = history = session.history
        self.undo = pn.widgets.Button(name="Undo", css_classes=["undo-button"],
                                      sizing_mode="stretch_width")
        self.redo = pn.widgets.Button(name="Redo", css_classes=["redo-button"],
                                      sizing_mode="stretch_width")
        self.undo.on_click(lambda e: session.undo())
        self.redo.on_click(lambda e: session.redo())
        self.list = pn.pane.HTML("", css_classes=["history-list"], sizing_mode="stretch_width")
        history.param.watch(self._update, ["steps", "position"])
        session.state.param.watch(self._update, ["running"])
        self._update()

    def _update(self, *events) -> None:
        h = self.history
        running = self.session.state.running
        self.undo.disabled = running or not h.can_undo
        self.redo.disabled = running or not h.can_redo
        lines = h.lines()
        if not lines:
            self.list.object = ("<i style='font-size:12px'>No edits yet: locks, forbids and "
                                "school edits appear here and can be undone.</i>")
            return
        items = "".join(f"<li {DONE if done else UNDONE}>{_esc(text)}</li>"
                        for text, done in lines[:30])
        more = f"<div>and {len(lines) - 30} earlier</div>" if len(lines) > 30 else ""
        self.list.object = (f"<ol reversed style='font-size:12px;margin:0;padding-left:22px'>"
                            f"{items}</ol>{more}")

    def __panel__(self):
        return pn.Card(pn.Row(self.undo, self.redo), self.list, title="Edits (undo / redo)",
                       sizing_mode="stretch_width", css_classes=["history-card"],
                       collapsed=False)
