"""The packet's pages that set two plans against each other.

:func:`moves_pages`: a from -> to table of the planning units whose school differs between
a reference (today's zones, or another option) and a plan, beside a map of those units in
the colour of the school they go to (the rest grey), numbered as in the table; used for
each option against today and for two options against each other.
:func:`side_by_side_page`: two options' zones on one page, same extent, same school colours.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from matplotlib.figure import Figure

from ..study import Outcome
from . import packet_layout as layout
from .packet_maps import HALO, draw_zone_map, extent_of, hatch, key_text, legend, map_axes
from .packet_rows import short_name
from .tables import zones_frame
from .wording import DASH, int_text, status_words
from .zones import changed_areas

__all__ = ["moves_pages", "side_by_side_page", "difference_pages", "difference_rows"]


def difference_rows(before: Outcome, after: Outcome, reference_label: str):
    """Header, rows (most students first, then a total) and the dissolved areas of the
    units whose school differs from ``before`` to ``after`` (plan-year students)."""
    units = after.inputs.units[["unit_id", "geometry"]]
    areas = changed_areas(units, before.site_id_of(np.asarray(before.assignment)),
                          after.site_id_of(np.asarray(after.assignment)),
                          counts=after.problem.demand[0],
                          coverage=after.inputs.units_coverage)
    names = dict(zip(after.site_ids, after.sites["name"].astype(str), strict=True))

    def school(sid: str) -> str:
        return f"{short_name(names.get(sid, ''))} ({sid})" if sid else DASH

    header = ["#", f"From\n{_clip(reference_label)}", f"To\n{_clip(after.name or 'this option')}",
              "Units", "Students"]
    rows = [[str(k + 1), school(r.from_site), school(r.to_site), int_text(r.n_units),
             int_text(r.students)] for k, r in enumerate(areas.itertuples())]
    if rows:
        rows.append(["", "All changes", "", int_text(areas["n_units"].sum()),
                     int_text(areas["students"].sum())])
    return header, rows, areas


def _clip(label: str, most: int = 19) -> str:
    """An option's name short enough for a table heading (it is in full in the subtitle)."""
    return label if len(label) <= most else label[: most - 1].rstrip() + "\u2026"


def moves_pages(after: Outcome, header, rows, areas: pd.DataFrame, colours: dict[str, str],
                what: str, subtitle: str, paper: str, stamp: str, first: int,
                outline=None, outline_words: str = "") -> list[Figure]:
    """Table of moves beside a map of the moved units (continued over pages)."""
    extent = extent_of(after)
    pages = []
    font = layout.TABLE_FONT
    fit = layout.rows_that_fit(layout.page(paper), 0.88 - 0.05, font, reserve_in=0.1)
    parts = layout.chunks(len(rows), fit)
    proposed = zones_frame(after)
    for k, (a, b) in enumerate(parts):
        fig = layout.page(paper)
        heading = layout.title(after, f"{what}{layout.more(k, len(parts))}")
        top = layout.frame(fig, heading, subtitle, layout.footer(after, stamp), first + k,
                           full_notice=False)
        tax = fig.add_axes([0.03, 0.05, 0.40, top - 0.05])
        if rows:
            layout.draw_table(tax, header, rows[a:b], [0.06, 0.34, 0.34, 0.11, 0.15],
                              font=font, total=b == len(rows),
                              align=["center", "left", "left", "center", "center"])
        else:
            tax.set_axis_off()
            tax.text(0.0, 0.97, "No planning unit changes school.", fontsize=11, va="top")
        ax = map_axes(fig, extent, 0.46, 0.14, 0.52, top - 0.18)
        moved = areas.rename(columns={"to_site": "site_id"})
        drawn = draw_zone_map(ax, after, moved, colours, label=False,
                              grey=after.inputs.units[["geometry"]],
                              today_lines=outline, outline_words=outline_words)
        proposed.boundary.plot(ax=ax, color="#1f1f1f", linewidth=1.0, zorder=4)
        if len(areas):
            hatch(ax, areas)
            for j, pt in enumerate(areas.geometry.representative_point()):
                ax.text(pt.x, pt.y, str(j + 1), ha="center", va="center", fontsize=8,
                        weight="bold", zorder=12, path_effects=HALO)
        ax.set_title("In the colour of the school they go to, numbered as in the table; "
                     "grey: no change", fontsize=8.5, loc="left")
        box = ax.get_position()
        legend(fig, [drawn], {s: colours[s] for s in moved["site_id"]}, box.y0 - 0.01,
               x=(box.x0 + box.x1) / 2, ncol=2)
        pages.append(fig)
    return pages


def side_by_side_page(a: Outcome, b: Outcome, colours: dict[str, str], paper: str,
                      stamp: str, number: int) -> Figure:
    """Two options' zones side by side: the same extent and the same school colours."""
    fig = layout.page(paper)
    subtitle = (f"{a.inputs.settings.name}, {a.level}.  {a.name}: {status_words(a.plan)}.  "
                f"{b.name}: {status_words(b.plan)}.  Each school has the same colour on both "
                "maps; dotted lines: today's zones.")
    top = layout.frame(fig, f"{a.name or 'Unsaved option'} beside {b.name or 'unsaved option'}",
                       subtitle, layout.footer(a, stamp), number, full_notice=False)
    extent = extent_of(a)
    today = zones_frame(a, current=True)
    drawn = []
    for k, o in enumerate((a, b)):
        ax = map_axes(fig, extent, 0.03 + k * 0.48, 0.16, 0.46, top - 0.04 - 0.16)
        drawn.append(draw_zone_map(ax, o, zones_frame(o), colours, today_lines=today))
        key_text(ax, drawn[-1]["key"])
        ax.set_title(o.name or "Unsaved option", fontsize=11, weight="bold", loc="left")
        bottom = ax.get_position().y0
    legend(fig, drawn, colours, bottom - 0.04)
    return fig


def difference_pages(a: Outcome, b: Outcome, colours: dict[str, str], paper: str,
                     stamp: str, first: int) -> list[Figure]:
    """The planning units whose school differs between options ``a`` and ``b``."""
    header, rows, areas = difference_rows(a, b, a.name or "the first option")
    students = areas["students"].sum() if len(areas) else 0.0
    subtitle = (f"{a.inputs.settings.name}, {a.level}.  {int_text(students)} students in "
                f"{int(areas['n_units'].sum()) if len(areas) else 0} planning units go to "
                f"another school in {b.name} than in {a.name}; dotted lines: {a.name}'s "
                "zones, solid lines: this option's zones.")
    return moves_pages(b, header, rows, areas, colours,
                       f"where it differs from {a.name or 'the first option'}", subtitle,
                       paper, stamp, first, outline=zones_frame(a),
                       outline_words=f"Zones of {a.name or 'the first option'}")
