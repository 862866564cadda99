"""The workbench's components: each a ``pn.viewable.Viewer`` over one :class:`SessionState`.

The map is a Bokeh figure built from whole geometry arrays (``shapely.to_ragged_array``
-> Bokeh multi-polygons, no per-geometry calls); when a plan changes only its colour and
attribute columns are sent again, never the shapes. No tiles are loaded: the map works
offline. Element names (``name=`` and ``css_classes``) are stable so tests and scripts can
find them.
"""

from __future__ import annotations

import weakref

import numpy as np
import pandas as pd
import panel as pn
import param
import shapely
from bokeh.models import (
    BoxSelectTool,
    ColumnDataSource,
    HoverTool,
    LabelSet,
    LassoSelectTool,
    TapTool,
)
from bokeh.plotting import figure

from districting import DRAFT_NOTICE
from districting.rules import SITE_STATUSES

from .state import REFERENCES, SessionState
from .text import esc as _esc
from .text import text_block

__all__ = [
    "MapView", "SettingsPanel", "RunPanel", "SelectionPanel", "LocksTable", "SitesTable",
    "ResultsView", "OptionsPanel", "DownloadsPanel", "MessageArea", "StoreProblem",
    "polygon_paths",
    "line_paths", "zone_colors",
]

NO_ZONE_COLOR = "#d9d9d9"
BARRIER_STYLE = {  # kind -> (colour, width, dash)
    "river": ("#2f6db5", 4, "solid"),
    "highway": ("#6b3e1e", 3, "solid"),
    "rail": ("#303030", 2, "dashed"),
}
SITE_MARKERS = {"open": "circle", "new": "star", "closing": "x", "candidate": "square",
                "closed": "x"}


# ---------------------------------------------------------------------- geometry to paths
def polygon_paths(geoms) -> tuple[list, list]:
    """Bokeh multi-polygon xs / ys (unit -> polygons -> rings) from (Multi)Polygons.

    One ``shapely.to_ragged_array`` call gives every coordinate and the ring, part and
    geometry offsets; the nested lists Bokeh wants are slices of those arrays. Plain lists,
    not arrays: BokehJS decodes one array per ring otherwise, several times slower.
    """
    geoms = np.asarray(geoms, dtype=object)
    kind, coords, offsets = shapely.to_ragged_array(geoms)
    if kind == shapely.GeometryType.POLYGON:
        ring_off, geom_off = offsets
        part_off = np.arange(len(geom_off))
        geom_off, part_off = part_off, geom_off  # each geometry is one part
    elif kind == shapely.GeometryType.MULTIPOLYGON:
        ring_off, part_off, geom_off = offsets
    else:
        raise ValueError(f"planning units must be polygons; got {kind.name.lower()} geometries")
    coords = np.round(coords, 1)
    x, y = coords[:, 0].tolist(), coords[:, 1].tolist()
    bounds = list(zip(ring_off[:-1].tolist(), ring_off[1:].tolist(), strict=True))
    rx = [x[a:b] for a, b in bounds]
    ry = [y[a:b] for a, b in bounds]
    xs, ys = [], []
    for g0, g1 in zip(geom_off[:-1], geom_off[1:], strict=True):
        parts = list(zip(part_off[g0:g1], part_off[g0 + 1:g1 + 1], strict=True))
        xs.append([rx[r0:r1] for r0, r1 in parts])
        ys.append([ry[r0:r1] for r0, r1 in parts])
    return xs, ys


