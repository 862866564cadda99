"""Large-neighbourhood search: re-solve a few touching zones exactly, the rest held fixed.

Method (large neighbourhood search: Shaw, "Using constraint programming and local search
methods to solve vehicle routing problems", CP-98, LNCS 1520, 1998; Pisinger & Ropke,
"Large neighborhood search", Handbook of Metaheuristics, 2010): a neighbourhood is a seed
zone of the current plan and the zones that touch it most. Its units and its sites form a
sub-problem (:func:`subproblem`) with the same costs, bands, locks and forbidden pairs,
solved to optimality by the exact engine with the current plan as its start. A cheaper
sub-plan replaces the old one. The whole plan stays valid: every unit of those zones is in
the sub-problem, so each site's load is the sub-problem's; zones outside do not change;
and a zone connected in the sub-problem's graph (the units of the neighbourhood) is
connected in the whole graph. Neighbourhoods are revisited only after a zone in them
changed; the search grows the neighbourhoods when a pass over every seed finds nothing,
and ends after the largest size or at the deadline.

It finds better plans quickly when the whole model is too large for each exact round; it
proves nothing (the bound comes from the exact side).
"""

from __future__ import annotations

import time
from collections.abc import Callable

import numpy as np

from ..plan import Plan
from ..problem import Problem
from ..rules import transported
from .connectivity import UnitGraph, zone_touch
from .tuning import LNS_SECONDS_PER_ZONE, LNS_SIZES

__all__ = ["subproblem", "reoptimise", "ExactSolve"]

_TOL = 1e-9


def subproblem(problem: Problem, assignment: np.ndarray,
               sites: np.ndarray) -> tuple[Problem, np.ndarray]:
    """The problem restricted to ``sites`` and the units a plan assigns to them.

    Returns (sub-problem, unit indices). The sub-problem opens every one of its sites (they
    are open in the plan); a unit whose site today is outside ``sites`` counts as moved in
    every sub-plan, so its stability cost is a constant left out and its students come off
    the moved-students limit together with those moved outside the neighbourhood. Walk zones
    and the transport charge carry over; students beyond walking distance outside the
    neighbourhood come off the transport limit.
    """
    a = np.asarray(assignment, np.int64)
    sites = np.asarray(sites, np.int64)
    n, m = problem.n_units, problem.n_sites
    inside = np.isin(a, sites)
    units = np.flatnonzero(inside)
    umap = np.full(n, -1, np.int64)
    umap[units] = np.arange(len(units))
    smap = np.full(m, -1, np.int64)
    smap[sites] = np.arange(len(sites))
    edges = None
    if problem.edges is not None:
        e = problem.edges
        e = e[inside[e[:, 0]] & inside[e[:, 1]]]
        edges = umap[e]
    roots = None
    if problem.roots is not None:
        r = problem.roots[sites]
        roots = np.where(r >= 0, umap[np.maximum(r, 0)], -1)
    lk = problem.locks[units]
    locks = {int(i): int(smap[j]) for i, j in zip(np.flatnonzero(lk >= 0), lk[lk >= 0],
                                                  strict=True)}
    cur = problem.current
    cur_u = cur[units]
    cur_sub = np.where(cur_u >= 0, smap[np.maximum(cur_u, 0)], -1)
    max_moved = None
    if problem.max_moved is not None:
        d0 = problem.demand[0]
        moved_out = float(d0[~inside & (cur >= 0) & (a != cur)].sum())
        moved_const = float(d0[units][(cur_u >= 0) & (cur_sub < 0)].sum())
        max_moved = problem.max_moved - moved_out - moved_const
    walk, max_transported = None, None
    if problem.walk is not None:
        walk = problem.walk[np.ix_(units, sites)]
        if problem.max_transported is not None:
            # students beyond walking distance in the zones outside stay as they are
            outside = np.ones(m, bool)
            outside[sites] = False
            max_transported = problem.max_transported - float(
                transported(problem, a)[outside].sum())
    anchor = None
    if problem.anchor is not None:
        anc_u = problem.anchor[units]
        anchor = np.where(anc_u >= 0, smap[np.maximum(anc_u, 0)], -1)
    sub = Problem.from_arrays(
        problem.cost[np.ix_(units, sites)], problem.demand[:, units],
        capacity=None if problem.capacity is None else problem.capacity[sites],
        edges=edges, roots=roots, locks=locks,
        max_util=problem.max_util[sites], min_util=problem.min_util[sites],
        forbidden=problem.forbidden[np.ix_(units, sites)], current=cur_sub,
        stability_weight=problem.stability_weight, max_moved=max_moved,
        years=problem.years, level=problem.level,
        feeder_groups=None if problem.feeder_groups is None else problem.feeder_groups[units],
        feeder_rule=problem.feeder_rule, feeder_splits=problem.feeder_splits,
        anchor=anchor, anchor_weight=problem.anchor_weight if anchor is not None else 0.0,
        walk=walk, max_transported=max_transported,
        transport_weight=problem.transport_weight if walk is not None else 0.0)
    return sub, units


