"""The printable map: a page of its own (``/print``) laid out for paper, and the Print tab
that opens it.

The page reads the project's saved workbench record (every edit in the workbench is saved
as it happens), so it shows the plan on screen of that record's level, or a saved option
(``/print?option=NAME``). On it: the title, the plan's name, level, year and status in
words, the map at true shape with today's boundaries, barriers and schools, a scale bar
and a north arrow, a legend of every colour and symbol, and the decision-support notice.
The browser's own Print (the button on the page, or Ctrl+P) prints it; the button and the
hint are left off the paper.
"""

from __future__ import annotations

from urllib.parse import quote

import panel as pn
from bokeh.models import ColumnDataSource, LabelSet

from districting import DRAFT_NOTICE
from districting.outputs.symbols import (
    BARRIER_SYMBOLS,
    BRIDGE_SYMBOL,
    STREET_LINE,
    TODAY_LINE,
    site_symbol,
)

from ..mapdata import MapData
from ..session import Session
from ..store import TODAY, Store, StoreError
from ..text import esc as _esc
from ..text import status_text, when_text
from .layers import (
    draw_barriers,
    draw_sites,
    draw_streets,
    draw_today,
    line_style,
    site_columns,
    zone_fill,
)
from .mapframe import map_figure

__all__ = ["print_page", "PrintLink", "print_url"]

MAP_WIDTH, MAP_HEIGHT = 760, 620  # the largest map frame in px (fits A4 / Letter landscape)
MARKER_SIGNS = {"circle": "&#9711;", "star": "&#9733;", "x": "&#10005;", "square": "&#9632;",
                "diamond": "&#9671;"}  # Bokeh marker -> the nearest character, for the legend
SITE_SCALE = 12 / 7  # marker px per point on the printed page
NO_PRINT = "<style>@media print { .no-print { display: none !important; } }</style>"


def print_url(level: str, draft: str = "", option: str = "") -> str:
    """The address of the printable map, relative to the workbench page."""
    parts = [f"level={quote(level)}"]
    if draft:
        parts.append(f"draft={quote(draft)}")
    if option:
        parts.append(f"option={quote(option)}")
    return "./print?" + "&".join(parts)


def _arg(args: dict, key: str) -> str:
    values = args.get(key) or [b""]
    value = values[0]
    return value.decode("utf-8", "replace") if isinstance(value, bytes) else str(value)


def _frame_size(bounds) -> tuple[int, int]:
    """Frame width and height in px with the town's own proportions."""
    dx, dy = bounds[2] - bounds[0], bounds[3] - bounds[1]
    scale = min(MAP_WIDTH / dx, MAP_HEIGHT / dy)
    return int(dx * scale), int(dy * scale)


def _line_sign(sym) -> str:
    """A legend swatch of a line symbol: its base line, with its top line centred on it."""
    base = line_style(sym)
    styles = [base, line_style(sym, top=True)] if sym.top_colour else [base]
    inner = "".join(
        f"<span style='position:absolute;left:0;width:26px;"
        f"top:{5 + (base['line_width'] - st['line_width']) / 2:.1f}px;"
        f"border-top:{st['line_width']:.1f}px {'dashed' if st.get('line_dash') else 'solid'} "
        f"{st['line_color']}'></span>" for st in styles)
    return (f"<span style='display:inline-block;position:relative;width:26px;height:12px;"
            f"margin-right:6px;vertical-align:middle'>{inner}</span>")


def _legend(store: Store, out, colors: dict[str, str]) -> str:
    names = store.site_names()
    used = sorted(set(out.site_id_of(out.assignment).tolist()) - {""})
    rows = "".join(
        f"<div><span style='display:inline-block;width:14px;height:14px;margin-right:6px;"
        f"vertical-align:middle;border:1px solid #555;background:{colors.get(s, '#fff')}'>"
        f"</span>{_esc(names.get(s, s))} ({_esc(s)})</div>" for s in used)
    mapdata = MapData.of(store.inputs)
    lines = [TODAY_LINE, *(BARRIER_SYMBOLS[k] for k in mapdata.barriers)]
    if mapdata.streets is not None:
        lines.append(STREET_LINE)
    rows += "".join(f"<div>{_line_sign(sym)}{_esc(sym.words)}</div>" for sym in lines)
    if mapdata.bridges[0]:
        rows += (f"<div><span style='display:inline-block;width:26px'>"
                 f"{MARKER_SIGNS[BRIDGE_SYMBOL.bokeh]}</span>{_esc(BRIDGE_SYMBOL.words)}</div>")
    statuses = sorted(set(store.sites_frame(resolved_settings=store.effective)["status"]))
    symbols = dict.fromkeys(site_symbol(s) for s in statuses)  # closing and closed share one
    rows += "".join(f"<div><span style='display:inline-block;width:26px'>"
                    f"{MARKER_SIGNS.get(sym.bokeh, '')}</span>{_esc(sym.words)}</div>"
                    for sym in symbols)
    return (f"<div class='print-legend' style='font-size:12px;line-height:1.6'>"
            f"<b>Attendance zones</b> (each school's colour){rows}</div>")


