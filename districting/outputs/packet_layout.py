"""The packet's page layout: paper sizes, title and notice, footer, ruled tables.

Every page of the hearing packet is made by :func:`page` and framed by :func:`frame`
(title, subtitle, the draft notice in full or as a stamp, footer with the date and page
number); tables are drawn by :func:`draw_table` and split over pages with
:func:`rows_that_fit` and :func:`chunks`.
"""

from __future__ import annotations

import textwrap

import numpy as np
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure
from matplotlib.patches import Rectangle

from .. import DRAFT_NOTICE
from ..study import Outcome

__all__ = ["PAPER", "PNG_DPI", "TABLE_FONT", "page", "frame", "footer", "title", "title_fit",
           "draw_table", "rows_that_fit", "chunks", "more"]

PAPER = {"letter": (11.0, 8.5), "a4": (11.69, 8.27)}
PNG_DPI = 110
TABLE_FONT = 7.8  # points; a table row is twice the font size high
FLAG_SHADE = "#cfcfcf"
HEAD_SHADE = "#3b3b3b"
STRIPE = "#f3f3f3"


# ---------------------------------------------------------------------------- page furniture
def page(paper: str) -> Figure:
    if paper not in PAPER:
        raise ValueError(f"paper {paper!r} is not one of {', '.join(PAPER)}")
    fig = Figure(figsize=PAPER[paper])
    FigureCanvasAgg(fig)  # a renderer to measure text with (labels that fit)
    fig.patch.set_facecolor("white")
    return fig


def frame(fig: Figure, title: str, subtitle: str, footer: str, page: int,
           full_notice: bool) -> float:
    """Title, notice and footer; returns the top of the free area (figure fraction)."""
    title_fit(fig.text(0.03, 0.962, title, fontsize=15, weight="bold", va="top"))
    lines = textwrap.wrap(subtitle, 150)  # 9.5 pt over the page width
    fig.text(0.03, 0.918, "\n".join(lines[:2]), fontsize=9.5 if len(lines) < 2 else 8.6,
             va="top", color="#333333")
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
        top = 0.88 if len(lines) < 2 else 0.865
    fig.text(0.03, 0.018, footer, fontsize=7, color="#444444")
    fig.text(0.97, 0.018, f"page {page}", fontsize=7, color="#444444", ha="right")
    return top


def title_fit(text, share: float = 0.74) -> None:
    """Shrink a drawn title (15 pt down to 8 pt) until it fits ``share`` of the page width,
    left of the notice box, measured by the figure's renderer; a title too long even at
    8 pt is cut with an ellipsis (the names it holds are written out in the subtitle)."""
    fig = text.figure
    renderer = fig.canvas.get_renderer()
    room = share * fig.get_figwidth() * fig.dpi  # pixels

    def width() -> float:
        return text.get_window_extent(renderer).width

    if width() > room:
        text.set_fontsize(max(8.0, text.get_fontsize() * room / width() * 0.98))
    full = text.get_text()
    keep = len(full)
    while width() > room and keep > 1:
        keep = max(1, int(keep * room / width()) - 1)
        text.set_text(full[:keep].rstrip() + "\u2026")


def footer(outcome: Outcome | None, stamp: str) -> str:
    short = DRAFT_NOTICE.split(" - ")[0]
    who = "" if outcome is None else f"{outcome.inputs.settings.name}  |  "
    return f"{who}{short}: decisions rest with the Board of Education.  Printed {stamp}"


def title(outcome: Outcome, what: str) -> str:
    return f"{outcome.name or 'Unsaved option'}: {what}"


# ---------------------------------------------------------------------------- tables
def draw_table(ax, header, rows, widths, flags=None, font=8.0, total=False, align=None):
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


def rows_that_fit(fig: Figure, height: float, font: float, reserve_in: float) -> int:
    """Table rows (plus a two-line header) that fit ``height`` (figure fraction)."""
    row_in = font * 2.0 / 72
    free = height * fig.get_size_inches()[1] - reserve_in - 1.6 * row_in
    return max(3, int(free // row_in))


def chunks(n: int, size: int) -> list[tuple[int, int]]:
    return [(k, min(k + size, n)) for k in range(0, max(n, 1), size)]


def more(k: int, n: int) -> str:
    return f" (page {k + 1} of {n})" if n > 1 else ""
