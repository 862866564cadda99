"""The workbench's map symbols (ui/views/layers.py) are the packet's
(districting.outputs.symbols): a site's marker by its status, today's boundaries, the
barrier kinds and the streets, drawn from the one table of symbols."""

from __future__ import annotations

import dataclasses

import geopandas as gpd
import shapely
from ui_town import CELL, CRS, new_store

from districting.outputs.symbols import BRIDGE_SYMBOL, SITE_SYMBOLS, STREET_LINE, TODAY_LINE
from ui.session import Session
from ui.views.layers import PX_PER_PT, line_style, site_columns
from ui.views.map import MapView


def test_a_candidate_site_is_a_diamond_on_screen_as_on_paper(inputs):
    st = new_store(inputs)
    st.edit_site("M4", status="candidate")
    st.edit_site("M3", status="new")
    cols = site_columns(st, {})
    marker = dict(zip(cols["site_id"], cols["marker"], strict=True))
    # the packet draws these with matplotlib markers "D" (diamond), "*" (star), "o" (circle)
    assert marker["M4"] == "diamond" and marker["M3"] == "star" and marker["M1"] == "circle"
    size = dict(zip(cols["site_id"], cols["size"], strict=True))
    assert size["M3"] / size["M1"] == SITE_SYMBOLS["new"].size / SITE_SYMBOLS["open"].size


def test_line_style_turns_points_into_pixels():
    # 1.1 pt at 96 px / 72 pt to the inch is 1.47 px; a dash of 1 and 1.6 line widths
    style = line_style(TODAY_LINE)
    assert abs(style["line_width"] - 1.1 * 96 / 72) < 1e-9
    assert style["line_dash"] == [1, 2] and style["line_color"] == TODAY_LINE.colour
    assert PX_PER_PT == 96 / 72


def test_streets_and_bridges_are_drawn_with_their_legend_entries(inputs):
    x0, y0 = 400_000.0, 5_000_000.0
    streets = gpd.GeoSeries([shapely.LineString([(x0, y0 + CELL / 2),
                                                 (x0 + CELL * 14, y0 + CELL / 2)])], crs=CRS)
    bridge = gpd.GeoSeries([shapely.LineString([(x0 + 100, y0 + 300), (x0 + 140, y0 + 300)])],
                           crs=CRS)
    # as intake reads [streets]: the lines themselves, kept for maps
    with_streets = dataclasses.replace(inputs, street_lines=streets.to_numpy(), bridges=bridge)
    view = MapView(Session(new_store(with_streets)))
    lines = [r for r in view.figure.renderers if r.name == "streets"]
    assert len(lines) == 1
    assert lines[0].glyph.line_color == STREET_LINE.colour
    assert lines[0].data_source.data["xs"] == [[x0, x0 + CELL * 14]]
    labels = {item.label["value"] for item in view.figure.legend[0].items}
    assert STREET_LINE.words in labels and TODAY_LINE.words in labels
    bridges = [r for r in view.figure.renderers if r.name == "bridges"]
    assert list(bridges[0].data_source.data["x"]) == [x0 + 120]  # the line's centre
    assert bridges[0].glyph.marker == BRIDGE_SYMBOL.bokeh and BRIDGE_SYMBOL.words in labels
    plain = MapView(Session(new_store(inputs)))  # no streets: no layer, no legend entry
    assert not [r for r in plain.figure.renderers if r.name == "streets"]
    assert STREET_LINE.words not in {i.label["value"] for i in plain.figure.legend[0].items}

