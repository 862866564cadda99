"""Rebalance: bring a plan's loads back into every site's band, keeping zones connected.

Boundary moves that keep every zone connected bring capacity and floors back in band in
every projected year; when no single move lowers the total excess, a move that keeps it
equal is taken towards the nearest zone with room (an ejection chain along the zone graph,
as in the ejection-chain methods of Glover, "Ejection chains, reference structures and
alternating path methods for traveling salesman problems", Discrete Applied Mathematics
65, 1996). Locked units and sites' root units never move. Pure numpy plus breadth-first
searches.
"""

from __future__ import annotations

import numpy as np

from ..problem import Problem
from ..rules import band_excess
from .connectivity import UnitGraph, stays_connected, zone_loads, zone_touch
from .moves import TOL, branch, fixed_units, load_limits, moved_delta
from .zone_cuts import ZoneCuts

__all__ = ["rebalance"]

_MAX_MOVES = 6  # per unit and call of rebalance: chains of moves cannot cycle for ever


def _zone_distances(a: np.ndarray, graph: UnitGraph, m: int, sources: np.ndarray) -> np.ndarray:
    """Hops in the zone graph from each site to the nearest site in ``sources``."""
    touch = zone_touch(graph, a, m) > 0
    dist = np.full(m, np.inf)
    frontier = np.asarray(sources, bool).copy()
    hops = 0
    while frontier.any():
        dist[frontier] = hops
        hops += 1
        frontier = touch[frontier].any(axis=0) & ~np.isfinite(dist)
    return dist


