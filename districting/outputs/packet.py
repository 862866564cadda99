"""The hearing packet: a PDF (and a PNG per page) that shows options to the public.

Drawn with matplotlib only. For each option:

1. today's zones and the proposed zones side by side on the same extent, school markers and
   names, a scale bar and a north arrow drawn here, a legend, the units whose school
   changes hatched, and the draft notice (:data:`districting.DRAFT_NOTICE`) at the top;
2. the per-school table (:func:`districting.outputs.tables.school_table`): capacity, students now
   and in each projected year with utilization, a marker and a shaded bold cell where a
   school is above or below its band, students moved in and out, mean and longest travel;
3. where students move: the from -> to pairs with students, and a map of the changed areas
   numbered as in the table.

With several options a first page compares their totals. Zones are filled with
:data:`~districting.outputs.colours.ZONE_PALETTE` by
:func:`~districting.outputs.colours.zone_colours`, coloured once for both maps of an
option so a school keeps its colour and no two zones that touch in either map share one.
Tables longer than a page continue on the next page.
"""

from __future__ import annotations

import os
import textwrap
from collections.abc import Sequence
from pathlib import Path

import matplotlib

matplotlib.use("Agg")  # files only; never a window

import matplotlib.patheffects as pe  # noqa: E402
import numpy as np  # noqa: E402
from matplotlib.backends.backend_pdf import PdfPages  # noqa: E402
from matplotlib.figure import Figure  # noqa: E402
from matplotlib.lines import Line2D  # noqa: E402
from matplotlib.patches import Patch, Rectangle  # noqa: E402

from .. import DRAFT_NOTICE, rules  # noqa: E402
from ..io import atomic_path  # noqa: E402
from ..study import Outcome, now_iso  # noqa: E402
from .colours import ZONE_PALETTE, zone_colours  # noqa: E402
from .packet_rows import (  # noqa: E402
    OVER,
    UNDER,
    int_text,
    pair_rows,
    school_rows,
    short_name,
    status_text,
    summary_rows,
)
from .tables import plan_years, require_plan, zones_frame  # noqa: E402

__all__ = ["write_packet", "packet_figures", "PAPER", "PNG_DPI"]

#: Landscape page sizes in inches.
PAPER = {"letter": (11.0, 8.5), "a4": (11.69, 8.27)}
PNG_DPI = 110
TABLE_FONT = 7.8  # points; a table row is twice the font size high
FLAG_SHADE = "#cfcfcf"
HEAD_SHADE = "#3b3b3b"
STRIPE = "#f3f3f3"
_STATUS_MARK = {"open": ("o", 7), "new": ("*", 12), "candidate": ("D", 6),
                "closing": ("X", 8), "closed": ("X", 8)}


# ---------------------------------------------------------------------------- page furniture
def _page(paper: str) -> Figure:
    if paper not in PAPER:
        raise ValueError(f"paper {paper!r} is not one of {', '.join(PAPER)}")
    fig = Figure(figsize=PAPER[paper])
    fig.patch.set_facecolor("white")
    return fig


def _frame(fig: Figure, title: str, subtitle: str, footer: str, page: int,
           full_notice: bool) -> float:
    """Title, notice and footer; returns the top of the free area (figure fraction)."""
    fig.text(0.03, 0.962, title, fontsize=15, weight="bold", va="top")
    fig.text(0.03, 0.918, subtitle, fontsize=9.5, va="top", color="#333333")
    if full_notice:
        text = "\n".join(textwrap.wrap(DRAFT_NOTICE, 120))
        fig.text(0.5, 0.872, text, ha="center", va="top", fontsize=9.5, weight="bold",
                 linespacing=1.4, bbox={"boxstyle": "round,pad=0.5", "facecolor": "#ececec",
                                        "edgecolor": "#222222", "linewidth": 1.2})
        top = 0.79
    else:
        fig.text(0.97, 0.962, "DRAFT FOR DISCUSSION", ha="right", va="top", fontsize=10,
                 weight="bold", bbox={"boxstyle": "square,pad=0.3", "facecolor": "#ececec",
                                      "edgecolor": "#222222"})
        top = 0.88
    fig.text(0.03, 0.018, footer, fontsize=7, color="#444444")
    fig.text(0.97, 0.018, f"page {page}", fontsize=7, color="#444444", ha="right")
    return top