def line_paths(geoms) -> tuple[list, list]:
    """Bokeh multi_line xs / ys from lines, multi-lines or polygon boundaries (one path each)."""
    geoms = np.asarray(geoms, dtype=object)
    if not len(geoms):
        return [], []
    lines = shapely.get_parts(np.asarray(shapely.boundary(geoms), dtype=object) if
                              shapely.get_type_id(geoms).max() >= 3 else geoms)
    lines = lines[~shapely.is_empty(lines)]
    if not len(lines):
        return [], []
    coords, index = shapely.get_coordinates(lines, return_index=True)
    cuts = [0, *(np.flatnonzero(np.diff(index)) + 1).tolist(), len(index)]
    coords = np.round(coords, 1)
    x, y = coords[:, 0].tolist(), coords[:, 1].tolist()
    pairs = list(zip(cuts[:-1], cuts[1:], strict=True))
    return [x[a:b] for a, b in pairs], [y[a:b] for a, b in pairs]


_SHAPES: weakref.WeakKeyDictionary = weakref.WeakKeyDictionary()


def unit_shapes(inputs) -> tuple[list, list]:
    """Paths of the project's units, computed once per Inputs (shared by sessions)."""
    if inputs not in _SHAPES:
        _SHAPES[inputs] = polygon_paths(inputs.units.geometry.to_numpy())
    return _SHAPES[inputs]


_TODAY: weakref.WeakKeyDictionary = weakref.WeakKeyDictionary()


def today_lines(inputs, level: str) -> tuple[list, list]:
    """Outlines of today's zones of a level (dissolved once per Inputs and level)."""
    cache = _TODAY.setdefault(inputs, {})
    if level not in cache:
        from districting.outputs.zones import dissolve_zones

        sites = inputs.sites
        ids = np.array([*sites["site_id"].astype(str), ""], dtype=object)
        cur = inputs.current[level]
        zones = dissolve_zones(inputs.units, ids[np.where(cur >= 0, cur, len(sites))])
        cache[level] = line_paths(np.asarray(zones.geometry, dtype=object))
    return cache[level]


_KINDS: weakref.WeakKeyDictionary = weakref.WeakKeyDictionary()


def barrier_kinds(inputs) -> np.ndarray | None:
    """The ``kind`` column of the project's barrier layer (river, highway...), if it has one.

    Inputs keep barrier geometry only; the kinds are read back from the layer the project
    names, and used only when it has one row per barrier.
    """
    if inputs in _KINDS:
        return _KINDS[inputs]
    kinds = None
    frame = inputs.barriers if hasattr(inputs.barriers, "columns") else None
    if frame is None:
        src = getattr(inputs.settings, "sources", {}).get("barriers")
        if src is not None:
            try:
                from districting.intake.layers import read_layer

                frame = read_layer(src.path, src.layer, what="barriers")
            except Exception:  # noqa: BLE001 - kinds only style the lines
                frame = None
    if frame is not None and "kind" in frame.columns and len(frame) == len(inputs.barriers):
        kinds = frame["kind"].astype(str).str.strip().str.lower().to_numpy()
    _KINDS[inputs] = kinds
    return kinds


def touching_pairs(inputs) -> np.ndarray:
    """Unit pairs that touch on the map (graph edges plus the ones barriers cut)."""
    adj = inputs.adjacency
    parts = [np.asarray(adj.edges, dtype=np.int64).reshape(-1, 2)]
    cut = getattr(adj, "cut_edges", None)
    if cut is not None:
        parts.append(np.asarray(cut, dtype=np.int64).reshape(-1, 2))
    return np.vstack(parts)


def zone_colors(inputs, site_ids: list[str], assignment: np.ndarray) -> dict[str, str]:
    """Colour per site id: zones that touch on the map get different palette colours."""
    from districting.outputs.colours import color_zones, zone_color

    a = np.asarray(assignment)
    pairs = touching_pairs(inputs)
    za, zb = a[pairs[:, 0]], a[pairs[:, 1]]
    keep = (za != zb) & (za >= 0) & (zb >= 0)
    ids = np.array(site_ids, dtype=object)
    edges = set(zip(ids[za[keep]], ids[zb[keep]], strict=True))
    used = [site_ids[j] for j in np.unique(a[a >= 0])]
    return {sid: zone_color(k) for sid, k in color_zones(edges, nodes=used).items()}


