"""The packet's map drawing: zones in their school colours, reference layers, symbols,
labels that fit, scale bar, north arrow and the legend.

Every map of the packet is drawn with :func:`draw_zone_map`, so the same school has the
same colour (:func:`districting.outputs.store.stored_school_colours`), the same site symbol
(:data:`~districting.outputs.symbols.SITE_SYMBOLS`) and the same barrier styles on every
page. Labels: each zone's name is placed at the centre of the largest circle inside it
(``shapely.maximum_inscribed_circle``); a name that would leave its zone or cover another
label is replaced by a number, and the numbers are keyed under the map.
"""

from __future__ import annotations

import matplotlib.patheffects as pe
import numpy as np
import shapely
from matplotlib.figure import Figure
from matplotlib.legend_handler import HandlerTuple
from matplotlib.lines import Line2D
from matplotlib.patches import Patch, Rectangle
from matplotlib.transforms import Bbox

from .. import rules
from ..study import Outcome
from .packet_rows import short_name
from .reference import barrier_kinds, streets
from .symbols import (
    BARRIER_SYMBOLS,
    BRIDGE_SYMBOL,
    SITE_SYMBOLS,
    STREET_LINE,
    TODAY_LINE,
    LineSymbol,
)

__all__ = ["HALO", "extent_of", "map_axes", "draw_zone_map", "legend", "LOCK_HATCH",
           "CHANGE_HATCH", "hatch", "scale_bar", "north_arrow", "site_status"]

HALO = [pe.withStroke(linewidth=2.6, foreground="white")]
CHANGE_HATCH = "////"
LOCK_HATCH = "xxx"
LABEL_FONT = 6.8


# ---------------------------------------------------------------------------- furniture
def _nice_length(span: float) -> float:
    """A round scale-bar length (1, 2 or 5 x 10^k map units) near a quarter of ``span``."""
    target = span / 4
    base = 10 ** np.floor(np.log10(target))
    return float(max(s * base for s in (1, 2, 5) if s * base <= target))


def scale_bar(ax, extent) -> None:
    """A two-part black and white bar with km labels, in the lower left of the map."""
    x0, y0, x1, y1 = extent
    width, height = x1 - x0, y1 - y0
    length = _nice_length(width)
    bar_h = height * 0.014
    x, y = x0 + width * 0.04, y0 + height * 0.035
    for k in range(2):
        ax.add_patch(Rectangle((x + k * length / 2, y), length / 2, bar_h,
                               facecolor="black" if k == 0 else "white",
                               edgecolor="black", linewidth=0.8, zorder=20))
    for frac in (0.0, 0.5, 1.0):
        label = f"{frac * length / 1000:g}" + (" km" if frac == 1.0 else "")
        ax.text(x + frac * length, y + bar_h * 1.6, label, ha="center", va="bottom",
                fontsize=7, zorder=21, path_effects=HALO)


def north_arrow(ax, extent) -> None:
    """An arrow pointing up: the projected grid's north (maps are drawn north up)."""
    x0, y0, x1, y1 = extent
    x, y = x0 + (x1 - x0) * 0.955, y0 + (y1 - y0) * 0.84
    ax.annotate("", xy=(x, y + (y1 - y0) * 0.09), xytext=(x, y),
                arrowprops={"facecolor": "black", "edgecolor": "white", "linewidth": 0.8,
                            "width": 3, "headwidth": 10, "headlength": 10}, zorder=22)
    ax.text(x, y + (y1 - y0) * 0.10, "N", ha="center", va="bottom", fontsize=10,
            weight="bold", zorder=22, path_effects=HALO)


def extent_of(outcome: Outcome) -> tuple[float, float, float, float]:
    x0, y0, x1, y1 = outcome.inputs.units.total_bounds
    pad = 0.03 * max(x1 - x0, y1 - y0)
    return x0 - pad, y0 - pad, x1 + pad, y1 + pad


