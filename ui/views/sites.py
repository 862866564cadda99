"""The Schools and Locks tabs: the sites of the level (editable) and the locks in force."""

from __future__ import annotations

import pandas as pd
import panel as pn

from districting import rules
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
        st = self.session.store
        df = st.sites_frame()
        years = [c[len("students_"):] for c in df.columns if c.startswith("students_")]
        out = pd.DataFrame({
            "site_id": df["site_id"], "school": df["name"], "status": df["status"],
            "capacity": df["capacity"],
            "max_pct": df["max_util"].map(_pct), "min_pct": df["min_util"].map(_pct),
        })
        for y in years:
            out[f"use {y} %"] = df[f"util_{y}"].map(_pct)
        out["flag"] = df["flag"]
        out["today"] = df["today"]
        for y in years:
            out[f"students {y}"] = df[f"students_{y}"]
        out["moved in"] = df["moved_in"]
        out["moved out"] = df["moved_out"]
        students = df[[c for c in df.columns if c.startswith("students_")]].sum(axis=1)
        out["mean km"] = [f"{v:.2f}" if v == v else ("- (no students)" if s == 0 else "-")
                          for v, s in zip(df["mean_km"], students, strict=True)]
        return out

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
        fmt = {c: {"type": "money", "precision": 0, "thousand": ","} for c in df.columns
               if c.startswith("students") or c in ("today", "moved in", "moved out",
                                                      "capacity")}
        fmt.update({c: {"type": "money", "precision": 0, "symbol": "", "thousand": ","}
                    for c in df.columns if c.startswith("use ") or c.endswith("_pct")})
        self.table.formatters = fmt
        year = self.session.store.effective.plan_year
        self.table.titles = {"site_id": "id", "max_pct": "max %", "min_pct": "min %",
                             "today": f"{year} students, today's zones",
                             **{c: f"{c[4:-2]} use (%)" for c in df.columns
                                if c.startswith("use ")}}
        self.table.value = df
        self.table.style.apply(self._style, axis=1)
        n = int((df["flag"] != "").sum())
        self.legend.object = (
            "<div style='font-size:12px'>Edit <b>capacity</b>, <b>max %</b>, <b>min %</b> "
            "and <b>status</b> in the table, then press Rerun. Red cells are outside the band "
            f"in that year ({n} school(s) flagged).</div>")

    def _style(self, row: pd.Series) -> list[str]:
        styles = []
        for col, v in row.items():
            bad = False
            if (isinstance(col, str) and col.startswith("use ") and v == v
                    and bool(rules.takes_students(row["status"]))):
                bad = v > row["max_pct"] + 1e-6 or (v < row["min_pct"] - 1e-6 and v > 0)
            if col == "flag" and v:
                bad = True
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