def _footer(outcome: Outcome | None, stamp: str) -> str:
    short = DRAFT_NOTICE.split(" - ")[0]
    who = "" if outcome is None else f"{outcome.inputs.settings.name}  |  "
    return f"{who}{short}: decisions rest with the Board of Education.  Printed {stamp}"


def _title(outcome: Outcome, what: str) -> str:
    return f"{outcome.name or 'Unsaved option'}: {what}"


HALO = [pe.withStroke(linewidth=2.6, foreground="white")]


def _nice_length(span: float) -> float:
    """A round scale-bar length (1, 2 or 5 x 10^k map units) near a quarter of ``span``."""
    target = span / 4
    base = 10 ** np.floor(np.log10(target))
    return float(max(s * base for s in (1, 2, 5) if s * base <= target))


def _scale_bar(ax, extent) -> None:
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


def _north_arrow(ax, extent) -> None:
    """An arrow pointing up: the projected grid's north (maps are drawn north up)."""
    x0, y0, x1, y1 = extent
    x, y = x0 + (x1 - x0) * 0.955, y0 + (y1 - y0) * 0.84
    ax.annotate("", xy=(x, y + (y1 - y0) * 0.09), xytext=(x, y),
                arrowprops={"facecolor": "black", "edgecolor": "white", "linewidth": 0.8,
                            "width": 3, "headwidth": 10, "headlength": 10}, zorder=22)
    ax.text(x, y + (y1 - y0) * 0.10, "N", ha="center", va="bottom", fontsize=10,
            weight="bold", zorder=22, path_effects=HALO)


# ---------------------------------------------------------------------------- maps
def _extent(outcome: Outcome) -> tuple[float, float, float, float]:
    x0, y0, x1, y1 = outcome.inputs.units.total_bounds
    pad = 0.03 * max(x1 - x0, y1 - y0)
    return x0 - pad, y0 - pad, x1 + pad, y1 + pad


def _map_axes(fig: Figure, extent, left: float, bottom: float, width: float, height: float):
    """Axes of the map's aspect, as large as fits the box, top-centred in it."""
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


def _finish_map(ax) -> None:
    ax.set_xlabel("")  # geopandas labels the axes with the CRS; the scale bar says it all
    ax.set_ylabel("")


def _hatch(ax, areas, **kw) -> None:
    """Hatch ``areas`` in black lines with a white halo, visible on dark and light fills."""
    for colour, lw in (("white", 2.2), ("black", 0.8)):
        areas.plot(ax=ax, facecolor="none", edgecolor=colour, hatch="////", linewidth=0,
                   zorder=3, **kw)
        ax.collections[-1].set_hatch_linewidth(lw)
    areas.boundary.plot(ax=ax, color="black", linewidth=1.3, zorder=3.5)


def _draw_schools(ax, outcome: Outcome, when: str) -> set[str]:
    """Markers and names of the sites in use ``when`` ('today' or 'plan')."""
    sites = outcome.sites
    status = sites["status"].astype(str).to_numpy()
    if when == "plan":
        over = outcome.settings.status
        status = np.array([over.get(s, st) for s, st in zip(outcome.site_ids, status,
                                                            strict=True)])
        status = np.where(rules.is_closed(status), "closed", status)
        status = np.where(rules.is_candidate(status) & outcome.plan.open_sites, "open", status)
    else:  # today: new and candidate sites are not in use yet; closing ones still are
        status = np.where(rules.open_today(status), "open",
                          np.where(rules.is_closed(status), status, ""))
    xy = np.column_stack([sites.geometry.x, sites.geometry.y])
    drawn = set()
    for st, (marker, size) in _STATUS_MARK.items():
        sel = status == st
        if not sel.any():
            continue
        drawn.add(st)
        ax.plot(xy[sel, 0], xy[sel, 1], linestyle="none", marker=marker, markersize=size,
                markerfacecolor="white" if st in ("open", "candidate") else "black",
                markeredgecolor="black", markeredgewidth=1.2, zorder=10)
    for (x, y), name, st in zip(xy, sites["name"].astype(str), status, strict=True):
        if st:
            ax.annotate(short_name(name), (x, y), xytext=(5, 4), textcoords="offset points",
                        fontsize=6.8, zorder=11, path_effects=HALO)
    return drawn


