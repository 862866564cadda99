"""The packet's tables as text: one row per school, per moved pair, per option.

The figures come from :mod:`districting.outputs.tables` (the exports' tables), so a figure
printed is the figure exported; here they are only worded (through
:mod:`districting.outputs.wording`: km with two decimals, whole students, whole percent,
the band's arrows, a dash where there is no number).
"""

from __future__ import annotations

import re
from collections.abc import Sequence

import numpy as np
import pandas as pd

from ..study import Outcome
from .tables import changed_frame, plan_years, school_table
from .wording import DASH, int_text, km_text, percent_text, status_words, year_text

__all__ = ["school_rows", "pair_rows", "summary_rows", "status_text", "short_name", "OVER",
           "UNDER", "NO_NUMBER_NOTE"]

OVER, UNDER = "\u25b2", "\u25bc"  # up / down triangles: readable without colour
#: What a dash in the packet's tables means (printed under each table that has one).
NO_NUMBER_NOTE = f"{DASH}: no number (no students, or no capacity given)"


def short_name(name: str) -> str:
    return re.sub(r"\s+(Elementary|Middle|High|School)(\s+School)?$", "", name).strip()


def _int(x) -> str:
    return int_text(x) if np.isfinite(x) else DASH


def _km(metres) -> str:
    return km_text(metres) if np.isfinite(metres) else DASH


def _util_text(r, y) -> str:
    """Utilization in whole percent, or to 0.1% when rounding would hide a flag (100.4%)."""
    u, flag = r[f"util_{y}"], r[f"flag_{y}"]
    if not np.isfinite(u):
        return DASH
    text = percent_text(u)
    shown = round(100 * u)
    if flag and ((flag == "over" and shown <= 100 * r["max_util"]) or (
            flag == "under" and shown >= 100 * r["min_util"])):
        text = f"{100 * u:.1f}%"
    return text


def school_rows(outcome: Outcome) -> tuple[list[str], list[list[str]], list[list[str]]]:
    """Header, rows and per-cell flags ('over' / 'under' / '') of the per-school table.

    One row per school that is open in the plan or has students today, then a total row.
    A year cell reads "students (utilization)" with a marker when outside the band.
    """
    t = school_table(outcome)
    years = plan_years(outcome)
    now_year = outcome.inputs.settings.current_year
    keep = t["open"].to_numpy() | (t["students_now"].to_numpy() > 0) | (t["units"] > 0)
    t = t[keep]
    header = ["School", "Status", "Capacity", "Band", f"Today {year_text(now_year)}",
              *[year_text(y) for y in years], "Moving in", "Moving out", "Mean km",
              "Longest km"]
    rows, flags = [], []
    for _, r in t.iterrows():
        cells = [f"{short_name(str(r['name']))} ({r['site_id']})", str(r["status"]),
                 _int(r["capacity"]),
                 f"{100 * r['min_util']:.0f}-{100 * r['max_util']:.0f}%",
                 _int(r["students_now"])]
        marks = [""] * len(cells)
        for y in years:
            flag = r[f"flag_{y}"]
            text = f"{_int(r[f'students_{y}'])} ({_util_text(r, y)})"
            if flag:
                text = f"{OVER if flag == 'over' else UNDER} {text}"
            cells.append(text)
            marks.append(flag)
        cells += [_int(r["moved_in"]), _int(r["moved_out"]), _km(r["mean_distance_m"]),
                  _km(r["max_distance_m"])]
        marks += ["", "", "", ""]
        rows.append(cells)
        flags.append(marks)
    m = outcome.metrics
    opened = t["open"].to_numpy()
    total = ["All schools", "", _int(t.loc[opened, "capacity"].sum()), "",
             _int(t["students_now"].sum())]
    for y in years:
        students = t[f"students_{y}"].sum()
        cap = t.loc[opened, "capacity"].sum()
        total.append(f"{_int(students)} ({percent_text(students / cap) if cap else DASH})")
    total += [_int(t["moved_in"].sum()), _int(t["moved_out"].sum()),
              _km(m.overall_mean_distance), _km(m.overall_max_distance)]
    rows.append(total)
    flags.append([""] * len(total))
    return header, rows, flags


def pair_rows(outcome: Outcome) -> tuple[list[str], list[list[str]], pd.DataFrame]:
    """Header and rows of the from -> to table (most students first), and the areas."""
    areas = changed_frame(outcome)
    areas = areas.sort_values(["students", "from_site", "to_site"],
                              ascending=[False, True, True]).reset_index(drop=True)
    names = dict(zip(outcome.site_ids, outcome.sites["name"].astype(str), strict=True))
    header = ["#", "From (today)", "To (proposed)", "Units", "Students"]
    rows = [[str(k + 1), f"{short_name(names.get(r.from_site, ''))} ({r.from_site})",
             f"{short_name(names.get(r.to_site, ''))} ({r.to_site})", _int(r.n_units),
             _int(r.students)] for k, r in enumerate(areas.itertuples())]
    if rows:
        rows.append(["", "All changes", "", _int(areas["n_units"].sum()),
                     _int(areas["students"].sum())])
    return header, rows, areas


def status_text(outcome: Outcome) -> str:
    """The option's status in words (:func:`districting.outputs.wording.status_words`)."""
    return status_words(outcome.plan)


def summary_rows(outcomes: Sequence[Outcome], pages: Sequence[str] | None = None
                 ) -> tuple[list[str], list[list[str]]]:
    """Header and one row per option of the comparison page (``pages``: where each is)."""
    header = ["Option", "Level", "Plan year", "Students moving", "Units moving",
              "Mean km", "Longest km", "Schools outside the band", "Status", "Pages"]
    rows = []
    for k, o in enumerate(outcomes):
        m = o.metrics
        rows.append([o.name or "(unsaved)", o.level, year_text(o.settings.plan_year),
                     _int(m.students_moved), str(m.units_moved),
                     _km(m.overall_mean_distance), _km(m.overall_max_distance),
                     str(int(np.count_nonzero(m.out_of_band))), status_text(o),
                     pages[k] if pages else ""])
    return header, rows