def map_axes(fig: Figure, extent, left: float, bottom: float, width: float, height: float):
    """Axes of the map's aspect (equal scale on both axes), as large as fits the box,
    top-centred in it."""
    fw, fh = fig.get_size_inches()
    x0, y0, x1, y1 = extent
    ratio = (y1 - y0) / (x1 - x0)
    w_in = min(width * fw, height * fh / ratio)
    h_in = w_in * ratio
    ax = fig.add_axes([left + (width * fw - w_in) / 2 / fw, bottom + height - h_in / fh,
                       w_in / fw, h_in / fh])
    ax.set_xlim(x0, x1)
    ax.set_ylim(y0, y1)
    ax.set_aspect("equal")
    ax.set_xticks([])
    ax.set_yticks([])
    for spine in ax.spines.values():
        spine.set_linewidth(0.6)
        spine.set_color("#555555")
    return ax


def hatch(ax, areas, pattern: str = CHANGE_HATCH, outline: float = 1.3) -> None:
    """Hatch ``areas`` in black lines with a white halo, visible on dark and light fills."""
    for colour, lw in (("white", 2.2), ("black", 0.8)):
        areas.plot(ax=ax, facecolor="none", edgecolor=colour, hatch=pattern, linewidth=0,
                   zorder=3)
        ax.collections[-1].set_hatch_linewidth(lw)
    areas.boundary.plot(ax=ax, color="black", linewidth=outline, zorder=3.5)


# ---------------------------------------------------------------------------- layers
def _line(ax, geoms, sym: LineSymbol, zorder: float) -> None:
    geoms.plot(ax=ax, color=sym.colour, linewidth=sym.width, zorder=zorder,
               linestyle=(0, (1, 1.6)) if sym.top_dash and not sym.top_colour else "-")
    if sym.top_colour:
        geoms.plot(ax=ax, color=sym.top_colour, linewidth=sym.top_width, zorder=zorder + 0.01,
                   linestyle=sym.top_dash or "-")


class _Overlay(tuple):
    """Legend handles drawn on top of each other (a cased road), not side by side."""


def _line_handle(sym: LineSymbol):
    base = Line2D([], [], color=sym.colour, linewidth=sym.width,
                  linestyle=(0, (1, 1.6)) if sym.top_dash and not sym.top_colour else "-")
    if not sym.top_colour:
        return base
    return _Overlay((base, Line2D([], [], color=sym.top_colour, linewidth=sym.top_width,
                                  linestyle=sym.top_dash or "-")))


def site_status(outcome: Outcome, when: str) -> np.ndarray:
    """Each site's symbol key ``when`` is 'today' or 'plan' ('' = not drawn)."""
    status = outcome.sites["status"].astype(str).to_numpy()
    if when == "plan":
        over = outcome.settings.status
        status = np.array([over.get(s, st) for s, st in zip(outcome.site_ids, status,
                                                            strict=True)])
        status = np.where(rules.is_closed(status), "closed", status)
        return np.where(rules.is_candidate(status) & outcome.plan.open_sites, "open", status)
    # today: new and candidate sites are not in use yet; closing ones still are
    return np.where(rules.open_today(status), "open",
                    np.where(rules.is_closed(status), status, ""))


def _draw_sites(ax, outcome: Outcome, when: str) -> set[str]:
    status = site_status(outcome, when)
    xy = shapely.get_coordinates(outcome.sites.geometry.to_numpy())
    for key, sym in SITE_SYMBOLS.items():
        sel = status == key
        if sel.any():
            ax.plot(xy[sel, 0], xy[sel, 1], linestyle="none", **_marker_style(sym), zorder=10)
    return set(status[status != ""].tolist())


def _marker_style(sym, scale: float = 1.0) -> dict:
    line_only = sym.mpl in ("x", "+", "|", "_")
    return {"marker": sym.mpl, "markersize": sym.size * scale,
            "markerfacecolor": "black" if sym.filled else "white",
            "markeredgecolor": "black", "markeredgewidth": 2.0 if line_only else 1.1}


def _fits(text, renderer, to_data, geom, taken) -> bool:
    """Whether ``text`` lies inside ``geom`` and clear of every box in ``taken``."""
    box = text.get_window_extent(renderer).expanded(1.04, 1.1)
    (bx0, by0), (bx1, by1) = to_data.transform([[box.x0, box.y0], [box.x1, box.y1]])
    if not shapely.contains(geom, shapely.box(bx0, by0, bx1, by1)):
        return False
    return not any(box.overlaps(other) for other in taken)


