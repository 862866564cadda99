"""The hearing packet: a PDF (and a PNG per page) that shows options to the public.

Drawn with matplotlib only (:mod:`.packet_layout` the pages and tables,
:mod:`.packet_maps` the maps, :mod:`.packet_compare` the pages that set two plans side by
side). With several options, first a page comparing their totals, then for the first option
of each level against each other one: both maps side by side and a map of the planning
units whose school differs. Then for each option:

1. today's zones and the proposed zones side by side on the same extent (today's
   boundaries dotted over the proposal), school symbols, zone names that fit inside their
   zones (numbers keyed under the map where they do not), barriers by kind, bridges,
   streets when the project has them, locked units cross-hatched, changed units hatched,
   a scale bar, a north arrow, a legend, and the draft notice
   (:data:`districting.DRAFT_NOTICE`) at the top;
2. the per-school table (:func:`districting.outputs.tables.school_table`): capacity,
   students today and in each projected year with utilization, a marker and a shaded bold
   cell where a school is above or below its band, students moving in and out, mean and
   longest travel;
3. where students move: the from -> to pairs with students, and a map of the changed
   areas numbered as in the table;
4. the feeder pattern (:mod:`.packet_feeders`), when a neighbouring level has zones.

Every school has its stored colour
(:func:`districting.outputs.store.stored_school_colours`) on every map of every option.
Statuses are worded by :mod:`districting.outputs.wording`. Tables longer than a page
continue on the next page.
"""

from __future__ import annotations

import os
import textwrap
from collections.abc import Sequence
from pathlib import Path

import matplotlib

matplotlib.use("Agg")  # files only; never a window

import numpy as np  # noqa: E402
from matplotlib.backends.backend_pdf import PdfPages  # noqa: E402
from matplotlib.figure import Figure  # noqa: E402
from matplotlib.patches import Patch  # noqa: E402

from .. import DRAFT_NOTICE  # noqa: E402
from ..io import atomic_path  # noqa: E402
from ..study import Outcome, now_iso  # noqa: E402
from .packet_compare import difference_pages, moves_pages, side_by_side_page  # noqa: E402
from .packet_feeders import feeder_pages  # noqa: E402
from .packet_layout import (  # noqa: E402
    PAPER,
    PNG_DPI,
    TABLE_FONT,
    chunks,
    draw_table,
    footer,
    frame,
    more,
    page,
    rows_that_fit,
    title,
)
from .packet_maps import (  # noqa: E402
    CHANGE_HATCH,
    draw_zone_map,
    extent_of,
    hatch,
    key_text,
    legend,
    map_axes,
)
from .packet_practice import practice_pages  # noqa: E402
from .packet_rows import (  # noqa: E402
    NO_NUMBER_NOTE,
    OVER,
    UNDER,
    pair_rows,
    school_rows,
    status_text,
    summary_rows,
)
from .store.colours import stored_school_colours  # noqa: E402
from .tables import plan_years, require_plan, zones_frame  # noqa: E402
from .wording import int_text, today_words  # noqa: E402

__all__ = ["write_packet", "packet_figures", "PAPER", "PNG_DPI"]


def _drawing(outcome: Outcome) -> dict:
    """What the pages of one option draw, computed once."""
    header, rows, areas = pair_rows(outcome)
    return {"today": zones_frame(outcome, current=True), "proposed": zones_frame(outcome),
            "areas": areas, "pairs": (header, rows),
            "colours": stored_school_colours(outcome.inputs, outcome.level),
            "extent": extent_of(outcome)}