# ---------------------------------------------------------------------- the map
class MapView(pn.viewable.Viewer):
    """Units coloured by proposed zone, schools, today's boundaries, barriers, locks."""

    show_today = param.Boolean(True, doc="Draw today's zone boundaries")
    show_changes = param.Boolean(True, doc="Outline units whose school changes")
    show_labels = param.Boolean(True, doc="Write school names on the map")

    def __init__(self, state: SessionState, **params):
        super().__init__(**params)
        self.state = state
        st = state.store
        inputs = st.inputs
        xs, ys = unit_shapes(inputs)
        n = len(xs)
        self.units = ColumnDataSource(name="units-source", data={
            "xs": xs, "ys": ys, "unit_id": st.unit_ids, **self._unit_columns(n)})
        self.changed = ColumnDataSource(name="changed-source", data={"xs": [], "ys": []})
        self.marked = ColumnDataSource(name="locked-source", data={
            "xs": [], "ys": [], "unit_id": [], "hatch": [], "line_width": []})
        self.today = ColumnDataSource(name="today-source", data={"xs": [], "ys": []})
        self.sites = ColumnDataSource(name="sites-source", data=self._site_columns())
        bounds = inputs.units.total_bounds
        pad = 0.03 * max(bounds[2] - bounds[0], bounds[3] - bounds[1])
        fig = figure(
            name="zone-map", css_classes=["zone-map"], match_aspect=True,
            sizing_mode="stretch_width", height=560,
            x_range=(bounds[0] - pad, bounds[2] + pad), y_range=(bounds[1] - pad,
                                                                  bounds[3] + pad),
            tools="pan,wheel_zoom,reset,save", active_scroll="wheel_zoom",
            toolbar_location="above", output_backend="canvas",
        )
        fig.axis.visible = False
        fig.grid.visible = False
        fig.background_fill_color = "#f4f4f0"
        self.unit_glyphs = fig.multi_polygons(
            "xs", "ys", source=self.units, fill_color="color", fill_alpha=0.82,
            line_color="#ffffff", line_width=0.4,
            selection_line_color="#d400d4", selection_line_width=3, selection_fill_alpha=0.95,
            nonselection_fill_alpha=0.55, name="units",
        )
        # Locked and forbidden units: a small layer of their own (hatching every unit
        # would slow the page down for nothing).
        fig.multi_polygons(
            "xs", "ys", source=self.marked, fill_alpha=0, line_color="#000000",
            line_width="line_width", hatch_pattern="hatch", hatch_color="#111111",
            hatch_alpha=0.6, hatch_scale=8, name="locked-units",
            legend_label="locked (hatched) / forbidden (dots)")
        self.change_glyphs = fig.multi_polygons(
            "xs", "ys", source=self.changed, fill_alpha=0, line_color="#c0392b",
            line_width=2, line_dash="dotted", name="changed-units",
            legend_label="changes school")
        self.today_glyphs = fig.multi_line("xs", "ys", source=self.today, line_color="#111111",
                                           line_width=2.2, line_dash="dashed",
                                           legend_label="today's boundaries", name="today")
        for kind, (color, width, dash) in BARRIER_STYLE.items():
            src = self._barrier_source(kind)
            if src is not None:
                fig.multi_line("xs", "ys", source=src, line_color=color, line_width=width,
                               line_dash=dash, legend_label=kind, name=f"barrier-{kind}")
        other = self._barrier_source(None)
        if other is not None:
            fig.multi_line("xs", "ys", source=other, line_color="#555555", line_width=2,
                           legend_label="barrier", name="barrier-other")
        self.site_glyphs = fig.scatter("x", "y", source=self.sites, marker="marker", size=14,
                                       fill_color="fill", line_color="#000000",
                                       line_width=1.5, name="sites")
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
        self._last_level = st.level

    # ---------------------------------------------------------- data
    def _unit_columns(self, n: int) -> dict:
        return {k: [""] * n for k in ("current", "current_name", "proposed", "proposed_name",
                                      "locked", "forbidden")} | {
            "students": np.zeros(n), "distance": np.zeros(n), "color": [NO_ZONE_COLOR] * n}

    def _barrier_source(self, kind: str | None) -> ColumnDataSource | None:
        """Barrier lines of one kind (river, highway, rail), or of no known kind (None)."""
        inputs = self.state.store.inputs
        bars = inputs.barriers
        if bars is None or not len(bars):
            return None
        geoms = np.asarray(bars.geometry if hasattr(bars, "geometry") else bars, dtype=object)
        kinds = barrier_kinds(inputs)
        if kinds is None:
            mask = np.full(len(geoms), kind is None)
        elif kind is None:
            mask = ~np.isin(kinds, list(BARRIER_STYLE))
        else:
            mask = kinds == kind
        if not mask.any():
            return None
        xs, ys = line_paths(geoms[mask])
        return ColumnDataSource({"xs": xs, "ys": ys})

    def _site_columns(self) -> dict:
        st = self.state.store
        sites = st.inputs.sites
        sites = sites.loc[sites["level"] == st.level]
        frame = st.sites_frame(resolved_settings=st.effective)
        xy = shapely.get_coordinates(sites.geometry.to_numpy())
        status = frame["status"].tolist()
        return {
            "x": xy[:, 0], "y": xy[:, 1], "site_id": frame["site_id"].tolist(),
            "name": frame["name"].tolist(), "status": status,
            "capacity": frame["capacity"].to_numpy(),
            "marker": [SITE_MARKERS.get(s, "circle") for s in status],
            "fill": ["#ffffff"] * len(status),
            "label": [f"{n} ({s})" if s != "open" else n
                      for n, s in zip(frame["name"], status, strict=True)],
        }

    def _refresh_sites(self, colors: dict | None = None) -> None:
        data = self._site_columns()
        if colors:
            data["fill"] = [colors.get(s, "#ffffff") for s in data["site_id"]]
        self.sites.data = data

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
        st = self.state.store
        xs, ys = today_lines(st.inputs, st.level)
        self.today.data = {"xs": xs, "ys": ys}

    def refresh(self) -> None:
        """Send the plan on screen: colours, names, locks; shapes stay on the page."""
        st = self.state.store
        out = st.on_screen()
        frame = st.units_frame(out)
        colors = zone_colors(st.inputs, out.site_ids, out.assignment)
        locked = frame["locked"].to_numpy(dtype=object) != ""
        forbidden = frame["forbidden"].to_numpy(dtype=object) != ""
        names = st.site_names()
        hatch = np.where(locked, "/", ".")
        self.units.data.update({
            "students": frame["students"].to_numpy(),
            "current": frame["current"].tolist(),
            "current_name": frame["current_name"].tolist(),
            "proposed": frame["proposed"].tolist(),
            "proposed_name": frame["proposed_name"].tolist(),
            "distance": frame["distance_km"].to_numpy(),
            "locked": [f"{names.get(s, s)} ({s})" if s else "" for s in frame["locked"]],
            "forbidden": frame["forbidden"].tolist(),
            "color": [colors.get(s, NO_ZONE_COLOR) for s in frame["proposed"]],
        })
        xs, ys = unit_shapes(st.inputs)
        idx = np.flatnonzero(locked | forbidden)
        self.marked.data = {
            "xs": [xs[i] for i in idx], "ys": [ys[i] for i in idx],
            "unit_id": frame["unit_id"].to_numpy()[idx].tolist(),
            "hatch": hatch[idx].tolist(), "line_width": np.where(locked[idx], 2.5, 1.0)}
        ref = self.state.reference_outcome
        if out is ref:
            changed = np.zeros(len(frame), bool)
        else:
            changed = (frame["proposed"].to_numpy() != st.units_frame(ref)["proposed"]
                       .to_numpy())
        idx = np.flatnonzero(changed)
        self.changed.data = {"xs": [xs[i] for i in idx], "ys": [ys[i] for i in idx]}
        self._refresh_sites(colors)
        self.figure.tags = [{"plan": out.name or "unsaved", "status": out.plan.status}]

    # ---------------------------------------------------------- selection
    def _on_select(self, attr, old, new) -> None:
        ids = self.units.data["unit_id"]
        chosen = [ids[i] for i in new]
        if chosen != self.state.selection:
            self.state.select(chosen)

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


