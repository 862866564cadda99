"""The report tables of a plan, built once: exports, the packet and the workbench use them.

:func:`school_table` (one row per school), :func:`unit_table` (one row per planning unit),
:func:`zones_frame` and :func:`changed_frame` (dissolved), :func:`band_flags` (words per
school for years outside the utilization band) and :func:`headline` (the figures a
results panel shows).
"""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pandas as pd

from .. import rules
from ..study import Outcome
from .practice import practice_columns
from .wording import no_plan_error, status_words
from .zones import changed_areas, dissolve_zones

__all__ = ["require_plan", "plan_years", "plan_status", "school_table", "unit_table",
           "zones_frame", "changed_frame", "band_flags", "headline"]

_TOL = rules.TOLERANCE  # students: a load within this of a band edge is on the edge


def require_plan(outcome: Outcome, what: str) -> None:
    """Raise a clear ValueError when ``outcome`` has no valid plan to show."""
    if not outcome.plan.feasible:
        raise ValueError(no_plan_error(
            f"{what}: option {outcome.name or '(unsaved)'!r} ({outcome.level})",
            outcome.plan.message, "Run it again with other settings."))


def plan_years(outcome: Outcome) -> list[int]:
    """The projected years of the plan, in order."""
    return sorted(int(y) for y in outcome.problem.years)


def plan_status(outcome: Outcome) -> list[str]:
    """Each school's status in the plan year (the run's edits over the project's)."""
    st = outcome.settings.status
    return [st.get(sid, s) for sid, s in zip(outcome.site_ids, outcome.sites["status"],
                                             strict=True)]


def school_table(outcome: Outcome) -> pd.DataFrame:
    """One row per school of the level, in the problem's site order.

    Columns: ``site_id``, ``name``, ``status`` (in the plan year), ``open``, ``capacity``,
    ``min_util``, ``max_util`` (the band), ``units``, ``students_now`` (the current year in
    today's zones), ``students_<year>`` and ``util_<year>`` for each projected year (the
    proposed zones), ``flag_<year>`` ("over" above the band, "under" below it, "" inside),
    ``moved_in``, ``moved_out`` (plan-year students), ``mean_distance_m``,
    ``max_distance_m`` and ``out_of_band``; then the walk, transport and group-share
    columns of :func:`~districting.outputs.practice.practice_columns`.
    """
    p, m = outcome.problem, outcome.metrics
    a = np.asarray(outcome.assignment)
    inputs = outcome.inputs
    now_row = inputs.year_row(inputs.settings.current_year)
    now_counts = inputs.counts[outcome.level][now_row]
    cur = p.current
    has_cur = cur >= 0
    students_now = np.bincount(cur[has_cur], weights=now_counts[has_cur], minlength=p.n_sites)
    cap = np.full(p.n_sites, np.nan) if p.capacity is None else p.capacity
    opened = np.asarray(outcome.plan.open_sites, bool)
    table = pd.DataFrame({
        "site_id": outcome.site_ids,
        "name": outcome.sites["name"].astype(str).to_list(),
        "status": plan_status(outcome),
        "open": opened,
        "capacity": cap,
        "min_util": p.min_util,
        "max_util": p.max_util,
        "units": np.bincount(a[a >= 0], minlength=p.n_sites),
        "students_now": students_now,
    })
    row_of = {int(y): t for t, y in enumerate(p.years)}
    for y in plan_years(outcome):
        t = row_of[y]
        load = m.load[t]
        table[f"students_{y}"] = load
        table[f"util_{y}"] = m.utilization[t]
        over = load > p.max_util * cap + _TOL
        under = opened & (load < p.min_util * cap - _TOL)
        table[f"flag_{y}"] = np.where(over, "over", np.where(under, "under", ""))
    table["moved_in"] = m.moved_in
    table["moved_out"] = m.moved_out
    table["mean_distance_m"] = m.mean_distance
    table["max_distance_m"] = m.max_distance
    table["out_of_band"] = m.out_of_band
    return pd.concat([table, practice_columns(outcome, plan_years(outcome))], axis=1)


