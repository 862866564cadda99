"""The sidebar: settings, Rerun / Cancel with progress, and the selection to lock."""

from __future__ import annotations

import panel as pn

from districting.travel.measures import WORDS

from ..session import Session
from ..store_feeders import FEEDER_RULES
from ..text import esc as _esc

__all__ = ["SettingsPanel", "RunPanel", "SelectionPanel", "FEEDER_WORDS"]

#: The feeder rules in the planner's words.
FEEDER_WORDS = {
    "none": "None",
    "whole": "Whole feeding: each zone takes whole zones of the level below",
    "nested": "Nested: each zone lies inside one zone of the level above",
}


class SettingsPanel(pn.viewable.Viewer):
    """Level, plan year, the band, stability weight, longest trip, gap, time limit, travel."""

    def __init__(self, session: Session, **params):
        super().__init__(**params)
        self.session = session
        self.state = session.state

    def __panel__(self):
        p = self.state.param
        w = {
            "level": pn.widgets.Select.from_param(p.level, name="School level"),
            "plan_year": pn.widgets.Select.from_param(p.plan_year, name="Plan year"),
            "max_util_pct": pn.widgets.FloatInput.from_param(
                p.max_util_pct, name="Highest utilization (%)", step=1),
            "min_util_pct": pn.widgets.FloatInput.from_param(
                p.min_util_pct, name="Lowest utilization (%)", step=1),
            "stability_weight": pn.widgets.FloatInput.from_param(
                p.stability_weight, name="Keep students in place (m per student moved)",
                step=100),
            "keep_option_weight": pn.widgets.FloatInput.from_param(
                p.keep_option_weight, name="Keep the plan being edited (m per student moved)",
                step=500),
            "max_distance_km": pn.widgets.FloatInput.from_param(
                p.max_distance_km, name="Longest trip (km, 0 = no limit)", step=0.5),
            "gap_pct": pn.widgets.FloatInput.from_param(p.gap_pct, name="Gap to prove (%)",
                                                        step=0.01),
            "time_limit": pn.widgets.FloatInput.from_param(p.time_limit,
                                                           name="Time limit (s)", step=5),
            "travel": pn.widgets.Select.from_param(
                p.travel, name="Travel", options={WORDS[m]: m for m in p.travel.objects}),
            "keep_walkers": pn.widgets.Checkbox.from_param(
                p.keep_walkers, name="Keep units within walking distance with such a school"),
            "max_transported": pn.widgets.FloatInput.from_param(
                p.max_transported, name="Most students needing transport (0 = no limit)",
                step=50),
            "transport_charge": pn.widgets.FloatInput.from_param(
                p.transport_charge,
                name="Charge per student needing transport (m, 0 = none)", step=100),
            "feeding": pn.widgets.Select.from_param(
                p.feeding, name="Feeder rule", options={FEEDER_WORDS[r]: r for r in FEEDER_RULES}),
            "given_option": pn.widgets.Select.from_param(
                p.given_option, name="Zones of the neighbouring level kept as they are"),
            "max_splits": pn.widgets.IntInput.from_param(
                p.max_splits, name="Whole feeding: at most this many splits per school", step=1),
            "group_band": pn.widgets.FloatInput.from_param(
                p.group_band, name="Group band (points around the district's share, 0 = none)",
                step=1),
        }
        for key, widget in w.items():
            widget.css_classes = [f"setting-{key.replace('_', '-')}"]
            widget.sizing_mode = "stretch_width"
        return pn.Card(*w.values(), title="Settings", collapsed=False, sizing_mode="stretch_width",
                       css_classes=["settings-card"])


