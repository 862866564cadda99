"""Locks and forbids, the travel matrix, and capacity against students per year."""

from __future__ import annotations

import numpy as np
import pandas as pd

from .. import rules
from .cells import number_values, text_values
from .reading import (
    Reading,
    a_word,
    csv_columns,
    positions,
    source_table,
)
from .report import ids_text, where_units

__all__ = ["check_locks", "read_travel", "check_capacity"]


def _id_fix(word: str, wanted: str, ids) -> str:
    """"correct the unit id", naming the id that differs from ``wanted`` only in case."""
    same = sorted({str(i) for i in ids if str(i).casefold() == wanted.casefold()})
    if len(same) == 1:
        return (f"correct the {word} id: ids are exact, upper/lower case included (did you "
                f"mean {same[0]}?)")
    return f"correct the {word} id"



def check_locks(st: Reading) -> None:
    if st.sites is None or st.unit_ids is None:
        return
    file = st.settings.path
    site_ids = st.sites["site_id"].to_numpy(dtype=object)
    levels = st.sites["level"].to_numpy(dtype=object)
    status = st.sites["status"].to_numpy(dtype=object)
    seen: dict[tuple[str, str], str] = {}
    for key, pairs in (("locks", st.settings.locks), ("forbids", st.settings.forbids)):
        for k, lk in enumerate(pairs, start=1):
            where = f"[[{key}]] entry {k} ({lk.level}, {lk.unit}, {lk.site})"
            if lk.level not in st.settings.levels:
                st.report.error(file, where, f"level {lk.level!r} is not one of the project's "
                                f"levels ({', '.join(st.settings.levels)})", "correct the level")
                continue
            if positions(st.unit_ids, [lk.unit])[0] < 0:
                st.report.error(file, where, f"unit {lk.unit!r} is not in the units layer",
                                _id_fix("unit", lk.unit, st.unit_ids), [lk.unit])
            j = positions(site_ids, [lk.site])[0]
            if j < 0:
                st.report.error(file, where, f"site {lk.site!r} is not in the sites layer",
                                _id_fix("site", lk.site, site_ids), [lk.site])
                continue
            if levels[j] != lk.level:
                st.report.error(file, where, f"site {lk.site} is {a_word(levels[j])} site, not "
                                f"{lk.level}", f"name {a_word(lk.level)} site", [lk.site])
                continue
            if key == "locks":
                before = seen.get((lk.level, lk.unit))
                if before is not None and before != lk.site:
                    st.report.error(file, where, f"unit {lk.unit} is locked to both {before} "
                                    f"and {lk.site} for {lk.level}", "keep one lock",
                                    [lk.unit])
                seen[(lk.level, lk.unit)] = lk.site
                if rules.is_closed(status[j]):
                    st.report.warning(file, where, f"the unit is locked to site {lk.site}, "
                                      f"which is {status[j]}", "lock it to a site that stays "
                                      "open, or change the site's status", [lk.unit])
            elif seen.get((lk.level, lk.unit)) == lk.site:
                st.report.error(file, where, f"unit {lk.unit} is both locked to and forbidden "
                                f"from site {lk.site}", "remove the lock or the forbid",
                                [lk.unit])


