"""The note a page opens with: what the map shows and what the planner can do next."""

from __future__ import annotations

import panel as pn

from ..session import Session
from ..store import TODAY
from ..text import esc as _esc

__all__ = ["IntroNote", "intro_html"]


def intro_html(session: Session) -> str:
    """What is on screen, in plain words (HTML; names escaped)."""
    st = session.store
    out = st.on_screen()
    n_units = len(st.unit_ids)
    if out.name == TODAY:
        now = ("Right now it shows <b>today's zones</b>: no plan has been made for this "
               "level yet.")
    else:
        now = (f"Right now it shows <b>{_esc(out.name or 'the last result')}</b> for the "
               f"{_esc(out.level)} level.")
    return (
        "<div class='intro-text' style='font-size:13px;line-height:1.45'>"
        "<b>What you see.</b> The map shows the "
        f"{n_units:,} planning units of {_esc(st.inputs.settings.name)}, each coloured by the "
        "school it would attend. Every school keeps one colour on every map, and its marker "
        f"has its zone's colour. {now} Dotted black lines are today's boundaries, red dashed "
        "outlines mark units that change school, hatched units are locked; the bar at the "
        "bottom left gives the scale and the arrow points north.<br>"
        "<b>What you can do next.</b> Choose the level and the rules on the left; click units "
        "on the map and lock them to a school, or change a school's capacity in "
        "<i>Schools</i>; then press <b>Rerun</b> for a new plan. Every lock and edit can be "
        "undone. Save a plan you want to keep in <i>Options</i>, set two options side by "
        "side in <i>Compare maps</i>, print a map from <i>Print</i> and take the files from "
        "<i>Downloads</i>.</div>")


class IntroNote(pn.viewable.Viewer):
    """The first-load explanation, with a button that puts it away (remembered with the
    workbench record) and one that brings it back."""

    def __init__(self, session: Session, **params):
        super().__init__(**params)
        self.session = session
        self.text = pn.pane.HTML(intro_html(session), sizing_mode="stretch_width")
        self.dismiss = pn.widgets.Button(name="Got it, hide this", css_classes=["intro-dismiss"],
                                         width=160)
        self.box = pn.Column(self.text, self.dismiss, css_classes=["intro-note"],
                             sizing_mode="stretch_width",
                             styles={"background": "#eef4fb", "border": "1px solid #9bb8d9",
                                     "border-radius": "4px", "padding": "4px 10px"})
        self.dismiss.on_click(self._hide)
        self.reopen = pn.widgets.Button(name="What is on this page?", css_classes=["intro-show"],
                                        button_type="light", width=180)
        self.reopen.on_click(self._show)
        self._set_visible(not session.store.intro_dismissed)
        session.state.param.watch(self._update, ["plan_version", "level"])

    def _update(self, *events) -> None:
        if self.box.visible:
            self.text.object = intro_html(self.session)

    def _set_visible(self, shown: bool) -> None:
        self.box.visible = shown
        self.reopen.visible = not shown
        if shown:
            self.text.object = intro_html(self.session)

    def _hide(self, event) -> None:
        """Put the note away, on this page and on the next pages of this record."""
        self._set_visible(False)
        self.session.store.set_intro_dismissed(True)

    def _show(self, event) -> None:
        self._set_visible(True)
        self.session.store.set_intro_dismissed(False)

    def __panel__(self):
        return pn.Column(self.box, self.reopen, sizing_mode="stretch_width")
