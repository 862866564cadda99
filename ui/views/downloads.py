"""The Downloads tab: the files of the plan on screen."""

from __future__ import annotations

import panel as pn

from districting import DRAFT_NOTICE

from ..session import Session
from ..text import esc as _esc

__all__ = ["DownloadsPanel"]


class DownloadsPanel(pn.viewable.Viewer):
    """Files of the plan on screen: GeoPackage, GeoJSON, Shapefile, CSVs with their
    sidecars (``*.about.json``: the option, its status and a note per column), the PDF
    packet; each named after the saved option."""

    KINDS = (
        ("gpkg", "GeoPackage (zones, units, sites, changes)", "gpkg"),
        ("geojson", "GeoJSON zones (lon/lat)", "geojson"),
        ("shapefile", "Shapefile zones (.zip)", "zip"),
        ("units_csv", "CSV: unit -> school", "csv"),
        ("units_about", "About the unit CSV: its columns and the option (JSON)", "about.json"),
        ("schools_csv", "CSV: per-school summary", "csv"),
        ("schools_about", "About the school CSV: its columns and the option (JSON)",
         "about.json"),
        ("feeders_csv", "CSV: feeder pattern (where students go next level)", "csv"),
        ("feeders_about", "About the feeder CSV: its columns and the option (JSON)",
         "about.json"),
        ("packet", "Hearing packet (PDF)", "pdf"),
    )

    def __init__(self, session: Session, **params):
        super().__init__(**params)
        self.session = session
        self.state = state = session.state
        self.buttons = []
        for kind, label, _ext in self.KINDS:
            b = pn.widgets.FileDownload(
                label=label, callback=lambda k=kind: self._make(k), filename=f"{kind}.bin",
                button_type="primary", button_style="outline",
                css_classes=[f"download-{kind.replace('_', '-')}"], width=300)
            self.buttons.append(b)
        self.note = pn.pane.HTML("")
        state.param.watch(self._update, ["plan_version", "level"])
        self._update()

    def _update(self, *events) -> None:
        out = self.session.store.outcome
        base = "no-plan" if out is None else _file_label(
            f"{out.name or 'unsaved-result'}-{out.level}")
        for (kind, _label, ext), b in zip(self.KINDS, self.buttons, strict=True):
            suffix = {"units_csv": "-units", "units_about": "-units", "schools_csv": "-schools",
                      "schools_about": "-schools", "feeders_csv": "-feeders",
                      "feeders_about": "-feeders", "packet": "-packet"}.get(kind, "")
            b.filename = f"{base}{suffix}.{ext}"
            b.disabled = out is None
        self.note.object = (
            "<div style='font-size:12px'>Run a plan first (press Rerun).</div>" if out is None
            else f"<div style='font-size:12px'>Files of <b>{_esc(out.name or 'the unsaved result')}"
                 f"</b> ({_esc(out.level)}). Every file carries the draft notice: "
                 f"<i>{_esc(DRAFT_NOTICE)}</i></div>")

    def _make(self, kind: str):
        try:
            return str(self.session.store.export(kind))
        except Exception as exc:  # noqa: BLE001 - the page shows the reason, not a traceback
            self.session.notify(f"Could not write the {kind} file: {exc}", "danger")
            return None

    def __panel__(self):
        return pn.Column(self.note, *self.buttons, sizing_mode="stretch_width")



def _file_label(name: str) -> str:
    from districting.names import slug

    return slug(name)