# ---------------------------------------------------------------------- side panels
class SettingsPanel(pn.viewable.Viewer):
    """Level, plan year, the band, stability weight, longest trip, gap and time limit."""

    def __init__(self, state: SessionState, **params):
        super().__init__(**params)
        self.state = state

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
            "max_distance_km": pn.widgets.FloatInput.from_param(
                p.max_distance_km, name="Longest trip (km, 0 = no limit)", step=0.5),
            "gap_pct": pn.widgets.FloatInput.from_param(p.gap_pct, name="Gap to prove (%)",
                                                        step=0.01),
            "time_limit": pn.widgets.FloatInput.from_param(p.time_limit,
                                                           name="Time limit (s)", step=5),
        }
        for key, widget in w.items():
            widget.css_classes = [f"setting-{key.replace('_', '-')}"]
            widget.sizing_mode = "stretch_width"
        return pn.Card(*w.values(), title="Settings", collapsed=False, sizing_mode="stretch_width",
                       css_classes=["settings-card"])


class RunPanel(pn.viewable.Viewer):
    """Rerun, Cancel and the progress line."""

    def __init__(self, state: SessionState, **params):
        super().__init__(**params)
        self.state = state
        self.rerun = pn.widgets.Button(name="Rerun", button_type="primary",
                                       css_classes=["rerun-button"], sizing_mode="stretch_width")
        self.cancel = pn.widgets.Button(name="Cancel (keep best plan)", button_type="warning",
                                        disabled=True, css_classes=["cancel-button"],
                                        sizing_mode="stretch_width")
        self.rerun.on_click(lambda e: state.rerun())
        self.cancel.on_click(lambda e: state.cancel())
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

    def __init__(self, state: SessionState, **params):
        super().__init__(**params)
        self.state = state
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
            ("Lock to school", "lock-button", "success", state.lock_selection),
            ("Unlock", "unlock-button", "default", state.unlock_selection),
            ("Forbid school", "forbid-button", "danger", state.forbid_selection),
            ("Allow school", "allow-button", "default", state.allow_selection),
        ]
        self.buttons = []
        for label, css, kind, action in buttons:
            b = pn.widgets.Button(name=label, css_classes=[css], button_type=kind,
                                  sizing_mode="stretch_width")
            b.on_click(lambda e, act=action: act())
            self.buttons.append(b)
        self.clear = pn.widgets.Button(name="Clear selection", css_classes=["clear-selection"],
                                       sizing_mode="stretch_width")
        self.clear.on_click(lambda e: state.select([]))
        self.ids.param.watch(self._typed, "value")
        state.param.watch(self._update, ["selection", "plan_version", "edits_version"])
        state.param.watch(lambda e: setattr(self.site, "options", self._site_options()),
                          "level")
        self._update()

    def _site_options(self) -> dict:
        names = self.state.store.site_names()
        return {f"{names.get(s, s)} ({s})": s for s in self.state.store.site_ids}

    def _typed(self, event) -> None:
        ids = [u.strip() for u in event.new.replace(";", ",").split(",") if u.strip()]
        known = set(self.state.store.unit_ids)
        bad = [u for u in ids if u not in known]
        if bad:
            self.state.notify(f"Unknown unit id(s): {', '.join(bad[:8])}. Unit ids look like "
                              f"{self.state.store.unit_ids[0]}.", "warning")
        good = [u for u in ids if u in known]
        if good != self.state.selection:
            self.state.select(good)

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
        frame = self.state.store.units_frame().set_index("unit_id").loc[sel]
        schools = ", ".join(sorted(set(frame["proposed_name"])))
        locked = int((frame["locked"] != "").sum())
        self.info.object = (f"<div style='font-size:12px'>{len(sel)} unit(s), "
                            f"{frame['students'].sum():,.0f} students; now shown at: "
                            f"{_esc(schools)}{f'; {locked} locked' if locked else ''}</div>")

    def __panel__(self):
        return pn.Card(self.ids, self.info, self.site, pn.Row(*self.buttons[:2]),
                       pn.Row(*self.buttons[2:]), self.clear, title="Lock or forbid units",
                       sizing_mode="stretch_width", css_classes=["selection-card"])


