"""The packet's tables as text: one row per school, per moved pair, per option.

The figures come from :mod:`districting.outputs.tables` (the exports' tables), so a figure
printed is the figure exported; here they are only worded (km, %, the band's arrows).
"""

from __future__ import annotations

import re
from collections.abc import Sequence

import numpy as np
import pandas as pd

from ..study import Outcome
from .tables import changed_frame, plan_years, school_table

__all__ = ["school_rows", "pair_rows", "summary_rows", "status_text", "short_name", "km_text",
           "int_text", "pct_text", "OVER", "UNDER"]

OVER, UNDER = "\u25b2", "\u25bc"  # up / down triangles: readable without colour


def short_name(name: str) -> str:
    return re.sub(r"\s+(Elementary|Middle|High|School)(\s+School)?$", "", name).strip()


def km_text(metres) -> str:
    return "" if metres is None or not np.isfinite(metres) else f"{metres / 1000:.1f}"


def int_text(x) -> str:
    return "" if x is None or not np.isfinite(x) else f"{x:,.0f}"


def pct_text(x) -> str:
    return "" if x is None or not np.isfinite(x) else f"{100 * x:.0f}%"


def _util_text(r, y) -> str:
    """Utilization in whole percent, or to 0.1% when rounding would hide a flag (100.4%)."""
    u, flag = r[f"util_{y}"], r[f"flag_{y}"]
    text = pct_text(u)
    if flag and np.isfinite(u):
        shown = round(100 * u)
        if (flag == "over" and shown <= 100 * r["max_util"]) or (
                flag == "under" and shown >= 100 * r["min_util"]):
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
    header = ["School", "Status", "Capacity", "Band", f"Now {now_year}",
              *[str(y) for y in years], "Moved in", "Moved out", "Mean km", "Max km"]
    rows, flags = [], []
    for _, r in t.iterrows():
        cells = [f"{short_name(str(r['name']))} ({r['site_id']})", str(r["status"]),
                 int_text(r["capacity"]),
                 f"{100 * r['min_util']:.0f}-{100 * r['max_util']:.0f}%",
                 int_text(r["students_now"])]
        marks = [""] * len(cells)
        for y in years:
            flag = r[f"flag_{y}"]
            text = f"{int_text(r[f'students_{y}'])} ({_util_text(r, y)})"
            if flag:
                text = f"{OVER if flag == 'over' else UNDER} {text}"
            cells.append(text)
            marks.append(flag)
        cells += [int_text(r["moved_in"]), int_text(r["moved_out"]), km_text(r["mean_distance_m"]),
                  km_text(r["max_distance_m"])]
        marks += ["", "", "", ""]
        rows.append(cells)
        flags.append(marks)
    m = outcome.metrics
    opened = t["open"].to_numpy()
    total = ["All schools", "", int_text(t.loc[opened, "capacity"].sum()), "",
             int_text(t["students_now"].sum())]
    for y in years:
        students = t[f"students_{y}"].sum()
        cap = t.loc[opened, "capacity"].sum()
        total.append(f"{int_text(students)} ({pct_text(students / cap if cap else np.nan)})")
    total += [int_text(t["moved_in"].sum()), int_text(t["moved_out"].sum()),
              km_text(m.overall_mean_distance), km_text(m.overall_max_distance)]
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
             f"{short_name(names.get(r.to_site, ''))} ({r.to_site})", int_text(r.n_units),
             int_text(r.students)] for k, r in enumerate(areas.itertuples())]
    if rows:
        rows.append(["", "All changes", "", int_text(areas["n_units"].sum()),
                     int_text(areas["students"].sum())])
    return header, rows, areas


def status_text(outcome: Outcome) -> str:
    plan = outcome.plan
    gap = "" if not np.isfinite(plan.gap) else f", gap {100 * plan.gap:.3g}%"
    return f"{plan.status}{gap}"


def summary_rows(outcomes: Sequence[Outcome], pages: Sequence[str] | None = None
                 ) -> tuple[list[str], list[list[str]]]:
    """Header and one row per option of the comparison page (``pages``: where each is)."""
    header = ["Option", "Level", "Plan year", "Students moved", "Units moved",
              "Mean km", "Max km", "Schools out of band", "Status", "Pages"]
    rows = []
    for k, o in enumerate(outcomes):
        m = o.metrics
        rows.append([o.name or "(unsaved)", o.level, str(o.settings.plan_year),
                     int_text(m.students_moved), str(m.units_moved),
                     km_text(m.overall_mean_distance), km_text(m.overall_max_distance),
                     str(int(np.count_nonzero(m.out_of_band))), status_text(o),
                     pages[k] if pages else ""])
    return header, rows
