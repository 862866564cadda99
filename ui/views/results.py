"""The Changes tab: headline figures, the units whose school differs and the feeder
pattern (where each school's students go at the neighbouring level)."""

from __future__ import annotations

import pandas as pd
import panel as pn

from districting.outputs.feeders import feeder_sheet
from districting.outputs.option_edit import edit_lines
from districting.outputs.sheets import for_people, whole_numbers

from ..session import Session
from ..state import REFERENCES
from ..store import TODAY
from ..text import esc as _esc
from ..text import status_text

__all__ = ["ResultsView", "outside_band", "feeder_rows"]


def feeder_rows(outcome) -> tuple[pd.DataFrame, str]:
    """The feeder table as the CSV has it (:func:`districting.outputs.feeders.feeder_sheet`,
    as text), and a note: "" or why there is no table (a named option the store lacks)."""
    try:
        sheet, _notes = feeder_sheet(outcome)
    except ValueError as exc:
        return pd.DataFrame(), f"No feeder table: {exc}"
    note = "" if len(sheet) else "No feeder table: the neighbouring levels have no zones."
    return for_people(sheet.drop(columns=["Zones of the other level"])), note


def outside_band(sites: pd.DataFrame) -> list[str]:
    """Per flagged school, its worst year in words: 'Quillmarsh (E02) 55% in 2027, under
    its 60% floor' (from the store's sites table: util_<year>, min_util, max_util, flag)."""
    years = [c[len("util_"):] for c in sites.columns if c.startswith("util_")]
    out = []
    for _, row in sites.loc[sites["flag"] != ""].iterrows():
        use = {y: row[f"util_{y}"] for y in years if row[f"util_{y}"] == row[f"util_{y}"]}
        if not use:
            out.append(f"{row['name']} ({row['site_id']}): {row['flag']}")
            continue
        over = {y: u - row["max_util"] for y, u in use.items()}
        under = {y: row["min_util"] - u for y, u in use.items()}
        y_over, y_under = max(over, key=over.get), max(under, key=under.get)
        if over[y_over] >= under[y_under]:
            words = f"{use[y_over]:.0%} in {y_over}, over its {row['max_util']:.0%} limit"
        else:
            words = f"{use[y_under]:.0%} in {y_under}, under its {row['min_util']:.0%} floor"
        out.append(f"{row['name']} ({row['site_id']}) {words}")
    return out


class ResultsView(pn.viewable.Viewer):
    """Headline figures and the change view (units whose school differs)."""

    def __init__(self, session: Session, **params):
        super().__init__(**params)
        self.session = session
        self.state = state = session.state
        self.summary = pn.pane.HTML("", css_classes=["results-summary"],
                                    sizing_mode="stretch_width")
        self.ref = pn.widgets.RadioButtonGroup.from_param(
            state.param.reference, name="Compare with", options=list(REFERENCES),
            css_classes=["reference-choice"])
        self.flows = pn.widgets.Tabulator(pd.DataFrame(), name="flows-table", disabled=True,
                                          show_index=False, height=220, pagination=None,
                                          sizing_mode="stretch_width",
                                          css_classes=["flows-table"])
        self.changes = pn.widgets.Tabulator(pd.DataFrame(), name="changes-table",
                                            disabled=True, show_index=False, height=300,
                                            pagination=None, sizing_mode="stretch_width",
                                            css_classes=["changes-table"])
        self.feeders = pn.widgets.Tabulator(pd.DataFrame(), name="feeders-table",
                                            disabled=True, show_index=False, height=260,
                                            pagination=None, sizing_mode="stretch_width",
                                            css_classes=["feeders-table"])
        self.feeder_note = pn.pane.HTML("", css_classes=["feeders-note"])
        state.param.watch(self._update, ["plan_version", "reference", "level",
                                         "edits_version"])
        self._update()

    def _update(self, *events) -> None:
        st = self.session.store
        out = st.on_screen()
        s = st.summary(out)
        ref = self.session.reference_outcome
        label = self.session.reference_label
        ch = st.changes_frame(out, ref)
        fl = st.flows_frame(out, ref)
        shown = "today's zones (no plan run yet: press Rerun)" if out.name == TODAY \
            else _esc(s["option"])
        if out.name == TODAY:
            worst = outside_band(st.sites_frame(out))
            status = (f"today's zones: {len(worst)} school(s) outside the band, "
                      + "; ".join(worst) if worst else
                      "today's zones: every school inside the band")
        else:
            status = status_text(out.plan)
        moved_vs_ref = ch["students"].sum()
        self.summary.object = (
            f"<div class='summary' data-students-moved='{s['students_moved']:.0f}' "
            f"data-status='{_esc(s['status'])}'>"
            f"<b>On the map:</b> {shown} &middot; {_esc(s['level'])} &middot; plan year "
            f"{s['plan_year']} &middot; <b>{_esc(status)}</b><br>"
            f"<b>{s['students_moved']:,.0f}</b> students ({s['units_moved']:,} units) change "
            f"school compared with today &middot; mean trip <b>{s['mean_km']:.2f} km</b>"
            f" &middot; longest {s['max_km']:.2f} km &middot; schools outside the band: "
            f"<b>{s['schools_out_of_band']}</b><br>"
            f"Against {_esc(label)}: {len(ch):,} units, {moved_vs_ref:,.0f} students differ."
            + "".join(f"<br><span class='edit-line'>{_esc(line)}</span>"
                      for line in edit_lines(out))
            + "</div>")
        year = s["plan_year"]
        self.flows.value = for_people(pd.DataFrame({
            "From": fl["from_name"], "To": fl["to_name"],
            "Planning units": whole_numbers(fl["units"]),
            f"Students {year}": whole_numbers(fl["students"])}))
        self.changes.value = for_people(pd.DataFrame({
            "Unit id": ch["unit_id"], f"Students {year}": whole_numbers(ch["students"]),
            "From (site id)": ch["from"], "From": ch["from_name"],
            "To (site id)": ch["to"], "To": ch["to_name"],
            "Travel before (km)": ch["km_before"].round(2),
            "Travel after (km)": ch["km_after"].round(2)}))
        rows, note = feeder_rows(out)
        self.feeders.value = rows
        self.feeder_note.object = f"<div style='font-size:12px'>{_esc(note)}</div>"

    def __panel__(self):
        return pn.Column(self.summary, pn.Row(pn.pane.HTML("<b>Change view against:</b>"),
                                              self.ref),
                         pn.pane.HTML("<b>Students moving, by school pair</b>"), self.flows,
                         pn.pane.HTML("<b>Units whose school differs</b>"), self.changes,
                         pn.pane.HTML("<b>Feeder pattern: where each school's students go "
                                      "at the next level</b>"), self.feeder_note, self.feeders,
                         sizing_mode="stretch_width")
