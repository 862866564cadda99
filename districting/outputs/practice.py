"""Walk-zone, transport and group-share figures of a plan, per school.

:func:`practice_columns` adds to :func:`districting.outputs.tables.school_table`, per
projected year: ``walkers_<year>`` (students in the zone living within walking distance
of the school), ``transported_<year>`` (the others: they need transport) when the level
has a walking distance, and ``share_<group>_<year>`` (the zone's share of each group, 0-1)
for the years the group is counted. :func:`practice_sheet` gives the same as spreadsheet
columns with their notes, so exports, the packet and the workbench agree.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from .. import rules

__all__ = ["practice_columns", "practice_sheet", "practice_lines", "walk_metres"]


def walk_metres(outcome) -> float:
    """The level's walking distance in metres (0: no walk zone)."""
    return float(outcome.inputs.settings.walking.distance.get(outcome.level, 0.0))


def practice_columns(outcome, years: list[int]) -> pd.DataFrame:
    """The walk, transport and group-share columns of the school table."""
    p = outcome.problem
    a = np.asarray(outcome.assignment, np.int64)
    row_of = {int(y): t for t, y in enumerate(p.years)}
    cols: dict[str, np.ndarray] = {}
    if p.walk is not None:
        ok = a >= 0
        walks = np.zeros(len(a), bool)
        walks[ok] = p.walk[np.flatnonzero(ok), a[ok]]
        for y in years:
            d = p.demand[row_of[y]]
            cols[f"walkers_{y}"] = np.bincount(a[ok & walks], weights=d[ok & walks],
                                               minlength=p.n_sites)
            cols[f"transported_{y}"] = np.bincount(a[ok & ~walks], weights=d[ok & ~walks],
                                                   minlength=p.n_sites)
    shares = rules.group_shares(p, a)
    for g, name in enumerate(p.group_names):
        for y in years:
            if not np.isnan(p.groups[g, row_of[y]]).any():
                cols[f"share_{name}_{y}"] = shares[g, row_of[y]]
    return pd.DataFrame(cols)


def practice_sheet(outcome, table: pd.DataFrame, whole, decimals
                   ) -> tuple[dict[str, pd.Series], dict[str, str]]:
    """Spreadsheet columns (titles with units) and notes for the columns above."""
    p = outcome.problem
    sheet: dict[str, pd.Series] = {}
    notes: dict[str, str] = {}
    metres = walk_metres(outcome)
    district = rules.district_shares(p)
    row_of = {int(y): t for t, y in enumerate(p.years)}
    for column in table.columns:
        kind, _, year = column.rpartition("_")
        if kind == "walkers":
            title = f"Students within walking distance {year}"
            notes[title] = (f"students in the zone in {year} living within {metres:,.0f} m of "
                            "the school by the option's travel measure")
            sheet[title] = whole(table[column])
        elif kind == "transported":
            title = f"Students needing transport {year}"
            notes[title] = (f"students in the zone in {year} living beyond {metres:,.0f} m "
                            "of the school")
            sheet[title] = whole(table[column])
        elif kind.startswith("share_"):
            name = kind.removeprefix("share_")
            g = list(p.group_names).index(name)
            title = f"Share of {name} {year} (%)"
            share = district[g, row_of[int(year)]]
            band = (f"; the band allows {p.group_band * 100:g} points either side"
                    if p.group_band > 0 else "")
            notes[title] = (f"{name} students / students in the zone in {year}, percent "
                            f"(district: {100 * share:.1f}%{band}); empty when the zone has "
                            "no students")
            sheet[title] = decimals(100 * table[column], 1)
    return sheet, notes


def practice_lines(outcome) -> list[str]:
    """Lines in words for the summary: walkers and transport in the plan year, and each
    group's district share with the range of the schools' shares."""
    p = outcome.problem
    a = np.asarray(outcome.assignment, np.int64)
    year = int(outcome.settings.plan_year)
    lines = []
    if p.walk is not None:
        rides = rules.transported(p, a).sum()
        walks = p.demand[0].sum() - rides
        limit = (f" (limit {p.max_transported:,.0f})" if p.max_transported is not None
                 else "")
        kept = "; units that can walk stay with a school in reach" if (
            outcome.settings.keep_walkers) else ""
        lines.append(f"{year}: {walks:,.0f} students live within walking distance "
                     f"({walk_metres(outcome):,.0f} m) of their school, {rides:,.0f} need "
                     f"transport{limit}{kept}")
    opened = np.asarray(outcome.plan.open_sites, bool)
    shares = rules.group_shares(p, a)
    district = rules.district_shares(p)
    for g, name in enumerate(p.group_names):
        s = shares[g, 0][opened & np.isfinite(shares[g, 0])]
        if not len(s):
            continue
        band = (f" (band: {p.group_band * 100:g} points either side)" if p.group_band > 0
                else "")
        lines.append(f"{year}: {name} {100 * district[g, 0]:.1f}% of the level's students; "
                     f"schools from {100 * s.min():.1f}% to {100 * s.max():.1f}%{band}")
    return lines