class LocksTable(pn.viewable.Viewer):
    """Every lock and forbid in force, with a button to remove the chosen rows."""

    def __init__(self, state: SessionState, **params):
        super().__init__(**params)
        self.state = state
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
        rows = self.state.store.lock_rows()
        names = self.state.store.site_names()
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
            self.state.notify("Tick the rows to remove first.", "warning")
            return
        self.state.remove_rows(chosen)

    def __panel__(self):
        return pn.Column(self.table, pn.Row(self.remove, self.note), sizing_mode="stretch_width")


def _pct(v) -> float:
    return float(v) * 100.0 if v == v else float("nan")


class SitesTable(pn.viewable.Viewer):
    """Schools of the level: editable capacity, band and status; the plan's figures."""

    EDITABLE = {"capacity": "capacity", "max_pct": "max_util", "min_pct": "min_util",
                "status": "status"}

    def __init__(self, state: SessionState, **params):
        super().__init__(**params)
        self.state = state
        self.table = pn.widgets.Tabulator(
            pd.DataFrame(), name="sites-table", show_index=False, height=380,
            sizing_mode="stretch_width", css_classes=["sites-table"], pagination=None,
            selectable=False, layout="fit_data_fill")
        self.table.on_edit(self._edited)
        self.legend = pn.pane.HTML("")
        state.param.watch(self._update, ["plan_version", "edits_version", "level"])
        self._update()

    def frame(self) -> pd.DataFrame:
        st = self.state.store
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
        out["mean km"] = df["mean_km"]
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
        fmt["mean km"] = {"type": "money", "precision": 2}
        self.table.formatters = fmt
        self.table.titles = {"site_id": "id", "max_pct": "max %", "min_pct": "min %",
                             "today": "today (plan yr)"}
        self.table.value = df
        self.table.style.apply(self._style, axis=1)
        n = int((df["flag"] != "").sum())
        self.legend.object = (
            "<div style='font-size:12px'>Edit <b>capacity</b>, <b>max %</b>, <b>min %</b> "
            "and <b>status</b> in the table, then press Rerun. Red cells are outside the band "
            f"in that year ({n} school(s) flagged); <i>today</i> is the plan-year count under "
            "today's zones.</div>")

    def _style(self, row: pd.Series) -> list[str]:
        styles = []
        for col, v in row.items():
            bad = False
            if isinstance(col, str) and col.startswith("use ") and v == v and row["status"] in (
                    "open", "new", "candidate"):
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
                self.state.notify(f"{site}: type a percentage, e.g. 95", "danger")
                self._update()
                return
        if not self.state.edit_site(site, **{field: value}):
            self._update()

    def __panel__(self):
        return pn.Column(self.legend, self.table, sizing_mode="stretch_width")


