"""Site symbols: one marker per site status, the same on paper and on screen.

:data:`SITE_SYMBOLS` maps a status (open, new, candidate, closing, closed) to a
:class:`SiteSymbol`: the matplotlib marker the packet draws, the Bokeh marker name the
workbench draws, whether it is filled, its size in points and the legend's words. Both
renderers draw the same shape: a circle, a star, a diamond, an x.

:data:`BARRIER_SYMBOLS` (per barrier kind), :data:`BRIDGE_SYMBOL`, :data:`TODAY_LINE` and
:data:`STREET_LINE` are the map's other symbols, so every legend tells them apart.
"""

from __future__ import annotations

from dataclasses import dataclass

__all__ = ["SiteSymbol", "SITE_SYMBOLS", "site_symbol", "LineSymbol", "BARRIER_SYMBOLS",
           "BRIDGE_SYMBOL", "TODAY_LINE", "STREET_LINE"]


@dataclass(frozen=True)
class SiteSymbol:
    mpl: str  # matplotlib marker
    bokeh: str  # Bokeh marker name (bokeh.core.enums.MarkerType)
    filled: bool  # black fill (else white with a black edge)
    size: float  # points (matplotlib markersize; Bokeh size is in screen pixels)
    words: str  # legend text


SITE_SYMBOLS: dict[str, SiteSymbol] = {
    "open": SiteSymbol("o", "circle", False, 7, "School"),
    "new": SiteSymbol("*", "star", True, 12, "New school (opens in the plan year)"),
    "candidate": SiteSymbol("D", "diamond", False, 7, "Candidate site (not opened)"),
    "closing": SiteSymbol("x", "x", True, 8, "School closing"),
    "closed": SiteSymbol("x", "x", True, 8, "School closed in the plan"),
}


def site_symbol(status: str) -> SiteSymbol:
    """The symbol of a site status (an unknown status is drawn as a school)."""
    return SITE_SYMBOLS.get(str(status).strip().lower(), SITE_SYMBOLS["open"])


@dataclass(frozen=True)
class LineSymbol:
    """A line drawn as a wide base with an optional narrower line on top (a cased road,
    a railway's white dashes): base colour and width in points, top colour, width, dash."""

    colour: str
    width: float
    words: str
    top_colour: str = ""
    top_width: float = 0.0
    top_dash: tuple | None = None  # matplotlib dash pattern (offset, (on, off, ...))


#: Barrier kinds (the barrier layer's ``kind`` column), each drawn its own way; a barrier
#: of another or no kind is drawn as "barrier". Bridges and overpasses are a marker.
BARRIER_SYMBOLS: dict[str, LineSymbol] = {
    "river": LineSymbol("#3b7fc4", 2.8, "River"),
    "highway": LineSymbol("#5b3413", 3.0, "Highway", "#f2d98c", 1.1),
    "rail": LineSymbol("#111111", 2.6, "Rail line", "#ffffff", 1.3, (0, (3, 3))),
    "barrier": LineSymbol("#444444", 1.8, "Other barrier", "#ffffff", 0.8, (0, (1, 2))),
}
BRIDGE_SYMBOL = SiteSymbol("s", "square", True, 4.5, "Bridge or overpass (joins both sides)")
#: Today's zone boundaries drawn over an option's zones: a thin dotted black line.
TODAY_LINE = LineSymbol("#000000", 1.1, "Today's zone boundaries", top_dash=(0, (1, 1.6)))
#: Streets, a reference layer under everything else.
STREET_LINE = LineSymbol("#a9a9a9", 0.45, "Streets")
