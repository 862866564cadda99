"""Repair: turn an answer that breaks contiguity (or the bands) into a valid plan near it.

Units with no students are handed out again (they cost nothing, so the MIP places them at
random) (:func:`reassign_empty`), then disconnected pieces with students move into a
neighbouring zone that can take them, cheapest first (:func:`repair`). :func:`make_valid`
goes further: :func:`absorb` joins every piece to a zone even over capacity, then
:func:`districting.engine.rebalance.rebalance` brings the bands back and
:func:`districting.engine.improve.improve` lowers the cost.
"""

from __future__ import annotations

from collections import deque

import numpy as np

from ..problem import Problem
from .connectivity import (
    UnitGraph,
    attached_mask,
    free_units,
    main_labels,
    moved_students,
    zone_components,
    zone_loads,
)
from .improve import improve
from .moves import fixed_units
from .rebalance import rebalance

__all__ = ["reassign_empty", "repair", "absorb", "make_valid"]

_TOL = 1e-6


def reassign_empty(
    problem: Problem, graph: UnitGraph, assignment: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """Hand the units without students out again so that zones become connected.

    Units with students keep their site (so the objective, loads and moves are unchanged:
    empty units cost nothing). Empty units in a zone's root piece stay; the others are
    released. Each remaining piece with students is joined to its zone through a shortest
    path of released units that may use that site (breadth-first search); then the released
    units left are given to neighbouring zones by a multi-source breadth-first search.
    Returns the new assignment and a mask of units still cut from their zone's root piece.
    """
    a = np.asarray(assignment, dtype=np.int64).copy()
    n = graph.n
    labels = zone_components(graph, a)
    attached = attached_mask(a, labels, main_labels(problem, a, labels))
    free = free_units(problem) & ~attached
    if not free.any() and attached.all():
        return a, np.zeros(n, bool)
    allowed = problem.allowed
    b = a.copy()
    b[free] = -1
    nbrs = graph.lists
    # pieces with students that are cut off: join each through released units
    pieces_lab = zone_components(graph, np.where(attached, -1, b))
    cut_units = np.flatnonzero(pieces_lab >= 0)
    order = np.argsort(pieces_lab[cut_units], kind="stable")
    cut_units = cut_units[order]
    split = np.split(cut_units, np.flatnonzero(np.diff(pieces_lab[cut_units])) + 1)
    pieces = [p for p in split if len(p)]
    # larger pieces first; pieces that failed go first in the next try (paths compete)
    pieces.sort(key=lambda p: -float(problem.demand[:, p].sum()))
    best = None
    for _ in range(4):
        bl, att, failed = _hand_out(b, attached, pieces, nbrs, allowed)
        if best is None or len(failed) < best[2]:
            best = (bl, att, len(failed))
        if not failed:
            break
        first = {id(p) for p in failed}
        pieces = failed + [p for p in pieces if id(p) not in first]
    bl, att, _ = best
    b = np.array(bl, dtype=np.int64)
    still = b < 0
    b[still] = a[still]
    detached = ~np.array(att, bool)
    return b, detached


def _hand_out(b, attached, pieces, nbrs, allowed):
    """Join ``pieces`` in order, then fill the released units; returns lists and failures."""
    bl = b.tolist()
    att = attached.tolist()
    n = len(bl)
    failed = []
    for _ in range(2):
        left = []
        for piece in pieces:
            j = bl[int(piece[0])]
            if att[int(piece[0])]:
                continue
            if not _join(piece, j, bl, att, nbrs, allowed[:, j]):
                left.append(piece)
        failed = left
        if len(left) == len(pieces):
            break
        pieces = left
    # released units left over: nearest zone through released units (multi-source BFS)
    queue: deque[int] = deque(k for k in range(n) if att[k] and bl[k] >= 0)
    while queue:
        u = queue.popleft()
        j = bl[u]
        for w in nbrs[u]:
            if bl[w] == -1 and allowed[w, j]:
                bl[w] = j
                att[w] = True
                queue.append(w)
    if all(att):
        failed = []
    elif not failed:
        failed = [p for p in pieces if not att[int(p[0])]]
    return bl, att, failed


def _join(piece, j, bl, att, nbrs, ok_j) -> bool:
    """Shortest path from ``piece`` to zone j's attached part through released units."""
    parent: dict[int, int] = {int(k): -1 for k in piece}
    queue = deque(parent)
    while queue:
        u = queue.popleft()
        for w in nbrs[u]:
            if w in parent:
                continue
            if bl[w] == j and att[w]:
                k = u
                while k != -1:  # claim the path back to the piece
                    bl[k] = j
                    att[k] = True
                    k = parent[k]
                for k in piece:
                    att[int(k)] = True
                return True
            if bl[w] == -1 and ok_j[w]:
                parent[w] = u
                queue.append(w)
    return False


class _Loads:
    """Incremental loads and moved students for repair and local search."""

    def __init__(self, problem: Problem, a: np.ndarray) -> None:
        self.p = problem
        self.load = zone_loads(problem, a)
        self.moved = moved_students(problem, a)
        cap = problem.capacity
        self.hi = None if cap is None else problem.max_util * cap
        self.lo = None if cap is None else problem.min_util * cap

    def can_move(self, units: np.ndarray, frm: int, to: int) -> bool:
        d = self.p.demand[:, units].sum(axis=1)
        if self.hi is not None:
            if np.any(self.load[:, to] + d > self.hi[to] + _TOL):
                return False
            if np.any(self.load[:, frm] - d < self.lo[frm] - _TOL):
                return False
        if self.p.max_moved is not None:
            if self.moved + self._dmoved(units, frm, to) > self.p.max_moved + _TOL:
                return False
        return True

    def _dmoved(self, units, frm, to) -> float:
        cur = self.p.current[units]
        d0 = self.p.demand[0, units]
        before = (cur >= 0) & (cur != frm)
        after = (cur >= 0) & (cur != to)
        return float(d0[after].sum() - d0[before].sum())

    def apply(self, units: np.ndarray, frm: int, to: int) -> None:
        d = self.p.demand[:, units].sum(axis=1)
        self.load[:, to] += d
        self.load[:, frm] -= d
        self.moved += self._dmoved(units, frm, to)


def repair(
    problem: Problem,
    graph: UnitGraph,
    assignment: np.ndarray,
    max_iter: int = 50,
) -> np.ndarray | None:
    """A contiguous plan close to ``assignment``, or None when no repair was found.

    ``assignment`` must meet every constraint but contiguity. Empty units are handed out
    again (:func:`reassign_empty`); each piece with students still cut from its root then
    moves as a whole into a neighbouring zone's root piece where every pair is allowed,
    no unit is locked, capacity holds in every year, the zone it leaves keeps its floor and
    the moved-students limit holds -- cheapest move first. Repeats until no piece is left.
    """
    a = np.asarray(assignment, dtype=np.int64).copy()
    wc = problem.weighted_cost
    allowed = problem.allowed
    locked = problem.locks >= 0
    root_unit = np.zeros(graph.n, bool)
    if problem.roots is not None:
        root_unit[problem.roots[problem.roots >= 0]] = True
    for _ in range(max_iter):
        b, detached = reassign_empty(problem, graph, a)
        if not detached.any():
            return b
        loads = _Loads(problem, b)
        labels = zone_components(graph, np.where(detached, b, -1))
        moved_any = False
        for lab in np.unique(labels[detached]).tolist():
            piece = np.flatnonzero(labels == lab)
            j = int(b[piece[0]])
            if locked[piece].any() or root_unit[piece].any():
                continue
            mask = np.zeros(graph.n, bool)
            mask[piece] = True
            touch = graph.touching(mask) & ~mask & ~detached
            best = None
            for k in np.unique(b[touch]).tolist():
                if k == j or not allowed[piece, k].all():
                    continue
                if not loads.can_move(piece, j, k):
                    continue
                delta = float(wc[piece, k].sum() - wc[piece, j].sum())
                if best is None or delta < best[0]:
                    best = (delta, k)
            if best is not None:
                k = best[1]
                loads.apply(piece, j, k)
                b[piece] = k
                detached[piece] = False
                moved_any = True
        if not moved_any:
            return None
        a = b
    return None



def _bridge(problem: Problem, graph: UnitGraph, b: np.ndarray, piece: np.ndarray, j: int,
            target: np.ndarray, movable: np.ndarray) -> tuple[float, np.ndarray] | None:
    """Cheapest chain of units that joins ``piece`` to ``target`` (zone j's root piece).

    Dijkstra over the unit graph where entering unit w costs what moving w to j adds to the
    objective (at least a tiny amount, so shorter chains win ties); units that may not move
    or may not join j are closed. Returns (cost, chain units) or None.
    """
    from scipy.sparse import csr_matrix
    from scipy.sparse.csgraph import dijkstra

    n = graph.n
    wc = problem.weighted_cost
    step = wc[:, j] - wc[np.arange(n), b]
    step = np.where(b == j, 0.0, np.maximum(step, 0.0)) + 1e-6
    open_ = (movable | (b == j)) & problem.allowed[:, j]
    head = graph.indices
    keep = open_[head]
    rows = np.repeat(np.arange(n), np.diff(graph.indptr))[keep]
    g = csr_matrix((step[head[keep]], (rows, head[keep])), shape=(n, n))
    dist, pred, _ = dijkstra(g, directed=True, indices=piece, min_only=True,
                             return_predecessors=True)
    reach = np.flatnonzero(target & np.isfinite(dist))
    if not len(reach):
        return None
    end = int(reach[np.argmin(dist[reach])])
    chain = []
    inside = set(piece.tolist())
    k = int(pred[end])
    while k >= 0 and k not in inside:
        chain.append(k)
        k = int(pred[k])
    return float(dist[end] - step[end]), np.array(chain, dtype=np.int64)


def absorb(problem: Problem, graph: UnitGraph, assignment: np.ndarray,
           max_iter: int = 30) -> np.ndarray | None:
    """Connect every zone, piece by piece, whichever way costs less.

    Units with no students are handed out first (:func:`reassign_empty`). Each piece cut
    from its root either joins the cheapest touching zone, or stays and pulls in the
    cheapest chain of units that links it to its own root piece (:func:`_bridge`). A piece
    holding a locked unit or a root can only be bridged. Zones split by a chain are mended
    in the next pass; a unit taken into a chain is never taken again, so the passes end
    (moving a whole piece never cuts another zone). Capacity is left to :func:`rebalance`.
    """
    a = np.asarray(assignment, dtype=np.int64).copy()
    wc = problem.weighted_cost
    allowed = problem.allowed
    fixed = fixed_units(problem)
    settled = np.zeros(graph.n, bool)  # chain units: taken once, never taken again
    for _ in range(max_iter):
        b, detached = reassign_empty(problem, graph, a)
        if not detached.any():
            return b
        labels = zone_components(graph, np.where(detached, b, -1))
        pieces = [np.flatnonzero(labels == lab) for lab in np.unique(labels[detached])]
        pieces.sort(key=len)
        moved = False

        for piece in pieces:
            if not detached[piece[0]]:
                continue
            j = int(b[piece[0]])
            mask = np.zeros(graph.n, bool)
            mask[piece] = True
            options: list[tuple[float, int, np.ndarray]] = []
            if not fixed[piece].any():
                touch = graph.touching(mask) & ~detached
                for k in np.unique(b[touch]).tolist():
                    if k >= 0 and k != j and allowed[piece, k].all():
                        delta = float(wc[piece, k].sum() - wc[piece, j].sum())
                        options.append((delta, k, piece))
            target = (b == j) & ~detached
            link = _bridge(problem, graph, b, piece, j, target, ~fixed & ~detached & ~settled)
            if link is not None:
                options.append((link[0], j, link[1]))
            if not options:
                continue
            _, k, units = min(options, key=lambda o: o[0])
            if k == j:
                settled[units] = True
            b[units] = k
            detached[piece] = False
            moved = True
        if not moved:
            return None
        a = b
    return None


def make_valid(problem: Problem, graph: UnitGraph, assignment: np.ndarray) -> np.ndarray | None:
    """absorb -> rebalance -> improve: a valid contiguous plan near ``assignment``, or None."""
    a = absorb(problem, graph, assignment)
    if a is None:
        return None
    a = rebalance(problem, graph, a)
    if a is None:
        return None
    return improve(problem, graph, a)