class ResultsView(pn.viewable.Viewer):
    """Headline figures and the change view (units whose school differs)."""

    def __init__(self, state: SessionState, **params):
        super().__init__(**params)
        self.state = state
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
        state.param.watch(self._update, ["plan_version", "reference", "level",
                                         "edits_version"])
        self._update()

    def _update(self, *events) -> None:
        st = self.state.store
        out = st.on_screen()
        s = st.summary(out)
        ref = self.state.reference_outcome
        label = self.state.reference_label
        ch = st.changes_frame(out, ref)
        fl = st.flows_frame(out, ref)
        shown = "today's zones (no plan run yet: press Rerun)" if out.name == "Today's zones" \
            else _esc(s["option"])
        gap = f"{s['gap']:.2%}" if s["gap"] == s["gap"] else "n/a"
        moved_vs_ref = ch["students"].sum()
        self.summary.object = (
            f"<div class='summary' data-students-moved='{s['students_moved']:.0f}' "
            f"data-status='{_esc(s['status'])}'>"
            f"<b>On the map:</b> {shown} &middot; {_esc(s['level'])} &middot; plan year "
            f"{s['plan_year']} &middot; status <b>{_esc(s['status'])}</b> (gap {gap})<br>"
            f"<b>{s['students_moved']:,.0f}</b> students ({s['units_moved']:,} units) change "
            f"school compared with today &middot; mean trip <b>{s['mean_km']:.2f} km</b>"
            f" &middot; longest {s['max_km']:.2f} km &middot; schools outside the band: "
            f"<b>{s['schools_out_of_band']}</b><br>"
            f"Against {_esc(label)}: {len(ch):,} units, {moved_vs_ref:,.0f} students differ."
            "</div>")
        self.flows.value = fl.rename(columns={"from_name": "from", "to_name": "to"})
        self.changes.value = ch.drop(columns=["from_name", "to_name"]).round(
            {"km_before": 2, "km_after": 2})

    def __panel__(self):
        return pn.Column(self.summary, pn.Row(pn.pane.HTML("<b>Change view against:</b>"),
                                              self.ref),
                         pn.pane.HTML("<b>Students moving, by school pair</b>"), self.flows,
                         pn.pane.HTML("<b>Units whose school differs</b>"), self.changes,
                         sizing_mode="stretch_width")


