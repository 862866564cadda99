"""A lower bound that sees connectivity: the Lagrangian bound over connected zones.

Relax only the assignment rows ``sum_j x[i, j] = 1`` with multipliers ``pi`` (free). When
every other row belongs to one site (its band in every demand row, its root, its locks, its
connectivity), the rest splits into one problem per site, the pricing problem of a zone
column (:mod:`districting.engine.connected_pricing`)::

    L(pi) = sum_i pi[i] + sum_j v_j(pi),   v_j(pi) = min over feasible connected zones Z
                                                    of sum_{i in Z} (w[i, j] - pi[i])

and ``L(pi) <= OPT`` for every ``pi``: the optimal plan's zones are feasible for each site's
problem, and at the plan the relaxed rows hold with equality (Geoffrion, "Lagrangean
relaxation for integer programming", Mathematical Programming Study 2, 1974). Any lower
bound ``b_j <= v_j`` keeps it valid, so a pricing cut short by the clock still counts.
At the duals of an LP whose other rows all belong to one site (the assignment LP with its
band, root and separator rows), ``L(pi)`` is at least that LP's value, since each site's
connected zones lie inside the LP's polytope of that site (Geoffrion's integrality
property); it is the Dantzig-Wolfe bound of the zone columns at those duals (Mehrotra,
Johnson & Nemhauser, Management Science 44(8), 1998, for districting columns). On the
demo's elementary level (14 schools, straight-line travel) the duals of the LP with root
separator cuts gave 8,026,301 where that LP gave 7,988,990, and the exact rounds needed
about 400 s to lift their bound as far (measured; see ``benchmarks/bench_zone_bound.py``).

It is not a stage of the solve session: run there after the root cuts with 30% of the time
left, it moved the elementary gap at 60 s from 3.81% to 3.61% (shortest travel) but from
2.57% to 2.69% with the charge per student moved, and left the 2,000 x 25 town at 10 s as
it was (the time it takes is time the exact rounds lift the bound in). It is the bound of
the zone columns (:mod:`districting.engine.columns`) and a measure of how far the LP is
from whole zones.

Rows that tie sites together (a count of open sites, the limit on students moved or
transported, feeder rules, group bands) are not relaxed here: :func:`decomposes` says
when the bound applies.
"""

from __future__ import annotations

import time
from dataclasses import dataclass

import numpy as np

from ..problem import Problem
from .connected_pricing import price_connected
from .connectivity import UnitGraph

__all__ = ["decomposes", "ZoneBound", "zone_bound"]


def decomposes(problem: Problem) -> bool:
    """True when every row but the assignment rows belongs to one site (see the module)."""
    return bool(
        problem.contiguous
        and problem.roots is not None
        and (problem.roots[~problem.closed_sites] >= 0).all()
        and not problem.candidates.any()
        and problem.max_moved is None
        and problem.max_transported is None
        and problem.feeder_rule == ""
        and (problem.groups is None or problem.group_band <= 0)
    )


@dataclass(frozen=True)
class ZoneBound:
    """``value``: L(pi); ``per_site``: each site's bound b_j (nan for closed sites)."""

    value: float
    per_site: np.ndarray
    seconds: float
    cut_short: int  # sites whose pricing the clock stopped before it was solved


def zone_bound(problem: Problem, graph: UnitGraph, pi: np.ndarray, *,
               time_limit: float | None = None, pool: dict | None = None) -> ZoneBound | None:
    """L(pi) for the multipliers ``pi`` (n,) of the assignment rows, or None when the
    problem does not decompose by site. Each site's pricing gets an equal share of the
    time left; one whose clock runs out counts with the bound it proved so far (at least
    its pricing LP's value)."""
    if not decomposes(problem):
        return None
    t0 = time.monotonic()
    pi = np.asarray(pi, float)
    w = np.where(problem.allowed, problem.weighted_cost, np.inf)
    sites = np.flatnonzero(~problem.closed_sites)
    per_site = np.full(problem.n_sites, np.nan)
    short = 0
    for k, j in enumerate(sites.tolist()):
        limit = None
        if time_limit is not None:
            limit = max(0.0, (time_limit - (time.monotonic() - t0)) / (len(sites) - k))
        priced = price_connected(problem, graph, j, w[:, j] - pi, exact=True,
                                 time_limit=limit, pool=pool)
        per_site[j] = priced.bound
        if not priced.zones or priced.bound < min(priced.values) - 1e-6 * abs(priced.bound):
            short += int(np.isfinite(priced.bound))
    value = float(pi.sum() + per_site[sites].sum())
    return ZoneBound(value, per_site, time.monotonic() - t0, short)
