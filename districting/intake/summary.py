"""One screen on a validated project: units, students, sites, capacity, graph."""

from __future__ import annotations

import io as _io

import numpy as np

from .. import rules
from ..travel.measures import measure_line
from .records import Inputs
from .report import plural

__all__ = ["check_summary"]


def check_summary(inputs: Inputs) -> str:
    """One screen on a validated project: units, students, sites, capacity, graph."""
    s = inputs.settings
    units, sites, adj = inputs.units, inputs.sites, inputs.adjacency
    crs = inputs.crs
    crs_text = "no CRS" if crs is None else f"{crs.to_string()} ({crs.name})"
    area = float(units.geometry.area.sum()) / 1e6
    out = _io.StringIO()

    def w(line: str = "") -> None:
        out.write(line + "\n")

    w(f"{s.name}  ({s.path.name})")
    w(f"  CRS {crs_text}; plan year {s.plan_year}; years {', '.join(map(str, s.years))}")
    comps = adj.n_components
    sizes = np.bincount(adj.components()) if adj.n else np.zeros(0, int)
    touch = {"rook": "sharing a stretch of border", "queen": "sharing a border or a corner"}
    joined = ("all joined into one town" if comps == 1 else
              f"in {comps} separate groups of {', '.join(map(str, sorted(sizes, reverse=True)))}"
              " units")
    islands = len(adj.islands())
    alone = f"{plural(islands, 'unit')} with no neighbour" if islands else "none alone"
    w(f"  {len(units):,} planning units, {area:,.1f} km2")
    w(f"  {adj.n_edges:,} pairs of neighbouring units "
      f"({touch.get(adj.contiguity, adj.contiguity)}), {joined}; {alone}")
    net = inputs.streets
    streets = "" if net is None else (
        f"; streets: {len(net.seg_a):,} segments, "
        + ("all joined" if net.n_pieces == 1 else f"in {net.n_pieces} separate pieces"))
    w(f"  {measure_line(s.solve.travel, table=inputs.travel is not None)} (the default of "
      f"runs){streets}")
    years = s.all_years
    head = f"  {'':<14}" + "".join(f"{y:>9}" for y in years)
    w()
    w("Students (current year first)")
    w(head)
    for level in s.levels:
        w(f"  {level:<14}" + "".join(f"{v:>9,.0f}" for v in inputs.counts[level].sum(axis=1)))
    w()
    w("Sites (count by status; capacity by status)")
    for level in s.levels:
        lv = sites[sites["level"] == level]
        counts = lv["status"].value_counts()
        status = ", ".join(f"{int(counts[st])} {st}" for st in rules.SITE_STATUSES if st in counts)
        cap = lv.groupby("status")["capacity"].sum()
        room = ", ".join(f"{st} {cap[st]:,.0f}" for st in rules.SITE_STATUSES if st in cap)
        w(f"  {level:<14}{plural(len(lv), 'site')} ({status or 'none'}); "
          f"capacity {room or '-'}")
    w()
    w("Capacity vs students (capacity x max utilization of sites that may take students)")
    w(head)
    for level in s.levels:
        room = _room_by_year(inputs, level)
        util = inputs.counts[level].sum(axis=1) / np.where(room > 0, room, np.nan)
        w(f"  {level:<14}" + "".join(f"{r:>9,.0f}" for r in room))
        w(f"  {'  utilization':<14}" + "".join(
            f"{'-':>9}" if not np.isfinite(u) else f"{100 * u:>8.0f}%" for u in util))
    return out.getvalue().rstrip("\n")


def _room_by_year(inputs: Inputs, level: str) -> np.ndarray:
    """Usable capacity per row of ``all_years``: today's sites now, the plan's afterwards."""
    s = inputs.settings
    lv = inputs.sites[inputs.sites["level"] == level]
    cap = lv["capacity"].to_numpy(float)
    max_u = rules.site_band(lv["max_util"].to_numpy(float), s.solve.max_utilization)
    status = lv["status"].to_numpy(dtype=object)
    today = rules.usable_capacity(cap, max_u, rules.open_today(status),
                                  np.zeros(len(lv), bool), None)
    later = rules.usable_capacity(cap, max_u, rules.open_in_plan(status),
                                  rules.is_candidate(status), s.solve.open_count.get(level))
    return np.array([today] + [later] * len(s.years))