class OptionsPanel(pn.viewable.Viewer):
    """Save the plan as a named option, show a saved one, compare several."""

    def __init__(self, state: SessionState, **params):
        super().__init__(**params)
        self.state = state
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
        self.show.on_click(lambda e: self.choice.value and state.open_option(self.choice.value))
        self.delete = pn.widgets.Button(name="Delete", button_type="danger",
                                        css_classes=["delete-option"])
        self.delete.on_click(lambda e: self.choice.value and state.delete_option(
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
        self.open_draft.on_click(lambda e: state.open_draft(self.draft_choice.value or ""))
        state.param.watch(self._update, ["options_version", "level", "plan_version"])
        state.param.watch(self._update_drafts, ["drafts_version"])
        self._update()
        self._update_drafts()

    def _update_drafts(self, *events) -> None:
        st = self.state.store
        self.draft_choice.options = {"main workbench record": "", **{d: d for d in st.drafts()}}
        self.draft_choice.value = st.draft if st.draft in self.draft_choice.options.values() \
            else ""

    def _save(self, event) -> None:
        if self.state.save_option(self.name_input.value, overwrite=self.overwrite.value):
            self.name_input.value = ""

    def _update(self, *events) -> None:
        infos = [o for o in self.state.store.list_options() if o.level == self.state.level]
        self.table.value = pd.DataFrame({
            "option": [o.name for o in infos],
            "plan year": [o.plan_year for o in infos],
            "status": [o.status for o in infos],
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
        st = self.state.store
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
                    self.state.notify(str(exc), "danger")
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


class DownloadsPanel(pn.viewable.Viewer):
    """Files of the plan on screen: GeoPackage, GeoJSON, Shapefile, CSVs, the PDF packet."""

    KINDS = (
        ("gpkg", "GeoPackage (zones, units, sites, changes)", "gpkg"),
        ("geojson", "GeoJSON zones (lon/lat)", "geojson"),
        ("shapefile", "Shapefile zones (.zip)", "zip"),
        ("units_csv", "CSV: unit -> school", "csv"),
        ("schools_csv", "CSV: per-school summary", "csv"),
        ("packet", "Hearing packet (PDF)", "pdf"),
    )

    def __init__(self, state: SessionState, **params):
        super().__init__(**params)
        self.state = state
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
        out = self.state.store.outcome
        base = "no-plan" if out is None else _file_label(
            f"{out.name or 'unsaved-result'}-{out.level}")
        for (kind, _label, ext), b in zip(self.KINDS, self.buttons, strict=True):
            suffix = {"units_csv": "-units", "schools_csv": "-schools",
                      "packet": "-packet"}.get(kind, "")
            b.filename = f"{base}{suffix}.{ext}"
            b.disabled = out is None
        self.note.object = (
            "<div style='font-size:12px'>Run a plan first (press Rerun).</div>" if out is None
            else f"<div style='font-size:12px'>Files of <b>{_esc(out.name or 'the unsaved result')}"
                 f"</b> ({_esc(out.level)}). Every file carries the draft notice: "
                 f"<i>{_esc(DRAFT_NOTICE)}</i></div>")

    def _make(self, kind: str):
        try:
            return str(self.state.store.export(kind))
        except Exception as exc:  # noqa: BLE001 - the page shows the reason, not a traceback
            self.state.notify(f"Could not write the {kind} file: {exc}", "danger")
            return None

    def __panel__(self):
        return pn.Column(self.note, *self.buttons, sizing_mode="stretch_width")


class MessageArea(pn.viewable.Viewer):
    """The one place messages appear: what happened, or what to change."""

    def __init__(self, state: SessionState, **params):
        super().__init__(**params)
        self.state = state
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


def _file_label(name: str) -> str:
    from districting.names import slug

    return slug(name)


class StoreProblem(pn.viewable.Viewer):
    """Why edits are not being written, and the ways out: reload the saved work or keep
    this page's edits as a new draft (another session saved meanwhile), or set a damaged
    store aside."""

    def __init__(self, state: SessionState, **params):
        super().__init__(**params)
        self.state = state
        self.alert = pn.pane.Alert("", alert_type="danger", css_classes=["store-problem"],
                                   sizing_mode="stretch_width", margin=(2, 5))
        self.reload = pn.widgets.Button(name="Reload the saved work", button_type="primary",
                                        css_classes=["reload-record"])
        self.reload.on_click(lambda e: state.reload_record())
        self.draft_name = pn.widgets.TextInput(name="Keep my edits as a draft named",
                                               placeholder="e.g. Anna - east side",
                                               css_classes=["draft-name"])
        self.keep = pn.widgets.Button(name="Keep my edits as this draft", button_type="success",
                                      css_classes=["keep-draft"])
        self.keep.on_click(self._keep)
        self.repair = pn.widgets.Button(name="Set the damaged store aside and start a new one",
                                        button_type="warning", css_classes=["repair-store"])
        self.repair.on_click(lambda e: state.repair_store())
        self.conflict_row = pn.Row(self.reload, self.draft_name, self.keep)
        self.box = pn.Column(self.alert, self.conflict_row, self.repair,
                             sizing_mode="stretch_width", css_classes=["store-problem-box"])
        state.param.watch(self._update, ["store_problem"])
        self._update()

    def _keep(self, event) -> None:
        if self.state.keep_as_draft(self.draft_name.value):
            self.draft_name.value = ""

    def _update(self, *events) -> None:
        st = self.state.store
        self.alert.object = text_block(self.state.store_problem)
        self.conflict_row.visible = st.conflict and not st.damaged
        self.repair.visible = bool(st.damaged)
        self.box.visible = bool(self.state.store_problem)

    def __panel__(self):
        return self.box