def _place(text, centre, step, renderer, to_data, geom, taken) -> bool:
    """Put ``text`` at the centre, or a step or two above, below or beside it, where it
    fits."""
    dx, dy = step
    for sx, sy in ((0, 0), (0, 1), (0, -1), (1, 0), (-1, 0), (0, 2), (0, -2), (1, 1),
                   (-1, 1), (1, -1), (-1, -1)):
        text.set_position((centre.x + sx * dx, centre.y + sy * dy))
        if _fits(text, renderer, to_data, geom, taken):
            return True
    return False


def _labels(ax, zones, names: dict[str, str], key: list[str], markers: np.ndarray) -> None:
    """Zone names inside their zones, clear of each other and of the site markers (at the
    centre of the zone's largest inscribed circle, or a step away from it); a number,
    keyed in ``key``, where the name does not fit."""
    fig = ax.figure
    renderer = fig.canvas.get_renderer()
    to_data = ax.transData.inverted()
    half = 5 * fig.dpi / 72  # a site marker's half width in pixels, with a margin
    taken = [Bbox.from_extents(px - half, py - half, px + half, py + half)
             for px, py in ax.transData.transform(markers)] if len(markers) else []
    geoms = zones.geometry.to_numpy()
    x0, x1 = ax.get_xlim()
    for k in np.argsort(-shapely.area(geoms)):  # the largest zones choose first
        geom, sid = geoms[k], zones["site_id"].iloc[k]
        if geom is None or geom.is_empty:
            continue
        centre = shapely.get_point(shapely.maximum_inscribed_circle(geom, (x1 - x0) / 400), 0)
        text = ax.text(centre.x, centre.y, short_name(names.get(sid, sid)), ha="center",
                       va="center", fontsize=LABEL_FONT, zorder=11, path_effects=HALO)
        box = text.get_window_extent(renderer)
        (ax0, ay0), (ax1, ay1) = to_data.transform([[0, 0], [box.width * 0.6,
                                                              box.height * 1.3]])
        step = (ax1 - ax0, ay1 - ay0)
        if not _place(text, centre, step, renderer, to_data, geom, taken):
            key.append(f"{len(key) + 1} {names.get(sid, sid)}")
            text.set_text(str(len(key)))
            text.set_weight("bold")
            if not _place(text, centre, step, renderer, to_data, geom, taken):
                text.set_position((centre.x, centre.y))  # a number at the centre at least
        taken.append(text.get_window_extent(renderer).expanded(1.04, 1.1))


# ---------------------------------------------------------------------------- one map
def draw_zone_map(ax, outcome: Outcome, zones, colours: dict[str, str], *, when: str = "plan",
                  today_lines=None, outline_words: str = "", grey=None,
                  label: bool = True) -> dict:
    """Zones filled in their school colours, with the reference layers and symbols.

    ``today_lines``: today's zones (or another plan's, named by ``outline_words``) to draw
    as dotted boundaries on top; ``grey``: a
    GeoDataFrame of areas drawn under the zones in grey (a difference map draws only the
    changed units in colour). Returns what the legend needs: ``sites`` (statuses drawn),
    ``barriers`` (kinds drawn), ``bridges``, ``streets``, ``locks``, ``today`` and the
    label ``key``.
    """
    inputs = outcome.inputs
    drawn: dict = {"key": []}
    if grey is not None:
        grey.plot(ax=ax, color="#e6e6e6", edgecolor="#cfcfcf", linewidth=0.3, zorder=1)
    zones.plot(ax=ax, color=[colours.get(s, "#d9d9d9") for s in zones["site_id"]],
               edgecolor="#1f1f1f", linewidth=1.0, zorder=2)
    lines = streets(inputs)
    drawn["streets"] = lines is not None
    if lines is not None:
        _line(ax, lines, STREET_LINE, 2.5)
        zones.boundary.plot(ax=ax, color="#1f1f1f", linewidth=1.0, zorder=2.6)
    locked = _locked_units(outcome)
    drawn["locks"] = locked is not None
    if locked is not None:
        hatch(ax, locked, LOCK_HATCH, outline=1.6)
    if today_lines is not None:
        _line(ax, today_lines.boundary, TODAY_LINE, 4.5)
    drawn["today"] = (outline_words or TODAY_LINE.words) if today_lines is not None else ""
    kinds = barrier_kinds(inputs)
    for kind, sym in BARRIER_SYMBOLS.items():
        sel = kinds == kind
        if sel.any():
            _line(ax, inputs.barriers[sel], sym, 5)
    drawn["barriers"] = set(kinds.tolist())
    bridges = inputs.bridges
    drawn["bridges"] = bool(len(bridges))
    if len(bridges):
        pts = shapely.get_coordinates(shapely.centroid(bridges.to_numpy()))
        ax.plot(pts[:, 0], pts[:, 1], linestyle="none", zorder=6,
                **_marker_style(BRIDGE_SYMBOL))
    drawn["sites"] = _draw_sites(ax, outcome, when)
    if label:
        names = dict(zip(outcome.site_ids, outcome.sites["name"].astype(str), strict=True))
        status = site_status(outcome, when)
        xy = shapely.get_coordinates(outcome.sites.geometry.to_numpy())[status != ""]
        _labels(ax, zones, names, drawn["key"], xy)
    extent = (*ax.get_xlim(), *ax.get_ylim())
    extent = (extent[0], extent[2], extent[1], extent[3])
    scale_bar(ax, extent)
    north_arrow(ax, extent)
    ax.set_xlabel("")  # geopandas names the axes after the CRS; the scale bar says it all
    ax.set_ylabel("")
    return drawn


