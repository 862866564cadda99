"""Site symbols: one marker per site status, the same on paper and on screen.

:data:`SITE_SYMBOLS` maps a status (open, new, candidate, closing, closed) to a
:class:`SiteSymbol`: the matplotlib marker the packet draws, the Bokeh marker name the
workbench draws, whether it is filled, its size in points and the legend's words. Both
renderers draw the same shape: a circle, a star, a diamond, an x.
"""

from __future__ import annotations

from dataclasses import dataclass

__all__ = ["SiteSymbol", "SITE_SYMBOLS", "site_symbol"]


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