_STATUS_WORDS = {"open": "School", "new": "New school (opens in the plan year)",
                 "candidate": "Candidate site (not opened)", "closed": "School closed in the plan",
                 "closing": "School closing"}


def _legend_handles(statuses: set[str], hatch_label: str | None, barriers: bool) -> list:
    handles = [Line2D([], [], linestyle="none", marker=_STATUS_MARK[s][0],
                      markersize=_STATUS_MARK[s][1] * 0.9,
                      markerfacecolor="white" if s in ("open", "candidate") else "black",
                      markeredgecolor="black", label=_STATUS_WORDS[s])
               for s in _STATUS_MARK if s in statuses]
    if hatch_label:
        handles.append(Patch(facecolor="#bdbdbd", edgecolor="black", hatch="////",
                             label=hatch_label))
    if barriers:
        handles.append(Line2D([], [], color="#1c1c1c", linewidth=1.6,
                              linestyle=(0, (6, 2, 1, 2)), label="River, highway or rail"))
    handles.append(Patch(facecolor=ZONE_PALETTE[0], edgecolor="#2a2a2a", linewidth=1.2,
                         label="Attendance zone (touching zones differ in shade)"))
    return handles


def _base_map(ax, zones, colours, barriers) -> None:
    zones.plot(ax=ax, color=[colours[s] for s in zones["site_id"]], edgecolor="#1f1f1f",
               linewidth=1.0, zorder=2)
    if barriers is not None and len(barriers):
        barriers.plot(ax=ax, color="#1c1c1c", linewidth=1.6, linestyle=(0, (6, 2, 1, 2)),
                      zorder=4)


def _drawing(outcome: Outcome) -> dict:
    """What the pages of one option draw, computed once."""
    today = zones_frame(outcome, current=True)
    proposed = zones_frame(outcome)
    header, rows, areas = pair_rows(outcome)
    return {"today": today, "proposed": proposed, "areas": areas, "pairs": (header, rows),
            "colours": zone_colours(outcome.inputs.adjacency, outcome.site_ids,
                                    (outcome.current, outcome.assignment), spread=True),
            "extent": _extent(outcome)}


def _map_page(outcome: Outcome, d: dict, paper: str, stamp: str, page: int) -> Figure:
    fig = _page(paper)
    s = outcome.inputs.settings
    top = _frame(fig, _title(outcome, f"{outcome.level} attendance zones"),
                 f"{s.name}.  Today's zones ({s.current_year}) beside the proposed zones "
                 f"(from {outcome.settings.plan_year}); {status_text(outcome)}.",
                 _footer(outcome, stamp), page, full_notice=True)
    extent, areas = d["extent"], d["areas"]
    barriers = outcome.inputs.barriers
    statuses: set[str] = set()
    for k, (zones, label, when) in enumerate([
        (d["today"], f"Today ({s.current_year})", "today"),
        (d["proposed"], f"Proposed (from {outcome.settings.plan_year})", "plan"),
    ]):
        ax = _map_axes(fig, extent, 0.03 + k * 0.48, 0.15, 0.46, top - 0.04 - 0.15)
        _base_map(ax, zones, d["colours"], barriers)
        if len(areas):
            _hatch(ax, areas)
        statuses |= _draw_schools(ax, outcome, when)
        _scale_bar(ax, extent)
        _north_arrow(ax, extent)
        _finish_map(ax)
        ax.set_title(label, fontsize=11, weight="bold", loc="left")
        map_bottom = ax.get_position().y0
    m = outcome.metrics
    hatch = (f"Planning units whose school changes ({int_text(m.students_moved)} students, "
             f"{m.units_moved} units)") if len(areas) else None
    fig.legend(handles=_legend_handles(statuses, hatch, bool(len(barriers))),
               loc="upper center", bbox_to_anchor=(0.5, map_bottom - 0.015), ncol=3, fontsize=8,
               frameon=False, handlelength=2.2, handleheight=1.4)
    return fig