def _locked_units(outcome: Outcome):
    locks = outcome.settings.locks
    if not locks:
        return None
    units = outcome.inputs.units
    sel = units["unit_id"].astype(str).isin(list(locks)).to_numpy()
    if not sel.any():
        return None
    return units.loc[sel, ["geometry"]].dissolve()


def key_text(ax, key: list[str]) -> None:
    """The numbered names of a map, under it."""
    if key:
        ax.text(0.0, -0.012, "  ".join(key), transform=ax.transAxes, fontsize=6.8,
                va="top", ha="left", wrap=True)


# ---------------------------------------------------------------------------- legend
def legend(fig: Figure, drawn: list[dict], colours: dict[str, str], y: float,
           extra: list | None = None, x: float = 0.5, ncol: int = 3) -> None:
    """One legend for the maps of a page: every symbol drawn, none blank."""
    seen_sites = set().union(*(d["sites"] for d in drawn))
    kinds = set().union(*(d["barriers"] for d in drawn))
    handles, labels = [], []
    swatch = tuple(Patch(facecolor=c, edgecolor="#2a2a2a", linewidth=0.8)
                   for c in list(dict.fromkeys(colours.values()))[:4])
    if swatch:
        handles.append(swatch)
        labels.append("Attendance zone, in its school's colour")
    for key, sym in SITE_SYMBOLS.items():
        if key in seen_sites:
            handles.append(Line2D([], [], linestyle="none", **_marker_style(sym, 0.9)))
            labels.append(sym.words)
    for handle, label in extra or []:
        handles.append(handle)
        labels.append(label)
    if any(d["locks"] for d in drawn):
        handles.append(Patch(facecolor="white", edgecolor="black", hatch=LOCK_HATCH,
                             linewidth=1.6))
        labels.append("Planning units the board has decided (locked)")
    for words in dict.fromkeys(d["today"] for d in drawn if d["today"]):
        handles.append(_line_handle(TODAY_LINE))
        labels.append(words)
    for kind, sym in BARRIER_SYMBOLS.items():
        if kind in kinds:
            handles.append(_line_handle(sym))
            labels.append(sym.words)
    if any(d["bridges"] for d in drawn):
        handles.append(Line2D([], [], linestyle="none", **_marker_style(BRIDGE_SYMBOL)))
        labels.append(BRIDGE_SYMBOL.words)
    if any(d["streets"] for d in drawn):
        handles.append(_line_handle(STREET_LINE))
        labels.append(STREET_LINE.words)
    fig.legend(handles=handles, labels=labels, loc="upper center", bbox_to_anchor=(x, y),
               ncol=ncol, fontsize=8, frameon=False, handlelength=3.2, handleheight=1.4,
               handler_map={tuple: HandlerTuple(ndivide=None, pad=0.1),
                            _Overlay: HandlerTuple(ndivide=1)})