def rebalance(problem: Problem, graph: UnitGraph, assignment: np.ndarray,
              max_steps: int | None = None) -> np.ndarray | None:
    """Bring every school inside its band in every year by moves that keep zones connected.

    Each step looks at every unit with students on a zone border and its move to the
    neighbouring zone: the move that lowers the total excess (students over caps plus
    students missing below floors, summed over years) the most, cheapest first, is made. When
    no move lowers it, a move out of an over-full zone that keeps the excess equal is made
    towards a zone nearer (in zone-graph hops) to one with room, cheapest first -- the
    excess travels along the chain until a zone can take it. When every such move would
    cut its zone, the unit moves together with the branch it would cut off. A unit moves at
    most ``_MAX_MOVES`` times per call, which ends the search. Returns None when the excess
    cannot be cleared.
    """
    a = np.asarray(assignment, dtype=np.int64).copy()
    if problem.capacity is None and problem.max_moved is None:
        return a
    n, m = problem.n_units, problem.n_sites
    hi, lo = load_limits(problem, a)
    load = zone_loads(problem, a)
    dem = problem.demand
    wc = problem.weighted_cost
    allowed = problem.allowed
    can = ~fixed_units(problem)  # empty units move too: they open a border to a zone
    moved_units = np.zeros(n, np.int64)  # moves per unit: a few, so chains cannot cycle
    moved = float(dem[0][(problem.current >= 0) & (a != problem.current)].sum())
    cap_moved = np.inf if problem.max_moved is None else problem.max_moved
    nbrs = graph.lists
    al = a.tolist()
    cuts = ZoneCuts(al, nbrs)
    steps = max_steps or 4 * n
    for _ in range(steps):
        exc = band_excess(load, hi, lo)
        if exc.sum() <= TOL:
            return np.array(al, dtype=np.int64)
        av = np.array(al, dtype=np.int64)
        u, v = graph.u, graph.v
        sel = (av[u] != av[v]) & can[u] & (moved_units[u] < _MAX_MOVES)
        cu, cj, ck = u[sel], av[u[sel]], av[v[sel]]
        ok = allowed[cu, ck]
        cu, cj, ck = cu[ok], cj[ok], ck[ok]
        if not len(cu):
            dm_chain = _relieve(problem, graph, al, load, hi, lo, can, exc, cap_moved - moved)
            if dm_chain is None:
                return None
            moved += dm_chain
            cuts.changed()
            continue
        d = dem[:, cu]
        lj, lk = load[:, cj] - d, load[:, ck] + d
        new = band_excess(lj, hi[cj], lo[cj]) + band_excess(lk, hi[ck], lo[ck])
        dv = new - exc[cj] - exc[ck]
        dc = wc[cu, ck] - wc[cu, cj]
        dm = moved_delta(problem, cu, cj, ck)
        fine = moved + dm <= cap_moved + TOL
        better = fine & (dv < -TOL)
        idx = np.flatnonzero(better)
        order = idx[np.argsort(dc[idx] / -dv[idx], kind="stable")][:2000]  # cost per student
        c = next((c for c in order.tolist() if cuts.keeps(int(cu[c]), int(cj[c]), av)), None)
        if c is None:
            # sideways moves (when no move lowers the excess, or each would cut a zone)
            over = (load > hi + TOL).any(axis=0)
            room = (load < hi - TOL).all(axis=0)
            dist = _zone_distances(av, graph, m, room & ~over)
            side = fine & ~better & (dv <= TOL) & over[cj] & (dist[ck] < dist[cj])
            idx = np.flatnonzero(side)
            side_order = idx[np.lexsort((dc[idx], dist[ck[idx]]))][:2000]
            order = np.concatenate([order, side_order])
            c = next((c for c in side_order.tolist()
                      if cuts.keeps(int(cu[c]), int(cj[c]), av)), None)
        if c is not None:
            i, j, k = int(cu[c]), int(cj[c]), int(ck[c])
            al[i] = k
            cuts.changed(j, k)
            load[:, j] -= dem[:, i]
            load[:, k] += dem[:, i]
            moved += float(dm[c])
            moved_units[i] += 1
        else:
            # every move would cut its zone: move a unit with the branch it would cut off,
            # first where that lowers the excess, then sideways towards room
            tries = order[:300].tolist()
            for c, sideways in [(c, False) for c in tries] + [(c, True) for c in tries]:
                i, j, k = int(cu[c]), int(cj[c]), int(ck[c])
                if sideways and not (over[j] and dist[k] < dist[j]):
                    continue
                if problem.roots is None or problem.roots[j] < 0:
                    continue
                br = branch(i, j, al, nbrs, int(problem.roots[j]))
                if (~can[br]).any() or not allowed[br, k].all():
                    continue
                d = dem[:, br].sum(axis=1)
                drop = band_excess((load[:, j] - d)[:, None], hi[[j]], lo[[j]])[0] + band_excess(
                    (load[:, k] + d)[:, None], hi[[k]], lo[[k]])[0] - exc[j] - exc[k]
                dmb = float(moved_delta(problem, br, np.full(len(br), j),
                                         np.full(len(br), k)).sum())
                if drop < (TOL if sideways else -TOL) and moved + dmb <= cap_moved + TOL:
                    for x in br.tolist():
                        al[x] = k
                    cuts.changed(j, k)
                    load[:, j] -= d
                    load[:, k] += d
                    moved += dmb
                    moved_units[br] += 1
                    break
            else:
                # no single move or branch works: an ejection chain through zones in band
                dm_chain = _relieve(problem, graph, al, load, hi, lo, can, exc,
                                    cap_moved - moved)
                if dm_chain is None:
                    return None
                moved += dm_chain
                cuts.changed()
    return None


def _relieve(problem: Problem, graph: UnitGraph, al: list[int], load: np.ndarray,
             hi: np.ndarray, lo: np.ndarray, can: np.ndarray, exc: np.ndarray,
             spare_moved: float) -> float | None:
    """Apply the cheapest ejection chain (:func:`_eject`) for the zone with the largest
    excess that has one, in place on ``al`` and ``load``; the change in students moved, or
    None when no zone out of band has a chain."""
    dem = problem.demand
    for z in np.argsort(-exc, kind="stable").tolist():
        if exc[z] <= TOL:
            break
        push = bool((load[:, z] > hi[z] + TOL).any())
        chain = _eject(problem, graph, al, load, hi, lo, can, z, push, spare_moved)
        if chain is None:
            continue
        units = np.array([c[0] for c in chain])
        frm = np.array([c[1] for c in chain])
        to = np.array([c[2] for c in chain])
        for i, _, t in chain:
            al[i] = t
        np.add.at(load.T, to, dem[:, units].T)
        np.subtract.at(load.T, frm, dem[:, units].T)
        return float(moved_delta(problem, units, frm, to).sum())
    return None