#: An exact solve of a sub-problem: (problem, gap, time limit s, start, cancel) -> Plan.
ExactSolve = Callable[[Problem, float, float | None, np.ndarray | None,
                       Callable[[], bool] | None], Plan]


def reoptimise(problem: Problem, graph: UnitGraph, assignment: np.ndarray,
               solve_exact: ExactSolve, deadline: float | None = None, *,
               sizes: tuple[int, ...] = LNS_SIZES,
               gap: float = 1e-4, on_better: Callable[[np.ndarray], None] | None = None,
               cancel: Callable[[], bool] | None = None) -> np.ndarray:
    """Improve a valid plan by exact re-solves of neighbourhoods of a few zones.

    Passes over every zone as seed with neighbourhoods of ``sizes[0]`` zones until a pass
    finds nothing better, then with the next size (larger neighbourhoods reach moves that
    need several zones to give way, and cost more per solve: each solve gets at most
    ``LNS_SECONDS_PER_ZONE`` s per zone). ``solve_exact`` solves a neighbourhood exactly
    (the session passes :func:`districting.engine.session.exact_subsolve`; passed in so
    this module does not depend on the session that calls it). ``deadline`` is a
    :func:`time.monotonic` time; ``on_better`` gets every better plan. Returns the best
    plan found (a copy of ``assignment`` when none was).
    """
    best = np.asarray(assignment, np.int64).copy()
    m = problem.n_sites
    wc = problem.weighted_cost
    rows = np.arange(problem.n_units)
    cost = float(wc[rows, best].sum())
    clean: set[frozenset[int]] = set()  # neighbourhoods solved since their zones changed

    def left() -> float:
        return np.inf if deadline is None else deadline - time.monotonic()

    for size in sizes:
        if size > m:
            break
        improved = True
        while improved:
            improved = False
            touch = zone_touch(graph, best, m)
            used = np.flatnonzero(np.bincount(best, minlength=m) > 0)
            for z in used.tolist():
                if left() <= 0 or (cancel is not None and cancel()):
                    return best
                nb = np.flatnonzero(touch[z] > 0)
                nb = nb[np.argsort(-touch[z, nb], kind="stable")][: size - 1]
                sites = np.sort(np.append(nb, z))
                key = frozenset(sites.tolist())
                if len(sites) < 2 or key in clean:
                    continue
                sub, units = subproblem(problem, best, sites)
                smap = np.full(m, -1, np.int64)
                smap[sites] = np.arange(len(sites))
                limit = min(LNS_SECONDS_PER_ZONE * size, left())
                plan = solve_exact(sub, gap, limit, smap[best[units]], cancel)
                if plan.status == "optimal":
                    clean.add(key)
                if not plan.feasible:
                    continue
                new = best.copy()
                new[units] = sites[plan.assignment]
                new_cost = float(wc[rows, new].sum())
                if new_cost < cost - _TOL * abs(cost):
                    best, cost, improved = new, new_cost, True
                    clean = {k for k in clean if not (k & key) or k == key}
                    touch = zone_touch(graph, best, m)
                    if on_better is not None:
                        on_better(best)
    return best