# ---------------------------------------------------------------------------- tables
def _draw_table(ax, header, rows, widths, flags=None, font=8.0, total=False, align=None):
    """A plain ruled table in axes coordinates, top down; returns the bottom (axes y).

    Header cells are dark with white bold text (two lines allowed). Flagged cells are
    shaded grey with bold text; the last row is bold when ``total``.
    """
    ax.set_axis_off()
    widths = np.asarray(widths, float) / np.sum(widths)
    lefts = np.concatenate([[0.0], np.cumsum(widths)[:-1]])
    fig_h = ax.figure.get_size_inches()[1] * ax.get_position().height  # inches
    row_h = (font * 2.0 / 72) / fig_h
    head_h = row_h * (1.0 + 0.6 * max(h.count("\n") for h in header))
    align = align or ["left"] + ["center"] * (len(header) - 1)

    def cell(x, y, w, h, text, face, colour="black", weight="normal", ha="center"):
        ax.add_patch(Rectangle((x, y - h), w, h, facecolor=face, edgecolor="#9a9a9a",
                               linewidth=0.5, transform=ax.transAxes, clip_on=False))
        tx = {"left": x + 0.006, "center": x + w / 2, "right": x + w - 0.006}[ha]
        ax.text(tx, y - h / 2, text, ha=ha, va="center", fontsize=font, color=colour,
                weight=weight, transform=ax.transAxes, clip_on=False)

    y = 1.0
    for x, w, text, ha in zip(lefts, widths, header, align, strict=True):
        cell(x, y, w, head_h, text, HEAD_SHADE, "white", "bold", "center" if ha != "left"
             else "left")
    y -= head_h
    for r, row in enumerate(rows):
        last = total and r == len(rows) - 1
        for c, (x, w, text, ha) in enumerate(zip(lefts, widths, row, align, strict=True)):
            flag = flags[r][c] if flags else ""
            face = FLAG_SHADE if flag else ("#e2e2e2" if last else
                                            (STRIPE if r % 2 else "white"))
            cell(x, y, w, row_h, text, face, weight="bold" if (flag or last) else "normal",
                 ha=ha)
        y -= row_h
    return y


