"""The Options tab: save the plan as a named option, show, compare, drafts."""

from __future__ import annotations

import pandas as pd
import panel as pn

from ..session import Session
from ..text import esc as _esc
from ..text import status_text

__all__ = ["OptionsPanel"]


class OptionsPanel(pn.viewable.Viewer):
    """Save the plan as a named option, show a saved one, compare several."""

    def __init__(self, session: Session, **params):
        super().__init__(**params)
        self.session = session
        self.state = state = session.state
        self.name_input = pn.widgets.TextInput(name="Option name", placeholder="e.g. Option A",
                                               css_classes=["option-name"])
        self.overwrite = pn.widgets.Checkbox(name="Replace an option of the same name")
        self.save = pn.widgets.Button(name="Save option", button_type="success",
                                      css_classes=["save-option"])
        self.save.on_click(self._save)
        self.table = pn.widgets.Tabulator(pd.DataFrame(), name="options-table", disabled=True,
                                          show_index=False, height=200, pagination=None,
                                          sizing_mode="stretch_width",
                                          css_classes=["options-table"])
        self.choice = pn.widgets.Select(name="Saved option", options=[],
                                        css_classes=["option-choice"])
        self.show = pn.widgets.Button(name="Show on map", css_classes=["show-option"])
        self.show.on_click(lambda e: self.choice.value and session.open_option(self.choice.value))
        self.delete = pn.widgets.Button(name="Delete", button_type="danger",
                                        css_classes=["delete-option"])
        self.delete.on_click(lambda e: self.choice.value and session.delete_option(
            self.choice.value))
        self.compare_choice = pn.widgets.MultiChoice(
            name="Compare (today, the plan on screen and saved options)", options=[],
            css_classes=["compare-choice"], sizing_mode="stretch_width")
        self.compare = pn.widgets.Tabulator(pd.DataFrame(), name="compare-table",
                                            disabled=True, height=320, pagination=None,
                                            sizing_mode="stretch_width",
                                            css_classes=["compare-table"])
        self.compare_choice.param.watch(self._compare, "value")
        self.draft_choice = pn.widgets.Select(name="Drafts (edits kept by name)", options={},
                                              css_classes=["draft-choice"])
        self.open_draft = pn.widgets.Button(name="Continue from this draft",
                                            css_classes=["open-draft"])
        self.open_draft.on_click(lambda e: session.open_draft(self.draft_choice.value or ""))
        state.param.watch(self._update, ["options_version", "level", "plan_version"])
        state.param.watch(self._update_drafts, ["drafts_version"])
        self._update()
        self._update_drafts()

    def _update_drafts(self, *events) -> None:
        st = self.session.store
        self.draft_choice.options = {"main workbench record": "", **{d: d for d in st.drafts()}}
        self.draft_choice.value = st.draft if st.draft in self.draft_choice.options.values() \
            else ""

    def _save(self, event) -> None:
        if self.session.save_option(self.name_input.value, overwrite=self.overwrite.value):
            self.name_input.value = ""

    def _update(self, *events) -> None:
        infos = [o for o in self.session.store.list_options() if o.level == self.state.level]
        self.table.value = pd.DataFrame({
            "option": [o.name for o in infos],
            "plan year": [o.plan_year for o in infos],
            "status": [status_text(o) for o in infos],
            "students moved": [round(o.students_moved) for o in infos],
            "mean km": [round(o.mean_distance / 1000.0, 2) for o in infos],
            "out of band": [o.out_of_band for o in infos],
            "saved": [o.saved.replace("T", " ")[:16] for o in infos],
        }).astype({"option": object, "status": object, "saved": object})
        names = [o.name for o in infos]
        self.choice.options = names
        if names and self.choice.value not in names:
            self.choice.value = names[0]
        # the chooser draws its labels as HTML: each name goes in escaped, shown as typed
        self.compare_choice.options = {"today": "today", "on screen": "on screen",
                                       **{_esc(n): n for n in names}}
        keep = [v for v in self.compare_choice.value
                if v in self.compare_choice.options.values()]
        if keep != self.compare_choice.value:
            self.compare_choice.value = keep
        else:
            self._compare()

    def _compare(self, *events) -> None:
        st = self.session.store
        chosen = self.compare_choice.value
        if not chosen:
            self.compare.value = pd.DataFrame({"pick two or more above": []})
            return
        outs = []
        for name in chosen:
            if name == "today":
                outs.append(st.today())
            elif name == "on screen":
                outs.append(st.on_screen())
            else:
                try:
                    outs.append(st.load_option(name))
                except ValueError as exc:
                    self.session.notify(str(exc), "danger")
        frame = st.compare_frame(outs)
        frame.index.name = "measure"
        frame.columns = [_esc(c) for c in frame.columns]  # column titles are drawn as HTML
        self.compare.value = frame

    def __panel__(self):
        return pn.Column(
            pn.Row(self.name_input, self.save, self.overwrite),
            self.table, pn.Row(self.choice, self.show, self.delete),
            self.compare_choice, self.compare, pn.Row(self.draft_choice, self.open_draft),
            sizing_mode="stretch_width")
