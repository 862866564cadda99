"""The packet's feeder page: where each school's students go at the neighbouring level.

The rows are the feeder CSV's (:func:`districting.outputs.feeders.feeder_sheet`), so a
figure printed is the figure exported. A lower school that splits (feeds two or more upper
schools) has its name shaded and bold.
"""

from __future__ import annotations

import matplotlib

matplotlib.use("Agg")  # files only; never a window

from matplotlib.figure import Figure  # noqa: E402

from ..study import Outcome  # noqa: E402
from .feeders import feeder_sheet, feeder_table, split_feeders  # noqa: E402
from .packet_layout import (  # noqa: E402
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
from .wording import DASH, int_text  # noqa: E402

__all__ = ["feeder_pages"]


def _rows(outcome: Outcome) -> tuple[list[str], list[list[str]], list[list[str]]]:
    sheet, _notes = feeder_sheet(outcome)
    year = int(outcome.settings.plan_year)
    head = ["Feeding", "From school", "To school", f"Students\n{year}", "Share of the\nfrom "
            "school", "From school\nsplits"]
    rows, flags = [], []
    for r in sheet.itertuples(index=False):
        students, share, split = r[5], r[6], r[7]
        rows.append([r[0], f"{r[2]} ({r[1]})", f"{r[4]} ({r[3]})",
                     int_text(students) if students == students else DASH,
                     f"{share:.1f}%" if share == share else DASH, split])
        mark = "split" if split == "yes" else ""
        flags.append(["", mark, "", "", "", mark])
    return head, rows, flags


def feeder_pages(outcome: Outcome, paper: str, stamp: str, first: int) -> list[Figure]:
    """The feeder table's pages of one option ([] when no neighbouring level has zones)."""
    head, rows, flags = _rows(outcome)
    if not rows:
        return []
    table = feeder_table(outcome)
    counts = [f"{lo} to {up}: {split_feeders(part)} of {part['from_id'].nunique()} {lo} "
              f"schools split ({part['source'].iloc[0]})"
              for (lo, up), part in table.groupby(["lower_level", "upper_level"], sort=False)]
    widths = [0.13, 0.27, 0.27, 0.09, 0.12, 0.10]
    fit = rows_that_fit(page(paper), 0.88 - 0.05, TABLE_FONT, reserve_in=1.0)
    parts = chunks(len(rows), fit)
    pages = []
    for k, (a, b) in enumerate(parts):
        fig = page(paper)
        top = frame(fig, title(outcome, f"feeder pattern{more(k, len(parts))}"),
                    f"{outcome.inputs.settings.name}, {outcome.level}.  Where each school's "
                    f"students go at the next level, students of the lower level in "
                    f"{outcome.settings.plan_year}.",
                    footer(outcome, stamp), first + k, full_notice=False)
        ax = fig.add_axes([0.03, 0.05, 0.94, top - 0.05])
        bottom = draw_table(ax, head, rows[a:b], widths, flags[a:b], font=TABLE_FONT)
        note = ["Shaded, bold: a school whose students go to two or more schools of the "
                "next level (a split feeder).", *(c[0].upper() + c[1:] + "." for c in counts)]
        ax.text(0.0, bottom - 0.03, "\n".join(note), fontsize=7.8, va="top",
                transform=ax.transAxes)
        pages.append(fig)
    return pages
