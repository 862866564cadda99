"""Map layers every workbench map draws alike: streets, today's boundaries, barriers by
kind and school sites, in the symbols of :mod:`districting.outputs.symbols` (the packet's).

The zone map (:mod:`ui.views.map`), the compare maps (:mod:`ui.views.compare`) and the
printable map (:mod:`ui.views.printmap`) call these, so a river or a new school looks the
same on each.
"""

from __future__ import annotations

import shapely
from bokeh.models import ColumnDataSource

from districting.outputs.symbols import (
    BARRIER_SYMBOLS,
    BRIDGE_SYMBOL,
    STREET_LINE,
    TODAY_LINE,
    LineSymbol,
    site_symbol,
)

from ..mapdata import MapData

__all__ = ["NO_ZONE_COLOR", "PX_PER_PT", "MARKER_PX_PER_PT", "line_style", "draw_line",
           "draw_barriers", "draw_bridges", "draw_streets", "draw_today", "site_columns",
           "draw_sites", "zone_fill"]

NO_ZONE_COLOR = "#d9d9d9"
#: Screen pixels per point of the paper symbols (CSS: 96 px and 72 pt to the inch).
PX_PER_PT = 96 / 72
#: Markers are drawn larger on screen than on paper: they are clicked and hovered.
MARKER_PX_PER_PT = 2.0


def line_style(sym: LineSymbol, top: bool = False) -> dict:
    """Bokeh line properties of a paper line symbol's base or top line: widths in points
    become pixels, and a matplotlib dash (offset, (on, off...)), whose lengths count in
    line widths, becomes Bokeh's dash in pixels."""
    colour, width = (sym.top_colour, sym.top_width) if top else (sym.colour, sym.width)
    dash = sym.top_dash if top or not sym.top_colour else None
    px = width * PX_PER_PT
    style = {"line_color": colour, "line_width": px}
    if dash:
        style["line_dash"] = [max(1, round(v * px)) for v in dash[1]]
    return style


def draw_line(fig, source: ColumnDataSource, sym: LineSymbol, *, name: str,
              legend: bool = True) -> list:
    """A line symbol: its base line and, for a cased or dashed symbol, its top line (one
    legend entry for both when ``legend``)."""
    extra = {"legend_label": sym.words} if legend else {}
    glyphs = [fig.multi_line("xs", "ys", source=source, name=name, **line_style(sym),
                             **extra)]
    if sym.top_colour:
        glyphs.append(fig.multi_line("xs", "ys", source=source, name=f"{name}-top",
                                     **line_style(sym, top=True), **extra))
    return glyphs


def draw_barriers(fig, mapdata: MapData, *, legend: bool = True) -> None:
    """The barrier lines, one styled layer per kind, and the bridges over them (in the
    legend when ``legend``)."""
    for kind, (xs, ys) in mapdata.barriers.items():
        draw_line(fig, ColumnDataSource({"xs": xs, "ys": ys}), BARRIER_SYMBOLS[kind],
                  name=f"barrier-{kind}", legend=legend)
    draw_bridges(fig, mapdata, legend=legend)


def draw_bridges(fig, mapdata: MapData, *, legend: bool = True,
                 scale: float = MARKER_PX_PER_PT):
    """The bridges and overpasses, one marker each (none when the project has none)."""
    xs, ys = mapdata.bridges
    if not xs:
        return None
    extra = {"legend_label": BRIDGE_SYMBOL.words} if legend else {}
    return fig.scatter(xs, ys, marker=BRIDGE_SYMBOL.bokeh, size=BRIDGE_SYMBOL.size * scale,
                       fill_color="#000000" if BRIDGE_SYMBOL.filled else "#ffffff",
                       line_color="#000000", name="bridges", **extra)


def draw_streets(fig, mapdata: MapData, *, legend: bool = True) -> list:
    """The project's streets, a faint reference layer (none when it has no streets)."""
    if mapdata.streets is None:
        return []
    xs, ys = mapdata.streets
    return draw_line(fig, ColumnDataSource({"xs": xs, "ys": ys}), STREET_LINE,
                     name="streets", legend=legend)


def draw_today(fig, source: ColumnDataSource, *, legend: bool = True):
    """Today's zone boundaries over an option's zones."""
    return draw_line(fig, source, TODAY_LINE, name="today", legend=legend)[0]


def site_columns(store, colors: dict[str, str], scale: float = MARKER_PX_PER_PT) -> dict:
    """Columns of the level's school markers: place, name, status, the marker and size of
    its status (:data:`districting.outputs.symbols.SITE_SYMBOLS`, ``scale`` px per point),
    and the school's colour as fill."""
    sites = store.inputs.sites
    sites = sites.loc[sites["level"] == store.level]
    frame = store.sites_frame(resolved_settings=store.effective)
    xy = shapely.get_coordinates(sites.geometry.to_numpy())
    status = frame["status"].tolist()
    ids = frame["site_id"].tolist()
    return {
        "x": xy[:, 0], "y": xy[:, 1], "site_id": ids, "name": frame["name"].tolist(),
        "status": status, "capacity": frame["capacity"].to_numpy(),
        "marker": [site_symbol(s).bokeh for s in status],
        "size": [site_symbol(s).size * scale for s in status],
        "line_width": [2.5 if site_symbol(s).bokeh == "x" else 1.5 for s in status],
        "fill": [colors.get(s, "#ffffff") for s in ids],
        "label": [f"{n} ({s})" if s != "open" else n
                  for n, s in zip(frame["name"], status, strict=True)],
    }


def draw_sites(fig, source: ColumnDataSource, *, name: str = "sites"):
    """The school markers (shape and size by status, as on paper; fill = the school's
    zone colour)."""
    return fig.scatter("x", "y", source=source, marker="marker", size="size",
                       fill_color="fill", line_color="#000000", line_width="line_width",
                       name=name)


def zone_fill(site_ids, colors: dict[str, str]) -> list[str]:
    """The fill of each unit from its school's id ('' or unknown: no zone, grey)."""
    return [colors.get(s, NO_ZONE_COLOR) for s in site_ids]
