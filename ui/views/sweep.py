"""The Sweep tab: the level's latest trade-off chart, from the table `districting sweep`
wrote (out/ beside the project). A click on a point opens that saved option."""

from __future__ import annotations

import numpy as np
import pandas as pd
import panel as pn
from bokeh.models import ColorBar, ColumnDataSource, HoverTool, LabelSet, TapTool
from bokeh.palettes import Viridis256
from bokeh.plotting import figure
from bokeh.transform import linear_cmap

from districting.sweep.table import (
    FRONTIER,
    MEAN_KM,
    MOVED,
    OPTION,
    SETTINGS,
    SPREAD,
    default_folder,
    read_table,
)

from ..session import Session
from ..text import esc as _esc

__all__ = ["SweepChart", "sweep_source"]


def sweep_source(table: pd.DataFrame) -> dict[str, list]:
    """The chart's columns from a sweep table: options with a plan only."""
    rows = table.dropna(subset=[MOVED, MEAN_KM])
    spread = rows[SPREAD].astype(float).fillna(0.0)
    return {"option": rows[OPTION].astype(str).tolist(),
            # drawn as canvas text and escaped tooltips by Bokeh: never read as HTML
            "label": rows[SETTINGS].astype(str).tolist(),
            "moved": rows[MOVED].astype(float).tolist(),
            "km": rows[MEAN_KM].astype(float).tolist(),
            "spread": spread.tolist(),
            "front": (rows[FRONTIER] == "yes").tolist()}


class SweepChart(pn.viewable.Viewer):
    """Students moved against mean travel, one point per saved option of the sweep."""

    def __init__(self, session: Session, **params):
        super().__init__(**params)
        self.session = session
        self.state = session.state
        self.folder = default_folder(session.store.inputs)
        self.note = pn.pane.HTML("", css_classes=["sweep-note"], sizing_mode="stretch_width")
        self.source = ColumnDataSource({k: [] for k in ("option", "label", "moved", "km",
                                                        "spread", "front")},
                                       name="sweep-source")
        self.front = ColumnDataSource({"moved": [], "km": []})
        self.source.selected.on_change("indices", self._picked)
        self.plot = pn.pane.Bokeh(self._figure(), sizing_mode="stretch_width",
                                  css_classes=["sweep-chart"])
        self.state.param.watch(self._update, ["level", "options_version"])
        self._update()

    def _figure(self):
        fig = figure(height=420, sizing_mode="stretch_width", tools="tap,pan,wheel_zoom,reset",
                     x_axis_label="Students moved from today's school (plan year)",
                     y_axis_label="Mean travel (km)", name="sweep-figure")
        fig.x_range.range_padding = 0.35  # room on the right for the labels
        fig.y_range.range_padding = 0.15
        fig.line("moved", "km", source=self.front, color="#444444", line_width=1.5,
                 legend_label="frontier: no option moves fewer students with shorter travel")
        colours = linear_cmap("spread", Viridis256, 0, 1)
        self.colours = colours
        dots = fig.scatter("moved", "km", source=self.source, size=12, color=colours,
                           line_color="#111111", nonselection_alpha=0.5)
        fig.add_layout(LabelSet(x="moved", y="km", text="label", source=self.source,
                                x_offset=6, y_offset=4, text_font_size="8pt"))
        fig.add_layout(ColorBar(color_mapper=colours["transform"], width=10,
                                title="Utilization spread (points)"), "right")
        fig.add_tools(HoverTool(renderers=[dots], tooltips=[
            ("option", "@option"), ("students moved", "@moved{0,0}"), ("mean km", "@km{0.00}"),
            ("spread", "@spread{0.0} points")]))
        fig.select_one(TapTool).renderers = [dots]
        fig.legend.location = "top_right"
        fig.legend.label_text_font_size = "8pt"
        return fig

    def _update(self, *events) -> None:
        level = self.state.level
        table = read_table(self.folder, level)
        if table is None or not len(table):
            self.note.object = (f"No sweep of the {_esc(level)} level yet. Run <code>districting "
                                f"sweep PROJECT --level {_esc(level)} --stability-weight "
                                "0,1500,3000</code>; its chart then shows here, and a click "
                                "on a point opens that option.")
            data = sweep_source(pd.DataFrame({c: [] for c in (OPTION, SETTINGS, MOVED, MEAN_KM,
                                                              SPREAD, FRONTIER)}))
        else:
            data = sweep_source(table)
            self.note.object = (f"The latest sweep of the {_esc(level)} level: "
                                f"{len(data['option'])} options with a plan. Click a point "
                                "to open that option on the map.")
        self.source.selected.indices = []
        self.source.data = data
        front = np.asarray(data["front"], bool)
        order = np.argsort(np.asarray(data["moved"])[front]) if len(front) else []
        self.front.data = {"moved": np.asarray(data["moved"])[front][order].tolist(),
                           "km": np.asarray(data["km"])[front][order].tolist()}
        spread = data["spread"]
        mapper = self.colours["transform"]
        mapper.low, mapper.high = (min(spread), max(max(spread), min(spread) + 1)) if spread \
            else (0, 1)

    def _picked(self, _attr, _old, new) -> None:
        if new:
            self.session.open_option(self.source.data["option"][new[0]])

    def __panel__(self):
        return pn.Column(self.note, self.plot, sizing_mode="stretch_width")