class RunPanel(pn.viewable.Viewer):
    """Rerun, Cancel and the progress line."""

    def __init__(self, session: Session, **params):
        super().__init__(**params)
        self.session = session
        self.state = state = session.state
        self.rerun = pn.widgets.Button(name="Rerun", button_type="primary",
                                       css_classes=["rerun-button"], sizing_mode="stretch_width")
        self.cancel = pn.widgets.Button(name="Cancel (keep best plan)", button_type="warning",
                                        disabled=True, css_classes=["cancel-button"],
                                        sizing_mode="stretch_width")
        self.rerun.on_click(lambda e: session.rerun())
        self.cancel.on_click(lambda e: session.cancel())
        self.spinner = pn.indicators.LoadingSpinner(value=False, size=22, width=26)
        self.status = pn.pane.HTML("", css_classes=["run-status"], sizing_mode="stretch_width")
        state.param.watch(self._update, ["running", "progress", "elapsed"])
        self._update()

    def _update(self, *events) -> None:
        s = self.state
        self.rerun.disabled = s.running
        self.cancel.disabled = not s.running
        self.spinner.value = s.running
        head = f"Solving... {s.elapsed:.1f} s<br>" if s.running else ""
        self.status.object = (f"<div style='font-size:12px' data-running='{int(s.running)}' "
                              f"data-runs='{s.runs_finished}'>"
                              f"{head}{_esc(s.progress)}</div>")

    def __panel__(self):
        return pn.Column(pn.Row(self.rerun, self.spinner), self.cancel, self.status,
                         sizing_mode="stretch_width")


class SelectionPanel(pn.viewable.Viewer):
    """The selected units and the lock / forbid buttons."""

    def __init__(self, session: Session, **params):
        super().__init__(**params)
        self.session = session
        self.state = state = session.state
        self.ids = pn.widgets.TextInput(name="Selected units (ids, comma separated)",
                                        placeholder="click units on the map, or type ids",
                                        css_classes=["selected-units"],
                                        sizing_mode="stretch_width")
        self.site = pn.widgets.Select.from_param(state.param.target_site, name="School",
                                                 css_classes=["target-school"],
                                                 sizing_mode="stretch_width")
        self.site.options = self._site_options()
        self.info = pn.pane.HTML("", css_classes=["selection-info"])
        buttons = [
            ("Lock to school", "lock-button", "success", session.lock_selection),
            ("Unlock", "unlock-button", "default", session.unlock_selection),
            ("Forbid school", "forbid-button", "danger", session.forbid_selection),
            ("Allow school", "allow-button", "default", session.allow_selection),
        ]
        self.buttons = []
        for label, css, kind, action in buttons:
            b = pn.widgets.Button(name=label, css_classes=[css], button_type=kind,
                                  sizing_mode="stretch_width")
            b.on_click(lambda e, act=action: act())
            self.buttons.append(b)
        self.clear = pn.widgets.Button(name="Clear selection", css_classes=["clear-selection"],
                                       sizing_mode="stretch_width")
        self.clear.on_click(lambda e: session.select([]))
        self.ids.param.watch(self._typed, "value")
        state.param.watch(self._update, ["selection", "plan_version", "edits_version"])
        state.param.watch(lambda e: setattr(self.site, "options", self._site_options()),
                          "level")
        self._update()

    def _site_options(self) -> dict:
        names = self.session.store.site_names()
        return {f"{names.get(s, s)} ({s})": s for s in self.session.store.site_ids}

    def _typed(self, event) -> None:
        ids = [u.strip() for u in event.new.replace(";", ",").split(",") if u.strip()]
        known = set(self.session.store.unit_ids)
        bad = [u for u in ids if u not in known]
        if bad:
            self.session.notify(f"Unknown unit id(s): {', '.join(bad[:8])}. Unit ids look like "
                              f"{self.session.store.unit_ids[0]}.", "warning")
        good = [u for u in ids if u in known]
        if good != self.state.selection:
            self.session.select(good)

    def _update(self, *events) -> None:
        sel = self.state.selection
        text = ", ".join(sel)
        if self.ids.value != text:
            self.ids.value = text
        for b in self.buttons:
            b.disabled = not sel
        if not sel:
            self.info.object = "<i style='font-size:12px'>No units selected.</i>"
            return
        frame = self.session.store.units_frame().set_index("unit_id").loc[sel]
        schools = ", ".join(sorted(set(frame["proposed_name"])))
        locked = int((frame["locked"] != "").sum())
        self.info.object = (f"<div style='font-size:12px'>{len(sel)} unit(s), "
                            f"{frame['students'].sum():,.0f} students; now shown at: "
                            f"{_esc(schools)}{f'; {locked} locked' if locked else ''}</div>")

    def __panel__(self):
        return pn.Card(self.ids, self.info, self.site, pn.Row(*self.buttons[:2]),
                       pn.Row(*self.buttons[2:]), self.clear, title="Lock or forbid units",
                       sizing_mode="stretch_width", css_classes=["selection-card"])
