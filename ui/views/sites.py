"""The Schools and Locks tabs: the sites of the level (editable) and the locks in force."""

from __future__ import annotations

import pandas as pd
import panel as pn

from districting.outputs.sheets import for_people, school_sheet
from districting.outputs.wording import DASH
from districting.rules import SITE_STATUSES

from ..session import Session

__all__ = ["LocksTable", "SitesTable"]


class LocksTable(pn.viewable.Viewer):
    """Every lock and forbid in force, with a button to remove the chosen rows."""

    def __init__(self, session: Session, **params):
        super().__init__(**params)
        self.session = session
        self.state = state = session.state
        self.table = pn.widgets.Tabulator(
            pd.DataFrame(columns=["unit", "school", "kind", "from"]), name="locks-table",
            selectable="checkbox", disabled=True, show_index=False, height=300,
            sizing_mode="stretch_width", css_classes=["locks-table"], pagination=None)
        self.remove = pn.widgets.Button(name="Remove selected locks", button_type="danger",
                                        css_classes=["remove-locks"])
        self.remove.on_click(self._remove)
        self.note = pn.pane.HTML("")
        state.param.watch(self._update, ["edits_version", "plan_version"])
        self._update()

    def _update(self, *events) -> None:
        rows = self.session.store.lock_rows()
        names = self.session.store.site_names()
        self._rows = rows
        self.table.value = pd.DataFrame({
            "unit": [r.unit for r in rows],
            "school": [f"{names.get(r.site, r.site)} ({r.site})" for r in rows],
            "kind": [r.kind for r in rows],
            "from": [r.source for r in rows],
        })
        fixed = sum(r.source != "workbench" for r in rows)
        self.note.object = (f"<i style='font-size:12px'>{fixed} come from the project file "
                            "(decided earlier) and stay.</i>" if fixed else "")

    def _remove(self, event) -> None:
        chosen = [self._rows[i] for i in self.table.selection if i < len(self._rows)]
        if not chosen:
            self.session.notify("Tick the rows to remove first.", "warning")
            return
        self.session.remove_rows(chosen)

    def __panel__(self):
        return pn.Column(self.table, pn.Row(self.remove, self.note), sizing_mode="stretch_width")


#: The sheet's columns the table shows as the edits in force instead (editable numbers).
SHOWN_AS_EDITS = ("Site id", "School", "Capacity (students)",
                  "Lowest utilization allowed (%)", "Highest utilization allowed (%)")
OUTSIDE = "Outside the band in some year"


def _pct(v) -> float:
    return float(v) * 100.0 if v == v else float("nan")


class SitesTable(pn.viewable.Viewer):
    """Schools of the level: editable capacity, band and status; the plan's figures."""

    EDITABLE = {"capacity": "capacity", "max_pct": "max_util", "min_pct": "min_util",
                "status": "status"}

    def __init__(self, session: Session, **params):
        super().__init__(**params)
        self.session = session
        self.state = state = session.state
        self.table = pn.widgets.Tabulator(
            pd.DataFrame(), name="sites-table", show_index=False, height=380,
            sizing_mode="stretch_width", css_classes=["sites-table"], pagination=None,
            selectable=False, layout="fit_data_fill")
        self.table.on_edit(self._edited)
        self.legend = pn.pane.HTML("")
        state.param.watch(self._update, ["plan_version", "edits_version", "level"])
        self._update()

    def frame(self) -> pd.DataFrame:
        """The edits in force (numbers, editable) beside the plan's figures as the schools'
        CSV has them (:func:`districting.outputs.sheets.school_sheet`, as text by
        :func:`~districting.outputs.sheets.for_people`), so screen and spreadsheet agree."""
        st = self.session.store
        edits = st.sites_frame(resolved_settings=st.effective)
        out = pd.DataFrame({
            "site_id": edits["site_id"], "school": edits["name"], "status": edits["status"],
            "capacity": edits["capacity"],
            "max_pct": edits["max_util"].map(_pct), "min_pct": edits["min_util"].map(_pct),
        })
        sheet, self.notes = school_sheet(st.on_screen())
        shown = for_people(sheet.drop(columns=[c for c in sheet.columns if c in SHOWN_AS_EDITS
                                               or c.startswith("Status in ")]))
        shown.index = sheet["Site id"].astype(str).to_numpy()
        return pd.concat([out, shown.reindex(out["site_id"].astype(str)).reset_index(drop=True)
                          .fillna(DASH)], axis=1)

    def _update(self, *events) -> None:
        df = self.frame()
        self._df = df
        editors = {c: None for c in df.columns}
        editors.update({
            "capacity": {"type": "number", "min": 0, "step": 10},
            "max_pct": {"type": "number", "min": 0, "max": 300, "step": 1},
            "min_pct": {"type": "number", "min": 0, "max": 300, "step": 1},
            "status": {"type": "list", "values": list(SITE_STATUSES)},
        })
        self.table.editors = editors
        self.table.formatters = {
            "capacity": {"type": "money", "precision": 0, "symbol": "", "thousand": ","},
            **{c: {"type": "money", "precision": 0, "symbol": "", "thousand": ","}
               for c in ("max_pct", "min_pct")}}
        self.table.titles = {"site_id": "Site id", "school": "School",
                             "status": "Status (edit)", "capacity": "Capacity (edit)",
                             "max_pct": "Max utilization % (edit)",
                             "min_pct": "Min utilization % (edit)"}
        self.table.value = df
        self.table.style.apply(self._style, axis=1)
        n = int((df[OUTSIDE] == "yes").sum())
        self.legend.object = (
            "<div style='font-size:12px'>Edit <b>capacity</b>, the <b>highest</b> and "
            "<b>lowest utilization</b> and the <b>status</b> in the table, then press Rerun. "
            "The other columns are the plan's, as in the schools CSV; red cells are outside "
            f"the band in that year ({n} school(s) flagged).</div>")

    def _style(self, row: pd.Series) -> list[str]:
        """Red where the plan is outside the band: a year's utilization, and the flag."""
        styles = []
        for col, v in row.items():
            bad = False
            if isinstance(col, str) and col.startswith("Utilization ") and col.endswith(" (%)"):
                year = col[len("Utilization "):-len(" (%)")]
                bad = str(row.get(f"Band {year}", "")) not in ("", DASH)
            elif col == OUTSIDE:
                bad = v == "yes"
            styles.append("background-color:#f5b7b1;font-weight:bold" if bad else "")
        return styles

    def _edited(self, event) -> None:
        field = self.EDITABLE.get(event.column)
        if field is None:
            return
        site = str(self._df.iloc[event.row]["site_id"])
        value = event.value
        if field in ("max_util", "min_util"):
            try:
                value = float(value) / 100.0
            except (TypeError, ValueError):
                self.session.notify(f"{site}: type a percentage, e.g. 95", "danger")
                self._update()
                return
        if not self.session.edit_site(site, **{field: value}):
            self._update()

    def __panel__(self):
        return pn.Column(self.legend, self.table, sizing_mode="stretch_width")
