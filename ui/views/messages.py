"""The message line and the store problem box (reload, keep as a draft, repair)."""

from __future__ import annotations

import panel as pn

from ..session import Session
from ..text import text_block

__all__ = ["MessageArea", "StoreProblem"]


class MessageArea(pn.viewable.Viewer):
    """The one place messages appear: what happened, or what to change."""

    def __init__(self, session: Session, **params):
        super().__init__(**params)
        self.session = session
        self.state = state = session.state
        self.alert = pn.pane.Alert("", alert_type="info", visible=False,
                                   css_classes=["message"], sizing_mode="stretch_width",
                                   margin=(2, 5))
        state.param.watch(self._update, ["message", "message_kind"])
        self._update()

    def _update(self, *events) -> None:
        self.alert.alert_type = self.state.message_kind
        self.alert.object = text_block(self.state.message)
        self.alert.visible = bool(self.state.message)

    def __panel__(self):
        return self.alert



class StoreProblem(pn.viewable.Viewer):
    """Why edits are not being written, and the ways out: reload the saved work or keep
    this page's edits as a new draft (another session saved meanwhile), or set a damaged
    store aside."""

    def __init__(self, session: Session, **params):
        super().__init__(**params)
        self.session = session
        self.state = state = session.state
        self.alert = pn.pane.Alert("", alert_type="danger", css_classes=["store-problem"],
                                   sizing_mode="stretch_width", margin=(2, 5))
        self.reload = pn.widgets.Button(name="Reload the saved work", button_type="primary",
                                        css_classes=["reload-record"])
        self.reload.on_click(lambda e: session.reload_record())
        self.draft_name = pn.widgets.TextInput(name="Keep my edits as a draft named",
                                               placeholder="e.g. Anna - east side",
                                               css_classes=["draft-name"])
        self.keep = pn.widgets.Button(name="Keep my edits as this draft", button_type="success",
                                      css_classes=["keep-draft"])
        self.keep.on_click(self._keep)
        self.repair = pn.widgets.Button(name="Set the damaged store aside and start a new one",
                                        button_type="warning", css_classes=["repair-store"])
        self.repair.on_click(lambda e: session.repair_store())
        self.conflict_row = pn.Row(self.reload, self.draft_name, self.keep)
        self.box = pn.Column(self.alert, self.conflict_row, self.repair,
                             sizing_mode="stretch_width", css_classes=["store-problem-box"])
        state.param.watch(self._update, ["store_problem"])
        self._update()

    def _keep(self, event) -> None:
        if self.session.keep_as_draft(self.draft_name.value):
            self.draft_name.value = ""

    def _update(self, *events) -> None:
        st = self.session.store
        self.alert.object = text_block(self.state.store_problem)
        self.conflict_row.visible = st.conflict and not st.damaged
        self.repair.visible = bool(st.damaged)
        self.box.visible = bool(self.state.store_problem)

    def __panel__(self):
        return self.box