def _rows_that_fit(fig: Figure, height: float, font: float, reserve_in: float) -> int:
    """Table rows (plus a two-line header) that fit ``height`` (figure fraction)."""
    row_in = font * 2.0 / 72
    free = height * fig.get_size_inches()[1] - reserve_in - 1.6 * row_in
    return max(3, int(free // row_in))


def _chunks(n: int, size: int) -> list[tuple[int, int]]:
    return [(k, min(k + size, n)) for k in range(0, max(n, 1), size)]


def _more(k: int, n: int) -> str:
    return f" (page {k + 1} of {n})" if n > 1 else ""


def _table_pages(outcome: Outcome, paper: str, stamp: str, page: int) -> list[Figure]:
    header, rows, flags = school_rows(outcome)
    years = plan_years(outcome)
    p = outcome.problem
    head = ["School", "Status", "Capacity", "Band", *[h.replace(" ", "\n") for h in header[4:]]]
    head[-4:] = ["Moved\nin", "Moved\nout", "Mean\nkm", "Max\nkm"]
    widths = [0.16, 0.055, 0.06, 0.06, 0.055, *[0.095] * len(years), 0.05, 0.05, 0.045, 0.045]
    pages = []
    fit = _rows_that_fit(_page(paper), 0.88 - 0.05, TABLE_FONT, reserve_in=0.9)
    chunks = _chunks(len(rows), fit)
    for k, (a, b) in enumerate(chunks):
        fig = _page(paper)
        top = _frame(fig, _title(outcome, f"schools{_more(k, len(chunks))}"),
                     f"{outcome.inputs.settings.name}, {outcome.level}.  Students by year in "
                     "the proposed zones, with utilization (students / capacity).",
                     _footer(outcome, stamp), page + k, full_notice=False)
        ax = fig.add_axes([0.03, 0.05, 0.94, top - 0.05])
        bottom = _draw_table(ax, head, rows[a:b], widths, flags[a:b], font=TABLE_FONT,
                             total=b == len(rows))
        band = (f"{100 * np.nanmin(p.min_util):.0f}-{100 * np.nanmax(p.max_util):.0f}%"
                if p.n_sites else "")
        note = (f"{OVER} with a shaded, bold cell: above the school's utilization band in "
                f"that year;  {UNDER} shaded, bold: below it.  Band: the share of capacity "
                f"allowed (this option: {band}).  'Now' counts today's zones in "
                f"{outcome.inputs.settings.current_year}.  Moved in / out and distances are "
                f"for {outcome.settings.plan_year} students; {outcome.distance_note}.")
        ax.text(0.0, bottom - 0.03, "\n".join(textwrap.wrap(note, 170)), fontsize=7.8,
                va="top", transform=ax.transAxes)
        pages.append(fig)
    return pages


def _moves_pages(outcome: Outcome, d: dict, paper: str, stamp: str, page: int) -> list[Figure]:
    header, rows = d["pairs"]
    areas, extent = d["areas"], d["extent"]
    pages = []
    fit = _rows_that_fit(_page(paper), 0.88 - 0.05, TABLE_FONT, reserve_in=0.1)
    chunks = _chunks(len(rows), fit)
    m = outcome.metrics
    for k, (a, b) in enumerate(chunks):
        fig = _page(paper)
        top = _frame(fig, _title(outcome, f"where students move{_more(k, len(chunks))}"),
                     f"{outcome.inputs.settings.name}, {outcome.level}.  "
                     f"{int_text(m.students_moved)} students in {m.units_moved} planning units "
                     f"change school in {outcome.settings.plan_year}.",
                     _footer(outcome, stamp), page + k, full_notice=False)
        tax = fig.add_axes([0.03, 0.05, 0.40, top - 0.05])
        if rows:
            _draw_table(tax, header, rows[a:b], [0.06, 0.34, 0.34, 0.11, 0.15], font=TABLE_FONT,
                        total=b == len(rows), align=["center", "left", "left", "center",
                                                     "center"])
        else:
            tax.set_axis_off()
            tax.text(0.0, 0.97, "No planning unit changes school in this option.",
                     fontsize=11, va="top")
        ax = _map_axes(fig, extent, 0.46, 0.06, 0.52, top - 0.10)
        outcome.inputs.units.plot(ax=ax, color="#f2f2f2", edgecolor="#c8c8c8",
                                  linewidth=0.25, zorder=1)
        if len(areas):
            areas.plot(ax=ax, color=[d["colours"][s] for s in areas["to_site"]], zorder=2)
            _hatch(ax, areas)
            for j, pt in enumerate(areas.geometry.representative_point()):
                ax.text(pt.x, pt.y, str(j + 1), ha="center", va="center", fontsize=8,
                        weight="bold", zorder=12,
                        path_effects=[pe.withStroke(linewidth=3, foreground="white")])
        d["proposed"].boundary.plot(ax=ax, color="#1f1f1f", linewidth=1.0, zorder=4)
        _draw_schools(ax, outcome, "plan")
        _scale_bar(ax, extent)
        _north_arrow(ax, extent)
        _finish_map(ax)
        ax.set_title("Changed areas, in the colour of the new zone (numbers as in the "
                     "table); lines: proposed zones", fontsize=8.5, loc="left")
        pages.append(fig)
    return pages


def _summary_page(outcomes: Sequence[Outcome], pages: list[str], paper: str,
                  stamp: str) -> Figure:
    fig = _page(paper)
    names = sorted({o.inputs.settings.name for o in outcomes})
    top = _frame(fig, "Options compared", f"{'; '.join(names)}.  {len(outcomes)} options; "
                 "each is shown on the pages listed.", _footer(None, stamp), 1,
                 full_notice=True)
    header, rows = summary_rows(outcomes, pages)
    head = [h.replace("Students moved", "Students\nmoved").replace("Units moved", "Units\nmoved")
            .replace("Schools out of band", "Schools out\nof band").replace("Plan year",
                                                                            "Plan\nyear")
            for h in header]
    flags = [["over" if c == 7 and r[7] != "0" else "" for c in range(len(r))] for r in rows]
    ax = fig.add_axes([0.03, 0.05, 0.94, top - 0.05])
    bottom = _draw_table(ax, head, rows, [0.24, 0.08, 0.05, 0.08, 0.06, 0.06, 0.06, 0.09,
                                          0.17, 0.07], flags=flags, font=9)
    note = ("Students moved: plan-year students whose school changes from today's zones.  "
            "Mean and Max km: student-weighted mean and longest travel.  Schools out of band "
            "(shaded when any): open schools above or below their utilization band in some "
            "projected year.  Status: optimal = proven best for the stated rules within the "
            "gap; the gap bounds how far from the best a plan can be.")
    ax.text(0.0, bottom - 0.03, "\n".join(textwrap.wrap(note, 160)), fontsize=8.5, va="top",
            transform=ax.transAxes)
    return fig


# ---------------------------------------------------------------------------- the packet
def packet_figures(outcomes: Sequence[Outcome], paper: str = "letter",
                   stamp: str | None = None) -> list[Figure]:
    """Every page of the packet, in order, as matplotlib figures."""
    outcomes = list(outcomes)
    if not outcomes:
        raise ValueError("a packet needs at least one option")
    for o in outcomes:
        require_plan(o, "hearing packet")
    stamp = stamp or now_iso()[:10]
    first = 2 if len(outcomes) > 1 else 1
    pages: list[Figure] = []
    where = []
    for o in outcomes:
        d = _drawing(o)
        start = first + len(pages)
        pages.append(_map_page(o, d, paper, stamp, start))
        pages += _table_pages(o, paper, stamp, first + len(pages))
        pages += _moves_pages(o, d, paper, stamp, first + len(pages))
        where.append(f"{start}-{first + len(pages) - 1}")
    if len(outcomes) > 1:
        pages.insert(0, _summary_page(outcomes, where, paper, stamp))
    return pages


def write_packet(outcomes: Sequence[Outcome], path_pdf: str | os.PathLike,
                 png_folder: str | os.PathLike | None = None, paper: str = "letter"
                 ) -> list[Path]:
    """Write the packet PDF, and ``<stem>_p01.png``... at :data:`PNG_DPI` into
    ``png_folder`` when given; returns the PDF path followed by the PNG paths.

    ``paper`` is "letter" (US Letter) or "a4", landscape either way.
    """
    path_pdf = Path(path_pdf)
    pages = packet_figures(outcomes, paper)
    title = "; ".join(o.name or "(unsaved)" for o in outcomes)
    meta = {"Title": f"Hearing packet: {title}", "Subject": DRAFT_NOTICE,
            "Creator": "districting"}
    with atomic_path(path_pdf) as tmp, PdfPages(tmp, metadata=meta) as pdf:
        for fig in pages:
            pdf.savefig(fig)
    written = [path_pdf]
    if png_folder is not None:
        folder = Path(png_folder)
        for k, fig in enumerate(pages, start=1):
            target = folder / f"{path_pdf.stem}_p{k:02d}.png"
            with atomic_path(target) as tmp:
                fig.savefig(tmp, dpi=PNG_DPI, format="png")
            written.append(target)
    return written
