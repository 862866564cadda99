"""The map: units coloured by proposed zone, schools, today's boundaries, barriers, locks.

A Bokeh figure over the project's :class:`~ui.mapdata.MapData` (shapes prepared once per
project and level); when a plan changes only its colour and attribute columns are sent
again, never the shapes. No tiles are loaded: the map works offline. Element names
(``name=`` and ``css_classes``) are stable so tests and scripts can find them.
"""

from __future__ import annotations

import numpy as np
import panel as pn
import param
from bokeh.models import (
    BoxSelectTool,
    ColumnDataSource,
    HoverTool,
    LabelSet,
    LassoSelectTool,
    LegendItem,
    TapTool,
)

from ..mapdata import MapData
from ..session import Session
from .layers import (
    NO_ZONE_COLOR,
    draw_barriers,
    draw_sites,
    draw_streets,
    draw_today,
    site_columns,
    zone_fill,
)
from .mapframe import map_figure

__all__ = ["MapView"]

class MapView(pn.viewable.Viewer):
    """Units coloured by proposed zone, schools, today's boundaries, barriers, locks."""

    show_today = param.Boolean(True, doc="Draw today's zone boundaries")
    show_changes = param.Boolean(True, doc="Outline units whose school changes")
    show_labels = param.Boolean(True, doc="Write school names on the map")

    def __init__(self, session: Session, **params):
        super().__init__(**params)
        self.session = session
        self.state = state = session.state
        st = session.store
        self.mapdata = mapdata = MapData.of(st.inputs)
        xs, ys = mapdata.units
        n = len(xs)
        self.units = ColumnDataSource(name="units-source", data={
            "xs": xs, "ys": ys, "unit_id": st.unit_ids, **self._unit_columns(n)})
        self.changed = ColumnDataSource(name="changed-source", data={"xs": [], "ys": []})
        self.marked = ColumnDataSource(name="locked-source", data={
            "xs": [], "ys": [], "unit_id": []})
        self.forbidden = ColumnDataSource(name="forbidden-source", data={
            "xs": [], "ys": [], "unit_id": []})
        self.today = ColumnDataSource(name="today-source", data={"xs": [], "ys": []})
        self.sites = ColumnDataSource(name="sites-source", data=self._site_columns())
        fig = map_figure(name="zone-map", css="zone-map", height=560,
                         tools="pan,wheel_zoom,reset,save", active_scroll="wheel_zoom",
                         toolbar_location="above")
        self.unit_glyphs = fig.multi_polygons(
            "xs", "ys", source=self.units, fill_color="color", fill_alpha=0.82,
            line_color="#ffffff", line_width=0.4,
            selection_line_color="#d400d4", selection_line_width=3, selection_fill_alpha=0.95,
            nonselection_fill_alpha=0.55, name="units",
        )
        self.street_glyphs = draw_streets(fig, mapdata)  # a faint reference layer
        # Locked and forbidden units: a small layer of their own (hatching every unit
        # would slow the page down for nothing).
        # Bokeh draws no legend swatch for an empty layer, so each legend entry also holds
        # a one-row layer with nothing to draw on the map (its ring is not a number).
        swatch = {"xs": [[[[np.nan]]]], "ys": [[[[np.nan]]]]}
        lock_items = []
        for source, hatch, width, label, name in (
                (self.marked, "/", 2.5, "locked (hatched)", "locked-units"),
                (self.forbidden, ".", 1.0, "a school forbidden (dots)", "forbidden-units")):
            style = {"fill_alpha": 0, "line_color": "#000000", "line_width": width,
                     "hatch_pattern": hatch, "hatch_color": "#111111", "hatch_alpha": 0.6,
                     "hatch_scale": 8}
            key = fig.multi_polygons("xs", "ys", source=ColumnDataSource(swatch), **style)
            layer = fig.multi_polygons("xs", "ys", source=source, name=name, **style)
            lock_items.append(LegendItem(label=label, renderers=[key, layer]))
        self.change_glyphs = fig.multi_polygons(
            "xs", "ys", source=self.changed, fill_alpha=0, line_color="#c0392b",
            line_width=2, line_dash="dashed", name="changed-units",
            legend_label="changes school")
        self.today_glyphs = draw_today(fig, self.today)
        draw_barriers(fig, mapdata)
        self.site_glyphs = draw_sites(fig, self.sites)
        self.labels = LabelSet(x="x", y="y", text="label", source=self.sites, x_offset=8,
                               y_offset=6, text_font_size="11px", text_color="#111111",
                               background_fill_color="#ffffff", background_fill_alpha=0.75)
        fig.add_layout(self.labels)
        fig.add_tools(
            HoverTool(renderers=[self.unit_glyphs], tooltips=[
                ("Unit", "@unit_id"), ("Students", "@students{0,0}"),
                ("Today", "@current_name"), ("Proposed", "@proposed_name"),
                ("Distance", "@distance{0.00} km"), ("Locked to", "@locked"),
                ("Forbidden", "@forbidden")]),
            HoverTool(renderers=[self.site_glyphs], tooltips=[
                ("School", "@name (@site_id)"), ("Status", "@status"),
                ("Capacity", "@capacity{0,0}")]),
            TapTool(renderers=[self.unit_glyphs]),
            BoxSelectTool(renderers=[self.unit_glyphs]),
            LassoSelectTool(renderers=[self.unit_glyphs]),
        )
        legend = fig.legend[0]
        legend.items = [*lock_items, *legend.items]
        fig.add_layout(legend, "right")  # beside the map, never over the town
        fig.legend.click_policy = "hide"
        fig.legend.background_fill_alpha = 0.8
        fig.legend.label_text_font_size = "11px"
        self.figure = fig
        self.units.selected.on_change("indices", self._on_select)
        self.pane = pn.pane.Bokeh(fig, sizing_mode="stretch_width", height=560)
        self._pending: set[str] = set()
        self._refresh_today()
        self.refresh()
        state.param.watch(lambda e: self._in_document(self.refresh),
                          ["plan_version", "edits_version"])
        state.param.watch(self._on_state_selection, "selection")
        self.param.watch(lambda *e: self._in_document(self._on_toggle),
                         ["show_today", "show_changes", "show_labels"])
        state.param.watch(lambda e: self._in_document(self._refresh_level), "level")

    # ---------------------------------------------------------- data
    def _unit_columns(self, n: int) -> dict:
        return {k: [""] * n for k in ("current", "current_name", "proposed", "proposed_name",
                                      "locked", "forbidden")} | {
            "students": np.zeros(n), "distance": np.zeros(n), "color": [NO_ZONE_COLOR] * n}

    def _site_columns(self) -> dict:
        st = self.session.store
        return site_columns(st, self.mapdata.school_colors(st.level))

    def _refresh_sites(self) -> None:
        self.sites.data = self._site_columns()

    def _in_document(self, fn) -> None:
        """Run ``fn`` (which changes Bokeh models) where the page's document allows it.

        A widget callback may run outside the document's write lock, and changing a Bokeh
        model there breaks the session; in a live session the change therefore waits for
        the document's next tick, which runs under the lock. Pending calls of the same
        method are coalesced: each reads the state afresh when it runs.
        """
        doc = self.units.document
        if doc is None or doc.session_context is None:
            fn()
            return
        key = fn.__name__
        if key in self._pending:
            return
        self._pending.add(key)

        def run() -> None:
            self._pending.discard(key)
            fn()

        doc.add_next_tick_callback(run)

    def _refresh_level(self) -> None:
        self._refresh_today()
        self._refresh_sites()

    def _refresh_today(self) -> None:
        st = self.session.store
        xs, ys = self.mapdata.today(st.level)
        self.today.data = {"xs": xs, "ys": ys}

    def refresh(self) -> None:
        """Send the plan on screen: colours, names, locks; shapes stay on the page."""
        st = self.session.store
        out = st.on_screen()
        frame = st.units_frame(out)
        colors = self.mapdata.school_colors(st.level)
        locked = frame["locked"].to_numpy(dtype=object) != ""
        forbidden = frame["forbidden"].to_numpy(dtype=object) != ""
        names = st.site_names()
        self.units.data.update({
            "students": frame["students"].to_numpy(),
            "current": frame["current"].tolist(),
            "current_name": frame["current_name"].tolist(),
            "proposed": frame["proposed"].tolist(),
            "proposed_name": frame["proposed_name"].tolist(),
            "distance": frame["distance_km"].to_numpy(),
            "locked": [f"{names.get(s, s)} ({s})" if s else "" for s in frame["locked"]],
            "forbidden": frame["forbidden"].tolist(),
            "color": zone_fill(frame["proposed"], colors),
        })
        xs, ys = self.mapdata.units
        uid = frame["unit_id"].to_numpy()
        for source, mask in ((self.marked, locked), (self.forbidden, forbidden & ~locked)):
            idx = np.flatnonzero(mask)
            source.data = {"xs": [xs[i] for i in idx], "ys": [ys[i] for i in idx],
                           "unit_id": uid[idx].tolist()}
        ref = self.session.reference_outcome
        if out is ref:
            changed = np.zeros(len(frame), bool)
        else:
            changed = (frame["proposed"].to_numpy() != st.units_frame(ref)["proposed"]
                       .to_numpy())
        idx = np.flatnonzero(changed)
        self.changed.data = {"xs": [xs[i] for i in idx], "ys": [ys[i] for i in idx]}
        self._refresh_sites()
        self.figure.tags = [{"plan": out.name or "unsaved", "status": out.plan.status}]

    # ---------------------------------------------------------- selection
    def _on_select(self, attr, old, new) -> None:
        ids = self.units.data["unit_id"]
        chosen = [ids[i] for i in new]
        if chosen != self.state.selection:
            self.session.select(chosen)

    def _on_state_selection(self, event) -> None:
        self._in_document(self._show_selection)

    def _show_selection(self) -> None:
        pos = {u: i for i, u in enumerate(self.units.data["unit_id"])}
        idx = sorted(pos[u] for u in self.state.selection if u in pos)
        if list(self.units.selected.indices) != idx:
            self.units.selected.indices = idx

    def _on_toggle(self) -> None:
        self.today_glyphs.visible = self.show_today
        self.change_glyphs.visible = self.show_changes
        self.labels.visible = self.show_labels

    def __panel__(self):
        toggles = pn.Row(
            pn.widgets.Checkbox.from_param(self.param.show_today, name="Today's boundaries",
                                           css_classes=["toggle-today"]),
            pn.widgets.Checkbox.from_param(self.param.show_changes,
                                           name="Outline units that change school",
                                           css_classes=["toggle-changes"]),
            pn.widgets.Checkbox.from_param(self.param.show_labels, name="School names"),
            pn.pane.HTML(
                "<span style='font-size:12px;color:#333'>Click a unit, or drag with the box "
                "or lasso tool (toolbar) to select several; shift-click adds. Hatched with a "
                "black outline = locked; dotted = a school is forbidden.</span>"),
        )
        return pn.Column(toggles, self.pane, sizing_mode="stretch_width")