def unit_table(outcome: Outcome) -> pd.DataFrame:
    """One row per planning unit: ``unit_id``, ``current``, ``proposed`` (site ids),
    ``changed``, ``students_<plan year>`` and ``distance_m`` (unit point to its proposed
    school; the travel measure of the run)."""
    p = outcome.problem
    a = np.asarray(outcome.assignment)
    ok = a >= 0
    distance = np.full(p.n_units, np.nan)
    distance[ok] = p.travel[np.flatnonzero(ok), a[ok]]
    cur = p.current
    return pd.DataFrame({
        "unit_id": outcome.unit_ids,
        "current": outcome.site_id_of(cur),
        "proposed": outcome.site_id_of(a),
        "changed": (cur >= 0) & ok & (a != cur),
        f"students_{outcome.settings.plan_year}": p.demand[0],
        "distance_m": distance,
    })


def zones_frame(outcome: Outcome, current: bool = False) -> gpd.GeoDataFrame:
    """The proposed zones (or today's with ``current=True``) dissolved, one row per school
    with a zone, joined to :func:`school_table` (the proposed figures either way)."""
    assignment = outcome.current if current else outcome.assignment
    units = outcome.inputs.units[["unit_id", "geometry"]]
    ids = outcome.site_id_of(np.asarray(assignment))
    zones = dissolve_zones(units, ids, site_ids=outcome.site_ids,
                           coverage=outcome.inputs.units_coverage)
    zones = zones.drop(columns=[c for c in zones.columns if c not in ("site_id", "n_parts",
                                                                      "geometry")])
    table = school_table(outcome)
    merged = zones.merge(table, on="site_id", how="left", sort=False)
    cols = ["site_id", "name", *[c for c in merged.columns if c not in
                                 ("site_id", "name", "geometry")], "geometry"]
    return gpd.GeoDataFrame(merged[cols], geometry="geometry", crs=outcome.inputs.crs)


def changed_frame(outcome: Outcome) -> gpd.GeoDataFrame:
    """Units whose school changes, dissolved by (from, to) pair, with plan-year students
    (``students``) and the number of units per pair."""
    ut = unit_table(outcome)
    units = outcome.inputs.units[["unit_id", "geometry"]]
    students = ut[f"students_{outcome.settings.plan_year}"].to_numpy()
    return changed_areas(units, ut["current"].to_numpy(), ut["proposed"].to_numpy(),
                         counts=students, coverage=outcome.inputs.units_coverage)


def band_flags(load: np.ndarray, problem, years, open_sites) -> list[str]:
    """Words per site for years outside the utilization band, e.g. 'over 100% in 2029'."""
    cap = problem.capacity
    flags = []
    for j in range(load.shape[1]):  # one pass per school: a handful per level
        has = bool(load[:, j].any())
        if cap is None:
            flags.append("")
        elif not open_sites[j]:
            flags.append("students at a school that is not open" if has else "")
        elif cap[j] <= 0:
            flags.append("students at a school with no capacity" if has else "")
        else:
            over = [str(y) for y, v in zip(years, load[:, j], strict=True)
                    if v > problem.max_util[j] * cap[j] + _TOL]
            under = [str(y) for y, v in zip(years, load[:, j], strict=True)
                     if v < problem.min_util[j] * cap[j] - _TOL]
            words = []
            if over:
                words.append(f"over {problem.max_util[j]:.0%} in {', '.join(sorted(over))}")
            if under:
                words.append(f"under {problem.min_util[j]:.0%} in {', '.join(sorted(under))}")
            flags.append("; ".join(words))
    return flags


def headline(outcome: Outcome) -> dict:
    """Headline figures of a plan (what the results panel and comparisons show)."""
    met, plan = outcome.metrics, outcome.plan
    return {
        "option": outcome.name or "unsaved result",
        "level": outcome.level,
        "plan_year": int(outcome.settings.plan_year),
        "status": plan.status,
        "status_words": status_words(plan),
        "gap": float(plan.gap),
        "students_moved": float(met.students_moved),
        "units_moved": int(met.units_moved),
        "mean_km": met.overall_mean_distance / 1000.0,
        "max_km": met.overall_max_distance / 1000.0,
        "schools_out_of_band": int(met.out_of_band.sum()),
        "students": float(outcome.problem.demand[0].sum()),
    }