def _map_page(outcome: Outcome, d: dict, paper: str, stamp: str, number: int) -> Figure:
    fig = page(paper)
    s = outcome.inputs.settings
    top = frame(fig, title(outcome, f"{outcome.level} attendance zones"),
                f"{s.name}.  Today's zones ({s.current_year}) beside the proposed zones "
                f"(from {outcome.settings.plan_year}); {status_text(outcome)}.",
                footer(outcome, stamp), number, full_notice=True)
    extent, areas = d["extent"], d["areas"]
    drawn = []
    for k, (zones, label, when) in enumerate([
        (d["today"], f"Today ({s.current_year})", "today"),
        (d["proposed"], f"Proposed (from {outcome.settings.plan_year})", "plan"),
    ]):
        ax = map_axes(fig, extent, 0.03 + k * 0.48, 0.17, 0.46, top - 0.04 - 0.17)
        drawn.append(draw_zone_map(ax, outcome, zones, d["colours"], when=when,
                                   today_lines=d["today"] if when == "plan" else None))
        if len(areas):
            hatch(ax, areas)
        key_text(ax, drawn[-1]["key"])
        ax.set_title(label, fontsize=11, weight="bold", loc="left")
        map_bottom = ax.get_position().y0
    m = outcome.metrics
    extra = []
    if len(areas):
        extra.append((Patch(facecolor="#bdbdbd", edgecolor="black", hatch=CHANGE_HATCH),
                      f"Planning units whose school changes ({int_text(m.students_moved)} "
                      f"students, {m.units_moved} units)"))
    legend(fig, drawn, d["colours"], map_bottom - 0.04, extra)
    return fig


def _table_pages(outcome: Outcome, paper: str, stamp: str, first: int) -> list[Figure]:
    header, rows, flags = school_rows(outcome)
    years = plan_years(outcome)
    p = outcome.problem
    head = ["School", "Status", "Capacity", "Band", *[h.replace(" ", "\n") for h in header[4:]]]
    head[-4:] = ["Moving\nin", "Moving\nout", "Mean\nkm", "Longest\nkm"]
    widths = [0.16, 0.055, 0.06, 0.06, 0.055, *[0.095] * len(years), 0.05, 0.05, 0.045, 0.05]
    pages = []
    fit = rows_that_fit(page(paper), 0.88 - 0.05, TABLE_FONT, reserve_in=1.3)
    parts = chunks(len(rows), fit)
    for k, (a, b) in enumerate(parts):
        fig = page(paper)
        top = frame(fig, title(outcome, f"schools{more(k, len(parts))}"),
                    f"{outcome.inputs.settings.name}, {outcome.level}.  Students by year in "
                    "the proposed zones, with utilization (students / capacity).",
                    footer(outcome, stamp), first + k, full_notice=False)
        ax = fig.add_axes([0.03, 0.05, 0.94, top - 0.05])
        bottom = draw_table(ax, head, rows[a:b], widths, flags[a:b], font=TABLE_FONT,
                            total=b == len(rows))
        band = (f"{100 * np.nanmin(p.min_util):.0f}-{100 * np.nanmax(p.max_util):.0f}%"
                if p.n_sites else "")
        note = (f"{OVER} with a shaded, bold cell: above the school's utilization band in "
                f"that year;  {UNDER} shaded, bold: below it.  Band: the share of capacity "
                f"allowed (this option: {band}).  'Today' counts today's zones in "
                f"{outcome.inputs.settings.current_year}.  Moving in / out and distances are "
                f"for {outcome.settings.plan_year} students; "
                f"{outcome.distance_note}.  {NO_NUMBER_NOTE}.")
        lines = [*textwrap.wrap(note, 170), "", *today_words(outcome).splitlines()]
        ax.text(0.0, bottom - 0.03, "\n".join(lines), fontsize=7.8, va="top",
                transform=ax.transAxes)
        pages.append(fig)
    return pages


def _moves_pages(outcome: Outcome, d: dict, paper: str, stamp: str, first: int
                 ) -> list[Figure]:
    header, rows = d["pairs"]
    m = outcome.metrics
    subtitle = (f"{outcome.inputs.settings.name}, {outcome.level}.  "
                f"{int_text(m.students_moved)} students in {m.units_moved} planning units "
                f"change school in {outcome.settings.plan_year}.")
    return moves_pages(outcome, header, rows, d["areas"], d["colours"], "where students move",
                       subtitle, paper, stamp, first)