def _eject(problem: Problem, graph: UnitGraph, al: list[int], load: np.ndarray,
           hi: np.ndarray, lo: np.ndarray, can: np.ndarray, z0: int, push: bool,
           spare_moved: float, depth: int = 8, beam: int = 24,
           branch: int = 3) -> list[tuple[int, int, int]] | None:
    """A chain of single-unit moves that lowers zone z0's excess and leaves every other
    zone it passes through inside its band (an ejection chain, Glover 1996).

    ``push`` (z0 over a cap): z0 hands a border unit to a neighbour, which, when that puts
    it out of band, hands on a unit of its own, and so on until a zone can take what it
    receives. Otherwise (z0 under a floor) the chain pulls units towards z0 the same way.
    Every move keeps both zones connected (checked with the earlier moves of the chain in
    place) and never uses a unit twice. Breadth-first by chain length, keeping the
    ``beam`` cheapest partial chains per length and ``branch`` cheapest moves per zone and
    partial chain. Returns [(unit, from, to), ...] or None.
    """
    dem, wc, allowed = problem.demand, problem.weighted_cost, problem.allowed
    nbrs = graph.lists
    av = np.array(al, dtype=np.int64)
    u, v = graph.u, graph.v
    sel = (av[u] != av[v]) & can[u] & allowed[u, av[v]] & (dem[:, u].sum(axis=0) > 0)
    cu, cf, ct = u[sel], av[u[sel]], av[v[sel]]
    key = cf if push else ct  # the chain's current zone: the one a unit leaves (push)
    order = np.argsort(key, kind="stable")
    cu, cf, ct, key = cu[order], cf[order], ct[order], key[order]
    starts = np.searchsorted(key, np.arange(problem.n_sites + 1))
    dc_all = wc[cu, ct] - wc[cu, cf]

    def in_band(x: np.ndarray, z: int) -> bool:
        return bool((x <= hi[z] + TOL).all() and (x >= lo[z] - TOL).all())

    # state: (cost, moves, zone, change of the zone's load by the chain so far)
    states = [(0.0, [], z0, np.zeros(dem.shape[0]))]
    for _ in range(depth):
        found: list[tuple[float, list]] = []
        nxt = []
        for cost, moves, z, carry in states:
            for i, _, t, _ in moves:
                al[i] = t
            used = {m_[0] for m_ in moves}
            zones = {m_[1] for m_ in moves} | {m_[2] for m_ in moves} | {z0}
            lo_r, hi_r = starts[z], starts[z + 1]
            rows = np.arange(lo_r, hi_r)
            other = ct[rows] if push else cf[rows]
            d = dem[:, cu[rows]]
            new_z = (load[:, [z]] + carry[:, None]) + (-d if push else d)
            if z == z0:
                ok = band_excess(new_z, hi[[z]], lo[[z]]) < band_excess(
                    (load[:, [z]] + carry[:, None]), hi[[z]], lo[[z]]) - TOL
            else:
                ok = ((new_z <= hi[z] + TOL) & (new_z >= lo[z] - TOL)).all(axis=0)
            rows = rows[ok & ~np.isin(other, list(zones))]
            rows = rows[np.argsort(dc_all[rows], kind="stable")]
            per: dict[int, int] = {}
            for r in rows.tolist():
                i, f, t = int(cu[r]), int(cf[r]), int(ct[r])
                w = t if push else f
                if per.get(w, 0) >= branch or i in used or al[i] != f:
                    continue
                if not any(al[x] == t for x in nbrs[i]) or not stays_connected(i, f, al, nbrs):
                    continue
                dm = float(moved_delta(problem, np.array([i]), np.array([f]),
                                        np.array([t]))[0])
                if sum(m_[3] for m_ in moves) + dm > spare_moved + TOL:
                    continue
                per[w] = per.get(w, 0) + 1
                chain = [*moves, (i, f, t, dm)]
                dw = dem[:, i] if push else -dem[:, i]
                if in_band(load[:, w] + dw, w):
                    found.append((cost + float(dc_all[r]), chain))
                else:
                    nxt.append((cost + float(dc_all[r]), chain, w, dw))
            for i, f, _, _ in moves[::-1]:
                al[i] = f
        if found:
            best = min(found, key=lambda x: x[0])[1]
            return [(i, f, t) for i, f, t, _ in best]
        if not nxt:
            return None
        nxt.sort(key=lambda x: x[0])
        states = nxt[:beam]
    return None
