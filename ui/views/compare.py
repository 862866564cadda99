"""The Compare maps tab: two plans side by side and a map of the units that differ.

Three maps share one set of unit shapes (one data source, three fill columns) and one pair
of ranges, so they pan and zoom together; every school has its one colour on all three
(:meth:`ui.mapdata.MapData.school_colors`). The difference map colours the units whose
school differs by their school in the second plan, and the rest grey.
"""

from __future__ import annotations

import numpy as np
import panel as pn
from bokeh.models import ColumnDataSource, HoverTool

from ..mapdata import MapData
from ..session import Session
from ..store import TODAY, StoreError
from ..text import esc as _esc
from ..text import status_text
from .layers import NO_ZONE_COLOR, draw_barriers, draw_sites, site_columns, zone_fill
from .mapframe import map_figure

SITE_SCALE = 1.6  # marker px per point: a little smaller on the three small maps

__all__ = ["CompareMaps", "difference_fill"]

TODAY_CHOICE, SCREEN_CHOICE = "today's zones", "the plan on screen"


def difference_fill(first: list[str], second: list[str], colors: dict[str, str]) -> list[str]:
    """Per unit: the second plan's school colour where the two plans differ, else grey."""
    a, b = np.asarray(first, dtype=object), np.asarray(second, dtype=object)
    fill = np.array(zone_fill(b, colors), dtype=object)
    fill[a == b] = NO_ZONE_COLOR
    return fill.tolist()


class CompareMaps(pn.viewable.Viewer):
    """Pick two plans; see both maps side by side and the units that differ."""

    def __init__(self, session: Session, **params):
        super().__init__(**params)
        self.session, st = session, session.store
        self.mapdata = mapdata = MapData.of(st.inputs)
        xs, ys = mapdata.units
        n = len(xs)
        grey = [NO_ZONE_COLOR] * n
        self.units = ColumnDataSource(name="compare-units", data={
            "xs": xs, "ys": ys, "unit_id": st.unit_ids, "fill_a": grey, "fill_b": grey,
            "fill_diff": grey, "school_a": [""] * n, "school_b": [""] * n})
        self.sites = ColumnDataSource(name="compare-sites",
                                      data=site_columns(st, {}, scale=SITE_SCALE))
        self.first = pn.widgets.Select(name="First plan", css_classes=["compare-first"])
        self.second = pn.widgets.Select(name="Second plan", css_classes=["compare-second"])
        self.summary = pn.pane.HTML("", css_classes=["compare-summary"],
                                    sizing_mode="stretch_width")
        self.figures = []
        self._quiet = False
        ranges = None
        for key, title in (("a", "first"), ("b", "second"), ("diff", "difference")):
            fig = map_figure(name=f"compare-map-{key}", css=f"compare-map-{key}", height=430,
                             ranges=ranges, tools="pan,wheel_zoom,reset",
                             active_scroll="wheel_zoom", toolbar_location="above",
                             title=title)
            ranges = ranges or (fig.x_range, fig.y_range)
            glyph = fig.multi_polygons("xs", "ys", source=self.units, fill_color=f"fill_{key}",
                                       fill_alpha=0.85, line_color="#ffffff", line_width=0.3)
            draw_barriers(fig, mapdata, legend=False)
            draw_sites(fig, self.sites, name=f"compare-sites-{key}")
            fig.add_tools(HoverTool(renderers=[glyph], tooltips=[
                ("Unit", "@unit_id"), ("First plan", "@school_a"),
                ("Second plan", "@school_b")]))
            self.figures.append(fig)
        self.panes = [pn.pane.Bokeh(f, sizing_mode="stretch_width", height=430)
                      for f in self.figures]
        self.first.param.watch(self._update, "value")
        self.second.param.watch(self._update, "value")
        session.state.param.watch(self._choices, ["options_version", "level", "plan_version",
                                                  "edits_version"])
        self._choices()

    def _choices(self, *events) -> None:
        names = self.session.store.option_names()
        options = {TODAY_CHOICE: TODAY_CHOICE, SCREEN_CHOICE: SCREEN_CHOICE,
                   **{n: n for n in names}}  # a Select shows its labels as text
        self._quiet = True  # one redraw for both choosers
        try:
            for widget, default in ((self.first, TODAY_CHOICE), (self.second, SCREEN_CHOICE)):
                keep = widget.value if widget.value in options.values() else default
                widget.options = options
                widget.value = keep
        finally:
            self._quiet = False
        self._update()

    def _outcome(self, choice: str):
        st = self.session.store
        if choice == TODAY_CHOICE:
            return st.today()
        if choice == SCREEN_CHOICE:
            return st.on_screen()
        return st.load_option(choice)

    def _update(self, *events) -> None:
        if self._quiet or not (self.first.value and self.second.value):
            return
        st = self.session.store
        try:
            a, b = self._outcome(self.first.value), self._outcome(self.second.value)
        except StoreError as exc:
            self.session.notify(str(exc), "danger")
            return
        colors = self.mapdata.school_colors(st.level)
        names = st.site_names()
        ids_a, ids_b = st.units_frame(a)["proposed"], st.units_frame(b)["proposed"]
        self.units.data.update({
            "fill_a": zone_fill(ids_a, colors), "fill_b": zone_fill(ids_b, colors),
            "fill_diff": difference_fill(ids_a, ids_b, colors),
            "school_a": [names.get(s, "none") for s in ids_a],
            "school_b": [names.get(s, "none") for s in ids_b]})
        self.sites.data = site_columns(st, colors, scale=SITE_SCALE)
        differ = ids_a.to_numpy() != ids_b.to_numpy()
        students = float(a.problem.demand[0][differ].sum())
        label_a, label_b = (self.first.value, self.second.value)
        for fig, label, out in ((self.figures[0], label_a, a), (self.figures[1], label_b, b)):
            words = "" if out.name == TODAY else f" ({status_text(out.plan)})"
            fig.title.text = f"{label}{words}"
        self.figures[2].title.text = (f"units whose school differs, coloured by their school "
                                      f"in {label_b}")
        self.summary.object = (
            f"<div style='font-size:13px' data-units-differ='{int(differ.sum())}'>"
            f"<b>{int(differ.sum()):,}</b> planning units ({students:,.0f} students in "
            f"{a.settings.plan_year}) go to a different school in <i>{_esc(label_b)}</i> "
            f"than in <i>{_esc(label_a)}</i>. The maps move together; each school has the "
            "same colour on all three.</div>")

    def __panel__(self):
        return pn.Column(pn.Row(self.first, self.second), self.summary,
                         pn.GridBox(*self.panes, ncols=2, sizing_mode="stretch_width"),
                         sizing_mode="stretch_width", css_classes=["compare-maps"])