def print_page(project, args: dict | None = None):
    """The print-ready page of a project's saved workbench record (or a saved option)."""
    from ..projects import load_inputs

    args = pn.state.session_args if args is None else args
    inputs = load_inputs(project)
    store = Store(inputs, draft=_arg(args, "draft"))
    level = _arg(args, "level")
    if level in store.runs:
        store.level = level  # this page only reads: nothing is saved
    option = _arg(args, "option")
    try:
        out = store.load_option(option) if option else store.on_screen()
    except StoreError as exc:
        return pn.pane.Alert(_esc(str(exc)), alert_type="danger", css_classes=["print-error"])
    store.level = out.level
    mapdata = MapData.of(inputs)
    colors = mapdata.school_colors(out.level)
    width, height = _frame_size(mapdata.bounds)
    border = 8  # no axes and no toolbar: the frame is the figure less this border
    fig = map_figure(name="print-map", css="print-map", height=None, width=width + 2 * border,
                     height_px=height + 2 * border, min_border=border, toolbar_location=None,
                     tools="")
    xs, ys = mapdata.units
    fig.multi_polygons("xs", "ys", source=ColumnDataSource({
        "xs": xs, "ys": ys, "fill": zone_fill(out.site_id_of(out.assignment), colors)}),
        fill_color="fill", fill_alpha=0.85, line_color="#ffffff", line_width=0.3)
    draw_streets(fig, mapdata, legend=False)
    txs, tys = mapdata.today(out.level)
    draw_today(fig, ColumnDataSource({"xs": txs, "ys": tys}), legend=False)
    draw_barriers(fig, mapdata, legend=False)
    sites = ColumnDataSource(site_columns(store, colors, scale=SITE_SCALE))
    draw_sites(fig, sites)
    fig.add_layout(LabelSet(x="x", y="y", text="label", source=sites, x_offset=7, y_offset=5,
                            text_font_size="10px", background_fill_color="#ffffff",
                            background_fill_alpha=0.75))
    fig.outline_line_color = "#333333"
    title = out.name if out.name and out.name != TODAY else (
        "Today's zones" if out.name == TODAY else "Plan on screen (not saved as an option)")
    status = "" if out.name == TODAY else f" &middot; {_esc(status_text(out.plan))}"
    made = when_text(out.created)
    head = pn.pane.HTML(
        f"{NO_PRINT}<div class='no-print' style='font-size:12px;color:#333;margin-bottom:6px'>"
        "This page is laid out for paper: use the button or your browser's Print (Ctrl+P); "
        "landscape fits best. <button onclick='window.print()' class='print-button'>Print "
        "this map</button></div>"
        f"<div class='print-title' style='font-size:20px;font-weight:600'>"
        f"{_esc(inputs.settings.name)}</div>"
        f"<div style='font-size:14px'>{_esc(title)} &middot; {_esc(out.level)} schools "
        f"&middot; plan year {out.settings.plan_year}{status}</div>",
        sizing_mode="stretch_width")
    foot = pn.pane.HTML(
        f"<div class='print-notice' style='font-size:12px;color:#8a1c1c'>{_esc(DRAFT_NOTICE)}"
        f"</div><div style='font-size:11px;color:#555'>"
        f"{'Plan made ' + made + '. ' if made else ''}Projected CRS of the project; "
        "north is up.</div>", sizing_mode="stretch_width")
    legend = pn.pane.HTML(_legend(store, out, colors), width=260)
    return pn.Column(head, pn.Row(pn.pane.Bokeh(fig, width=fig.width, height=fig.height),
                                  legend), foot,
                     css_classes=["print-page"], margin=(10, 20))


class PrintLink(pn.viewable.Viewer):
    """The Print tab: links that open the printable map of the plan or a saved option."""

    def __init__(self, session: Session, **params):
        super().__init__(**params)
        self.session = session
        self.links = pn.pane.HTML("", css_classes=["print-links"], sizing_mode="stretch_width")
        session.state.param.watch(self._update, ["level", "options_version", "drafts_version"])
        self._update()

    def _update(self, *events) -> None:
        st = self.session.store
        screen = print_url(st.level, st.draft)
        saved = "".join(f"<li><a href='{_esc(print_url(st.level, st.draft, n))}' "
                        f"target='_blank'>{_esc(n)}</a></li>" for n in st.option_names())
        self.links.object = (
            "<div style='font-size:13px'>A page laid out for paper opens in a new tab: the "
            "map with its title, legend, scale bar, north arrow and the decision-support "
            "notice. Print it from there.<ul>"
            f"<li><a class='print-screen' href='{_esc(screen)}' target='_blank'>The plan on "
            f"screen ({_esc(st.level)})</a></li>{saved}</ul></div>")

    def __panel__(self):
        return self.links