def _summary_page(outcomes: Sequence[Outcome], pages: list[str], paper: str,
                  stamp: str, compared: str) -> Figure:
    fig = page(paper)
    names = sorted({o.inputs.settings.name for o in outcomes})
    side = f"  Pages {compared}: options side by side, and where they differ." if compared \
        else ""
    top = frame(fig, "Options compared", f"{'; '.join(names)}.  {len(outcomes)} options; "
                f"each is shown on the pages listed.{side}", footer(None, stamp), 1,
                full_notice=True)
    header, rows = summary_rows(outcomes, pages)
    head = [h.replace("Students moving", "Students\nmoving")
            .replace("Units moving", "Units\nmoving")
            .replace("Schools outside the band", "Schools\noutside\nthe band")
            .replace("Plan year", "Plan\nyear").replace("Longest km", "Longest\nkm")
            .replace("Mean km", "Mean\nkm") for h in header]
    flags = [["over" if c == 7 and r[7] != "0" else "" for c in range(len(r))] for r in rows]
    ax = fig.add_axes([0.03, 0.05, 0.94, top - 0.05])
    bottom = draw_table(ax, head, rows, [0.17, 0.07, 0.045, 0.065, 0.05, 0.045, 0.055, 0.065,
                                         0.33, 0.05], flags=flags, font=8.5)
    note = ("Students moving: plan-year students whose school changes from today's zones.  "
            "Mean and Longest km: student-weighted mean and longest travel.  Schools outside "
            "the band (shaded when any): open schools above or below their utilization band "
            "in some projected year.  Status: 'best possible plan' is proven best for the "
            "stated rules; 'within 1.2% of the best possible' says how much better any plan "
            "under the same rules could be at most.")
    ax.text(0.0, bottom - 0.03, "\n".join(textwrap.wrap(note, 160)), fontsize=8.5, va="top",
            transform=ax.transAxes)
    return fig


def _pairs(outcomes: Sequence[Outcome]) -> list[tuple[Outcome, Outcome]]:
    """The first option of each level with each later option of that level."""
    firsts: dict[str, Outcome] = {}
    pairs = []
    for o in outcomes:
        if o.level in firsts:
            pairs.append((firsts[o.level], o))
        else:
            firsts[o.level] = o
    return pairs


# ---------------------------------------------------------------------------- the packet
def packet_figures(outcomes: Sequence[Outcome], paper: str = "letter",
                   stamp: str | None = None, extra_pages: Sequence = ()) -> list[Figure]:
    """Every page of the packet, in order, as matplotlib figures; ``extra_pages`` are
    page makers ``(paper, stamp, number) -> Figure`` put last (a sweep's chart)."""
    outcomes = list(outcomes)
    if not outcomes:
        raise ValueError("a packet needs at least one option")
    for o in outcomes:
        require_plan(o, "hearing packet")
    stamp = stamp or now_iso()[:10]
    first = 2 if len(outcomes) > 1 else 1
    pages: list[Figure] = []
    for a, b in _pairs(outcomes):
        colours = stored_school_colours(a.inputs, a.level)
        pages.append(side_by_side_page(a, b, colours, paper, stamp, first + len(pages)))
        pages += difference_pages(a, b, colours, paper, stamp, first + len(pages))
    compared = f"{first}-{first + len(pages) - 1}" if pages else ""
    where = []
    for o in outcomes:
        d = _drawing(o)
        start = first + len(pages)
        pages.append(_map_page(o, d, paper, stamp, start))
        pages += _table_pages(o, paper, stamp, first + len(pages))
        pages += practice_pages(o, paper, stamp, first + len(pages))
        pages += _moves_pages(o, d, paper, stamp, first + len(pages))
        pages += feeder_pages(o, paper, stamp, first + len(pages))
        where.append(f"{start}-{first + len(pages) - 1}")
    if len(outcomes) > 1:
        pages.insert(0, _summary_page(outcomes, where, paper, stamp, compared))
    for fig in pages:  # geopandas names the axes after the CRS; the scale bar says it all
        for ax in fig.axes:
            ax.set_xlabel("")
            ax.set_ylabel("")
    for make in extra_pages:  # charts: their axis titles stay
        pages.append(make(paper, stamp, len(pages) + 1))
    return pages


def write_packet(outcomes: Sequence[Outcome], path_pdf: str | os.PathLike,
                 png_folder: str | os.PathLike | None = None, paper: str = "letter",
                 extra_pages: Sequence = ()) -> list[Path]:
    """Write the packet PDF, and ``<stem>_p01.png``... at :data:`PNG_DPI` into
    ``png_folder`` when given; returns the PDF path followed by the PNG paths.

    ``paper`` is "letter" (US Letter) or "a4", landscape either way.
    """
    path_pdf = Path(path_pdf)
    pages = packet_figures(outcomes, paper, extra_pages=extra_pages)
    names = "; ".join(o.name or "(unsaved)" for o in outcomes)
    meta = {"Title": f"Hearing packet: {names}", "Subject": DRAFT_NOTICE,
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