def read_travel(st: Reading) -> None:
    path = st.settings.solve.travel_matrix
    if path is None:
        return
    table = source_table(st, path, "travel matrix")
    if table is None or st.sites is None or st.unit_ids is None:
        return
    cols = csv_columns(st, path, table, ("unit_id", "site_id", "cost"), "the travel matrix")
    if cols is None:
        return
    line = np.arange(len(table)) + 2
    i = positions(st.unit_ids, text_values(table[cols["unit_id"]])[0])
    j = positions(st.sites["site_id"], text_values(table[cols["site_id"]])[0])
    cost, missing, bad = number_values(table[cols["cost"]])
    wrong = missing | bad | (np.nan_to_num(cost) < 0)
    for mask, what, fix in (
        (i < 0, "unit_id is not a planning unit", "correct the unit id"),
        (j < 0, "site_id is not a site (of the project's levels)", "correct the site id"),
        (wrong, "cost is missing, not a number or negative", "enter a cost of 0 or more"),
    ):
        if mask.any():
            rows = [f"row {k}" for k in line[mask]]
            st.report.error(path, ids_text(rows), what, fix, rows)
    ok = (i >= 0) & (j >= 0) & ~wrong
    pair = pd.Series(i[ok] * len(st.sites) + j[ok])
    dup = pair.duplicated(keep=False).to_numpy()
    if dup.any():
        rows = [f"row {k}" for k in line[ok][dup]]
        st.report.error(path, ids_text(rows), "the same unit and site appear on several rows",
                        "keep one row per unit and site", rows)
    travel = np.full((len(st.unit_ids), len(st.sites)), np.inf)
    travel[i[ok], j[ok]] = cost[ok]
    for level in st.settings.levels:
        cols_l = np.flatnonzero((st.sites["level"] == level).to_numpy())
        if not len(cols_l):
            continue
        none = ~np.isfinite(travel[:, cols_l]).any(axis=1)
        if none.any():
            st.report.error(path, where_units(st.labels[none]),
                            f"the travel matrix gives the unit no cost to any {level} site, "
                            "so it cannot be assigned", "add rows for the unit (pairs absent "
                            "from the matrix are not allowed)", st.labels[none])
    st.travel = travel


def check_capacity(st: Reading) -> None:
    """Students of each level and year against the room its sites can offer."""
    if st.sites is None or not st.counts:
        return
    s = st.settings
    file = s.sources["sites"].path
    band_ok = s.solve.min_utilization <= s.solve.max_utilization
    for level in s.levels:
        lv = st.sites[st.sites["level"] == level]
        status = lv["status"].to_numpy(dtype=object)
        forced = rules.open_in_plan(status)
        candidate = rules.is_candidate(status)
        p = s.solve.open_count.get(level)
        cap = lv["capacity"].to_numpy(float)
        hi = rules.site_band(lv["max_util"], s.solve.max_utilization)
        lo = rules.site_band(lv["min_util"], s.solve.min_utilization)
        if p is not None:
            if not candidate.any():
                st.report.warning(s.path, "[solve] open_count", f"{level} has no candidate "
                                  "sites; open_count is ignored", "mark the sites the solver "
                                  "may open as candidate, or remove open_count")
                p = None
            elif not forced.sum() <= p <= forced.sum() + candidate.sum():
                st.report.error(s.path, "[solve] open_count",
                                f"open_count for {level} is {p}, but {int(forced.sum())} sites "
                                f"are open or new and {int(candidate.sum())} are candidates",
                                f"choose a number from {int(forced.sum())} to "
                                f"{int(forced.sum() + candidate.sum())}")
                continue
        if (level, None) in st.doubtful:
            continue
        room = rules.usable_capacity(cap, hi, forced, candidate, p)
        floor = float((cap * lo)[forced].sum())
        students = st.counts[level].sum(axis=1)
        names = ids_text(lv["site_id"].tolist()) or "none"
        for t, year in enumerate(s.all_years):
            if t == 0 or (level, year) in st.doubtful:
                continue  # today's figures are facts, not a plan's constraint
            if students[t] > room + 1e-9:
                st.report.error(file, f"{level} {year}",
                                f"{students[t]:,.0f} {level} students in {year} but the "
                                f"{level} sites that can take students hold only {room:,.0f} "
                                f"(capacity x max utilization; sites: {names})",
                                "add capacity, open a site, or raise max_utilization")
            elif band_ok and students[t] < floor - 1e-9:
                st.report.error(file, f"{level} {year}",
                                f"{students[t]:,.0f} {level} students in {year} cannot fill "
                                f"every open {level} site to its minimum utilization "
                                f"({floor:,.0f} needed)",
                                "lower min_utilization, or let a site close")
