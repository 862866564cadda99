"""Improve: lower the cost of a valid plan by moves and swaps that keep it valid.

The exact rounds hand back MIP answers that are nearly optimal but break contiguity in a few
dozen small pieces (when capacity binds, the MIP fills a school with a scatter of small
boundary units). :mod:`districting.engine.repair` joins the pieces to zones and
:func:`districting.engine.rebalance.rebalance` brings the bands back; then :func:`improve`
makes cost-lowering single moves and (optionally) pair swaps across zone borders that keep
every constraint and contiguity (the classic relocate / exchange neighbourhoods of local
search for the generalized assignment problem).

All loads are kept for every demand row, so capacity and floors hold in every projected
year. Locked units and sites' root units never move. Pure numpy plus breadth-first searches.
"""

from __future__ import annotations

import numpy as np

from ..problem import Problem
from .connectivity import UnitGraph, stays_connected, zone_loads
from .moves import TOL, fixed_units, load_limits, moved_delta, reach

__all__ = ["improve", "relocate"]


def _zone_connected(j: int, al: list[int], nbrs: list[list[int]], start: int) -> bool:
    """True when every unit of zone j is reachable from ``start`` inside zone j."""
    return len(reach(j, al, nbrs, start)) == sum(1 for x in al if x == j)


def _feasible_loads(lj, lk, hj, hk, loj, lok) -> bool:
    return bool((lj <= hj + TOL).all() and (lk <= hk + TOL).all()
                and (lj >= loj - TOL).all() and (lk >= lok - TOL).all())


def improve(problem: Problem, graph: UnitGraph, assignment: np.ndarray,
            passes: int = 6, top: int = 6, exchange: bool = True) -> np.ndarray:
    """Lower the cost of a valid plan by relocate and exchange moves that keep it valid.

    Relocate: a border unit moves to the neighbouring zone when that is cheaper and every
    constraint holds (best gain first; zone j must stay connected without the unit).
    Exchange (when ``exchange``): for each pair of touching zones, the ``top`` most promising
    border units of each side are tried in pairs; a swap is made when it is cheaper, both
    zones stay in band in every year and both stay connected. Repeats up to ``passes``
    times or until nothing improves.
    """
    a = np.asarray(assignment, dtype=np.int64).copy()
    hi, lo = load_limits(problem, a)
    load = zone_loads(problem, a)
    dem = problem.demand
    wc = problem.weighted_cost
    allowed = problem.allowed
    can = ~fixed_units(problem)
    nbrs = graph.lists
    cap_moved = np.inf if problem.max_moved is None else problem.max_moved
    moved = float(dem[0][(problem.current >= 0) & (a != problem.current)].sum())
    roots = problem.roots
    for _ in range(passes):
        improved = False
        av = a
        u, v = graph.u, graph.v
        sel = (av[u] != av[v]) & can[u]
        cu, cj, ck = u[sel], av[u[sel]], av[v[sel]]
        ok = allowed[cu, ck]
        cu, cj, ck = cu[ok], cj[ok], ck[ok]
        gain = wc[cu, cj] - wc[cu, ck]
        al = a.tolist()
        # relocate
        for c in np.argsort(-gain, kind="stable").tolist():
            if gain[c] <= TOL:
                break
            i, j, k = int(cu[c]), int(cj[c]), int(ck[c])
            if al[i] != j or not any(al[w] == k for w in nbrs[i]):
                continue
            d = dem[:, i]
            dm = float(moved_delta(problem, np.array([i]), np.array([j]), np.array([k]))[0])
            if moved + dm > cap_moved + TOL:
                continue
            if not _feasible_loads(load[:, j] - d, load[:, k] + d, hi[j], hi[k], lo[j], lo[k]):
                continue
            if not stays_connected(i, j, al, nbrs):
                continue
            al[i] = k
            load[:, j] -= d
            load[:, k] += d
            moved += dm
            improved = True
        a = np.array(al, dtype=np.int64)
        if not exchange:
            if not improved:
                break
            continue
        # exchange between touching zones
        cand: dict[tuple[int, int], list[tuple[float, int]]] = {}
        for c in range(len(cu)):
            i, j, k = int(cu[c]), int(cj[c]), int(ck[c])
            if al[i] == j:
                cand.setdefault((j, k), []).append((float(gain[c]), i))
        for (j, k), side_a in cand.items():
            if j > k or (k, j) not in cand:
                continue
            side_a = sorted(set(side_a), reverse=True)[:top]
            side_b = sorted(set(cand[(k, j)]), reverse=True)[:top]
            best = None
            for ga, i in side_a:
                for gb, w in side_b:
                    g = ga + gb
                    if g <= TOL or (best is not None and g <= best[0]):
                        continue
                    if al[i] != j or al[w] != k:
                        continue
                    dd = dem[:, w] - dem[:, i]
                    if not _feasible_loads(load[:, j] + dd, load[:, k] - dd,
                                           hi[j], hi[k], lo[j], lo[k]):
                        continue
                    units = np.array([i, w])
                    dm = float(moved_delta(problem, units, np.array([j, k]),
                                            np.array([k, j])).sum())
                    if moved + dm > cap_moved + TOL:
                        continue
                    best = (g, i, w, dd, dm)
            if best is None:
                continue
            _, i, w, dd, dm = best
            al[i], al[w] = k, j
            rj = int(roots[j]) if roots is not None and roots[j] >= 0 else w
            rk = int(roots[k]) if roots is not None and roots[k] >= 0 else i
            if _zone_connected(j, al, nbrs, rj) and _zone_connected(k, al, nbrs, rk):
                load[:, j] += dd
                load[:, k] -= dd
                moved += dm
                improved = True
            else:
                al[i], al[w] = j, k
        a = np.array(al, dtype=np.int64)
        if not improved:
            break
    return a



def relocate(problem: Problem, graph: UnitGraph, assignment: np.ndarray,
             passes: int = 3) -> np.ndarray:
    """:func:`improve` with relocate moves only, in at most ``passes`` passes: the quick
    polish of each repaired answer between exact rounds."""
    return improve(problem, graph, assignment, passes=passes, exchange=False)
