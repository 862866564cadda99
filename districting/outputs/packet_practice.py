"""The packet's page on walking, transport and group shares of an option.

One row per open school: the plan year's students within walking distance and those who
need transport, and each group's share in the plan year and the last projected year
(shaded outside the band when the run has one); a last row with the totals and the
district's shares. The figures are :func:`districting.outputs.tables.school_table`'s.
"""

from __future__ import annotations

import textwrap

import numpy as np
from matplotlib.figure import Figure

from .. import rules
from .packet_layout import (
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
from .practice import walk_metres
from .tables import plan_years, school_table
from .wording import DASH, int_text

__all__ = ["practice_pages"]


def _pct(v: float) -> str:
    return DASH if not np.isfinite(v) else f"{100 * v:.1f}%"


def practice_rows(outcome) -> tuple[list[str], list[list[str]], list[list[str]]]:
    """Header, rows and per-cell flags ('over' outside the group band, else '')."""
    p = outcome.problem
    t = school_table(outcome)
    years = plan_years(outcome)
    first, last = int(outcome.settings.plan_year), years[-1]
    district = rules.district_shares(p)
    row_of = {int(y): k for k, y in enumerate(p.years)}
    header = ["School"]
    walk = p.walk is not None
    if walk:
        header += [f"Walk\n{first}", f"Transport\n{first}"]
    cols = []
    for g, name in enumerate(p.group_names):
        for y in sorted({first, last}):
            if f"share_{name}_{y}" in t.columns:
                cols.append((g, name, y))
                header.append(f"{name.replace('_', ' ')}\n{y}")
    rows, flags = [], []
    for _, r in t[t["open"]].iterrows():
        cells = [f"{r['name']} ({r['site_id']})"]
        if walk:
            cells += [int_text(r[f"walkers_{first}"]), int_text(r[f"transported_{first}"])]
        marks = [""] * len(cells)
        for g, name, y in cols:
            share = r[f"share_{name}_{y}"]
            cells.append(_pct(share))
            off = abs(share - district[g, row_of[y]]) > p.group_band + 1e-9
            marks.append("over" if p.group_band > 0 and np.isfinite(share) and off else "")
        rows.append(cells)
        flags.append(marks)
    total = ["All schools / district"]
    if walk:
        total += [int_text(t[f"walkers_{first}"].sum()), int_text(t[f"transported_{first}"].sum())]
    total += [_pct(district[g, row_of[y]]) for g, _name, y in cols]
    rows.append(total)
    flags.append([""] * len(total))
    return header, rows, flags


def practice_pages(outcome, paper: str, stamp: str, first: int) -> list[Figure]:
    """The page(s), or none when the level has neither a walk zone nor group counts."""
    p = outcome.problem
    if p.walk is None and not p.group_names:
        return []
    header, rows, flags = practice_rows(outcome)
    widths = [0.3] + [0.1] * (len(header) - 1)
    fit = rows_that_fit(page(paper), 0.88 - 0.05, TABLE_FONT, reserve_in=1.3)
    parts = chunks(len(rows), fit)
    metres = walk_metres(outcome)
    band = (f"Shaded: more than {p.group_band * 100:g} points from the district's share (the "
            "run's group band).  " if p.group_band > 0 else "No group band in this run.  ")
    note = (f"Walk: students living within {metres:,.0f} m of their school by the option's "
            f"travel measure; Transport: the others.  {band}Shares are of the school's "
            "students in that year.") if p.walk is not None else band
    pages = []
    for k, (a, b) in enumerate(parts):
        fig = page(paper)
        top = frame(fig, title(outcome, f"walking, transport and groups{more(k, len(parts))}"),
                    f"{outcome.inputs.settings.name}, {outcome.level}.", footer(outcome, stamp),
                    first + k, full_notice=False)
        ax = fig.add_axes([0.03, 0.05, 0.94, top - 0.05])
        bottom = draw_table(ax, header, rows[a:b], widths, flags[a:b], font=TABLE_FONT,
                            total=b == len(rows))
        ax.text(0.0, bottom - 0.03, "\n".join(textwrap.wrap(note, 170)), fontsize=7.8,
                va="top", transform=ax.transAxes)
        pages.append(fig)
    return pages
