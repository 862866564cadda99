"""Contiguous zones: connectivity checks, separator cuts and the repair of fragments.

A zone is contiguous when the units assigned to its site induce a connected subgraph of the
unit graph that holds the site's root unit (Oehrlein & Haunert, "A cutting-plane method for
contiguity-constrained spatial aggregation", Journal of Spatial Information Science 15, 2017,
for the root-based form). A plan that breaks this is cut off with minimal a-b separator
inequalities (Validi, Buchanan & Lykhovyd, "Imposing contiguity constraints in political
districting models", Operations Research 70(2), 2022, 867-892): if unit ``i`` sits in zone
``j`` but is cut from the root ``r_j``, every vertex set ``S`` separating ``i`` from ``r_j``
must hold a unit of zone ``j``::

    x[i, j] <= sum_{s in S} x[s, j]

(for a site without a root the a-b form ``x[a, j] + x[i, j] - 1 <= sum_S x[s, j]`` with an
anchor unit ``a``). The functions here are pure numpy / scipy over a :class:`UnitGraph`;
:mod:`districting.solve` runs them between MIP rounds.

Repair turns any assignment that meets every other constraint into a contiguous plan when
it can: units with no students are handed out again (they cost nothing, so the MIP places
them at random), then disconnected pieces with students move into a neighbouring zone that
can take them, cheapest first, and a local search moves boundary units while every zone
stays connected and in band.
"""

from __future__ import annotations

from collections import deque
from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
from scipy.sparse.csgraph import connected_components

from .problem import Problem

__all__ = [
    "UnitGraph",
    "Cut",
    "zone_components",
    "fragments",
    "is_contiguous",
    "separator",
    "min_separator",
    "separator_cuts",
    "fractional_cuts",
    "free_units",
    "reassign_empty",
    "repair",
    "improve",
    "plan_checks",
    "open_from_assignment",
    "site_trees",
]

_TOL = 1e-6


class UnitGraph:
    """The unit adjacency as CSR arrays plus the edge list (read-only)."""

    def __init__(self, n: int, edges) -> None:
        e = np.asarray(edges, dtype=np.int64).reshape(-1, 2)
        self.n = int(n)
        self.u = np.concatenate([e[:, 0], e[:, 1]])
        self.v = np.concatenate([e[:, 1], e[:, 0]])
        adj = sp.csr_matrix((np.ones(len(self.u), np.int8), (self.u, self.v)), shape=(n, n))
        adj.sum_duplicates()
        adj.sort_indices()
        self.adj = adj
        self.indptr = adj.indptr
        self.indices = adj.indices
        self._lists: list[list[int]] | None = None

    @classmethod
    def of(cls, problem: Problem) -> UnitGraph:
        edges = problem.edges if problem.edges is not None else np.zeros((0, 2), np.int64)
        return cls(problem.n_units, edges)

    def neighbours(self, i: int) -> np.ndarray:
        return self.indices[self.indptr[i]:self.indptr[i + 1]]

    @property
    def lists(self) -> list[list[int]]:
        """Neighbour lists as Python lists (fast for breadth-first searches in Python)."""
        if self._lists is None:
            ind = self.indices.tolist()
            ptr = self.indptr.tolist()
            self._lists = [ind[ptr[k]:ptr[k + 1]] for k in range(self.n)]
        return self._lists

    def touching(self, mask: np.ndarray) -> np.ndarray:
        """Bool mask of units adjacent to some unit of ``mask`` (mask itself may be included)."""
        return (self.adj @ mask.astype(np.int8)) > 0

    def components(self, keep: np.ndarray) -> np.ndarray:
        """Component label per unit in the subgraph induced by ``keep`` (-1 outside)."""
        sel = keep[self.u] & keep[self.v]
        g = sp.csr_matrix(
            (np.ones(int(sel.sum()), np.int8), (self.u[sel], self.v[sel])), shape=(self.n,) * 2
        )
        _, labels = connected_components(g, directed=False)
        return np.where(keep, labels, -1)


@dataclass(frozen=True)
class Cut:
    """``x[i, site] (+ x[anchor, site] - 1) <= sum_{s in separator} x[s, site]`` per i."""

    site: int
    units: np.ndarray  # the units i of the fragment (one inequality each)
    separator: np.ndarray  # S, a minimal vertex separator between the fragment and the root
    anchor: int = -1  # -1: the site's root is the other side; else the a-b form


def zone_components(graph: UnitGraph, assignment: np.ndarray) -> np.ndarray:
    """Label per unit of its connected piece within its own zone (-1 when unassigned)."""
    a = np.asarray(assignment)
    sel = (a[graph.u] == a[graph.v]) & (a[graph.u] >= 0)
    g = sp.csr_matrix(
        (np.ones(int(sel.sum()), np.int8), (graph.u[sel], graph.v[sel])), shape=(graph.n,) * 2
    )
    _, labels = connected_components(g, directed=False)
    return np.where(a >= 0, labels, -1)


def _main_labels(problem: Problem, a: np.ndarray, labels: np.ndarray) -> np.ndarray:
    """Per site, the label of its main piece: the root's piece, else the piece with most
    students (-2: the root is elsewhere, so every piece is a fragment; -3: unused site)."""
    roots = problem.roots
    main = np.full(problem.n_sites, -3, np.int64)
    ok = a >= 0
    if not ok.any():
        return main
    weight = problem.demand.sum(axis=0) + 1e-9  # every unit counts a little: ties -> size
    for j in np.unique(a[ok]).tolist():
        r = -1 if roots is None else int(roots[j])
        if r >= 0:
            main[j] = labels[r] if a[r] == j else -2
        else:
            members = np.flatnonzero(a == j)
            w = np.bincount(labels[members], weights=weight[members])
            main[j] = int(np.argmax(w))
    return main


def _attached(a: np.ndarray, labels: np.ndarray, main: np.ndarray) -> np.ndarray:
    """Units in their zone's main piece."""
    return (a >= 0) & (labels == main[np.maximum(a, 0)])


def fragments(problem: Problem, graph: UnitGraph, assignment: np.ndarray) -> list[np.ndarray]:
    """Units of each zone piece that is not the zone's main piece (root piece), one array each."""
    a = np.asarray(assignment, dtype=np.int64)
    labels = zone_components(graph, a)
    bad = (a >= 0) & ~_attached(a, labels, _main_labels(problem, a, labels))
    if not bad.any():
        return []
    idx = np.flatnonzero(bad)
    order = np.argsort(labels[idx], kind="stable")
    idx = idx[order]
    splits = np.flatnonzero(np.diff(labels[idx])) + 1
    return np.split(idx, splits)


def is_contiguous(problem: Problem, graph: UnitGraph, assignment: np.ndarray) -> bool:
    """True when every zone is one connected piece holding its site's root."""
    return not fragments(problem, graph, assignment)


def separator(graph: UnitGraph, piece: np.ndarray, other: int) -> np.ndarray:
    """A minimal vertex separator between the unit set ``piece`` and unit ``other``.

    ``piece`` is a maximal connected piece of a zone that misses ``other``,
    so its neighbourhood N(C) lies outside the zone and separates the two. It is shrunk from
    both sides: keep the units of N(C) adjacent to the component of ``other`` in G - N(C),
    then those adjacent to the component of the piece in G - S (Validi, Buchanan &
    Lykhovyd 2022, section on minimal separators).
    """
    in_c = np.zeros(graph.n, bool)
    in_c[piece] = True
    nbr = graph.touching(in_c) & ~in_c
    if nbr[other]:
        return np.array([other])
    lab = graph.components(~nbr)
    side = lab == lab[other]
    s1 = nbr & graph.touching(side)
    lab2 = graph.components(~s1)
    side2 = lab2 == lab2[piece[0]]
    return np.flatnonzero(s1 & graph.touching(side2))


def min_separator(graph: UnitGraph, piece: np.ndarray, other: int,
                  avoid: np.ndarray | None = None) -> np.ndarray | None:
    """A minimum-size vertex separator between ``piece`` and unit ``other`` (max-flow).

    Each unit is split into an in- and an out-node joined by an arc of capacity 1 (the
    piece, ``other`` and the ``avoid`` units get a capacity too large to cut); graph edges
    get that large capacity too. By Menger's theorem the minimum cut of this network is a
    smallest vertex set whose removal separates the piece from ``other`` (Even, "Graph
    Algorithms", 1979, ch. 6). Where a river crossing or a narrow neck separates a fragment
    from its school this is the crossing itself, so its cut is far stronger than the
    fragment's neighbourhood. None when every separator would need an ``avoid`` unit.
    """
    n = graph.n
    big = n + 1
    node_cap = np.ones(n, np.int32)
    node_cap[piece] = big
    node_cap[other] = big
    if avoid is not None:
        node_cap[avoid] = big
    value, sep = _vertex_cut(graph, node_cap, piece, other, big)
    return None if value >= big else sep


def _vertex_cut(graph: UnitGraph, node_cap: np.ndarray, piece: np.ndarray, other: int,
                big: int) -> tuple[int, np.ndarray]:
    """Minimum vertex cut between the units ``piece`` and unit ``other`` (max-flow).

    Unit v becomes an arc in(v) -> out(v) of capacity ``node_cap[v]``; each edge u-v
    becomes out(u) -> in(v) and out(v) -> in(u) of capacity ``big``; a super source feeds
    the piece. Returns the flow value and the units whose in-node the source still reaches
    in the residual network but whose out-node it does not (the cut's units).
    """
    from scipy.sparse.csgraph import breadth_first_order, maximum_flow

    n = graph.n
    src = 2 * n
    rows = np.concatenate([np.arange(n), graph.u + n, np.full(len(piece), src)])
    cols = np.concatenate([np.arange(n) + n, graph.v, piece])
    caps = np.concatenate([np.asarray(node_cap, np.int32),
                           np.full(len(graph.u) + len(piece), big, np.int32)])
    net = sp.csr_matrix((caps, (rows, cols)), shape=(2 * n + 1,) * 2)
    res = maximum_flow(net, src, other + n)
    residual = (net - res.flow).tocsr()  # the flow is antisymmetric: back arcs included
    residual.data = (residual.data > 0).astype(np.int8)
    residual.eliminate_zeros()
    reach = breadth_first_order(residual, src, directed=True, return_predecessors=False)
    seen = np.zeros(2 * n + 1, bool)
    seen[reach] = True
    return int(res.flow_value), np.flatnonzero(seen[:n] & ~seen[n:2 * n])


def separator_cuts(
    problem: Problem,
    graph: UnitGraph,
    assignment: np.ndarray,
    only: np.ndarray | None = None,
    passable: np.ndarray | None = None,
    strict: bool = False,
) -> list[Cut]:
    """Separator cuts violated by ``assignment``, one :class:`Cut` per fragment.

    ``only`` (bool mask) limits the cuts to fragments holding at least one of those units.
    ``passable`` marks units any zone may take at no cost (no students, no lock, no root):
    a fragment C is first grown through them to C' (its piece in the graph of its zone plus
    the passable units). When C' misses the root, N(C') separates C from the root and holds
    no passable unit, so the cut asks for a unit with students -- the MIP cannot answer it
    by annexing one empty unit at a time. When C' reaches the root the usual separator
    around C is used, or, with ``strict``, the fragment gets no cut (the caller's model has
    no columns for passable units).
    """
    a = np.asarray(assignment, dtype=np.int64)
    labels = zone_components(graph, a)
    main = _main_labels(problem, a, labels)
    cuts: list[Cut] = []
    grown_by_site: dict[int, np.ndarray] = {}
    for piece in fragments(problem, graph, a):
        if only is not None and not only[piece].any():
            continue
        j = int(a[piece[0]])
        r = -1 if problem.roots is None else int(problem.roots[j])
        if r >= 0:
            other, anchor = r, -1
        else:
            members = np.flatnonzero((a == j) & (labels == main[j]))
            if not len(members):
                continue
            other = anchor = int(members[0])
        units = piece
        sep = None
        if passable is not None:
            if j not in grown_by_site:
                grown_by_site[j] = graph.components((a == j) | passable)
            grown_lab = grown_by_site[j]
            grown = np.flatnonzero(grown_lab == grown_lab[piece[0]])
            if grown_lab[other] != grown_lab[piece[0]]:
                units = grown[a[grown] == j]
                sep = separator(graph, grown, other)
            elif strict:
                continue
        if sep is None:
            sep = separator(graph, piece, other)
        cuts.append(Cut(site=j, units=units, separator=sep, anchor=anchor))
        if anchor < 0:
            # also the smallest separator (a bridge, a neck): it lifts the bound far faster
            narrow = min_separator(graph, units, other, avoid=passable)
            if narrow is not None and 0 < len(narrow) < len(sep):
                cuts.append(Cut(site=j, units=units, separator=narrow))
    return cuts


_FLOW_SCALE = 10_000  # LP values to integer capacities for scipy's max-flow
_FLOW_BIG = 1 << 30  # a capacity no cut can afford (above n x _FLOW_SCALE for n < 100,000)


def fractional_cuts(problem: Problem, graph: UnitGraph, values: np.ndarray,
                    passable: np.ndarray | None = None, violation: float = 0.01) -> list[Cut]:
    """Separator cuts violated by a fractional point, such as an LP solution.

    ``values`` is (n, m): x*[i, j]. For a site j with root r the inequality
    ``x[i, j] <= sum_{s in S} x[s, j]`` holds for every vertex set S separating i from r, so
    it is violated exactly when the minimum weight of such a separator, with weight
    x*[s, j] on each unit (and none on ``passable`` units, which any zone may cross and
    which therefore never belong to S), is below x*[i, j]. That minimum is a maximum flow
    on the graph with every unit split into an in- and an out-node joined by an arc of its
    weight (vertex cuts by Menger's theorem; the separation of a-b separator inequalities
    for fractional points in Validi, Buchanan & Lykhovyd, Operations Research 70(2), 2022).

    One flow serves many units: for a level theta, the units with x*[., j] >= theta (and
    the passable ones) split into pieces; a unit of value theta in the root's piece reaches
    the root through units of value at least theta, so no cut can be violated for it.
    Any violated cut for a unit i of another piece avoids that piece's units (each costs
    at least theta), so one flow from the whole piece to the root finds it, and the same
    S serves every unit of the piece whose value exceeds the separator's weight.
    Returns one :class:`Cut` per piece found violated (by more than ``violation``).
    """
    x = np.asarray(values, float)
    n, m = x.shape
    cuts: list[Cut] = []
    if problem.roots is None:
        return cuts
    pas = np.zeros(n, bool) if passable is None else np.asarray(passable, bool)
    for j in np.flatnonzero((problem.roots >= 0) & ~problem.closed_sites).tolist():
        r = int(problem.roots[j])
        w = x[:, j]
        cand = (w > violation) & ~pas
        cand[r] = False
        if not cand.any():
            continue
        base_cap = np.round(np.where(pas, 0.0, w) * _FLOW_SCALE).astype(np.int64)
        base_cap[pas] = _FLOW_BIG
        base_cap[r] = _FLOW_BIG
        done = np.zeros(n, bool)
        for theta in np.unique(np.round(w[cand], 3))[::-1].tolist():
            keep = (w >= theta - 1e-9) | pas
            keep[r] = True
            lab = graph.components(keep)
            out = cand & ~done & keep & (lab != lab[r])
            for piece_label in np.unique(lab[out]).tolist():
                piece = np.flatnonzero(lab == piece_label)
                done[piece] = True
                node_cap = base_cap.copy()
                node_cap[piece] = _FLOW_BIG
                value, sep = _vertex_cut(graph, node_cap, piece, r, _FLOW_BIG)
                units = piece[cand[piece] & (w[piece] > value / _FLOW_SCALE + violation)]
                if value < _FLOW_BIG and len(units):
                    cuts.append(Cut(site=j, units=units, separator=sep))
    return cuts


def free_units(problem: Problem) -> np.ndarray:
    """Units any zone may take at no cost: no students in any row, no lock, no site's root."""
    free = ~(problem.demand > 0).any(axis=0)
    free &= problem.locks < 0
    if problem.roots is not None:
        r = problem.roots[(problem.roots >= 0) & ~problem.closed_sites]
        free[r] = False
    return free


def site_trees(problem: Problem, graph: UnitGraph) -> np.ndarray:
    """(m, n) parent of each unit in a shortest-path tree grown from each site's root.

    Edge u-v weighs ``|t[u,j] - t[v,j]| + delta_j`` (t the travel to site j, delta_j a tenth
    of the median such difference): paths run outwards from the site, so a zone that holds,
    with each unit, its parent is connected, holds the root and is roughly star-shaped
    around the site. Used only to steer the heuristic; -1 marks the root, a unit the tree
    does not reach, and every unit of a site without a root.
    """
    from scipy.sparse.csgraph import dijkstra

    n, m = problem.n_units, problem.n_sites
    parent = np.full((m, n), -1, np.int64)
    if problem.roots is None:
        return parent
    t = np.asarray(problem.travel, float)
    u, v = graph.u, graph.v
    for j in np.flatnonzero((problem.roots >= 0) & ~problem.closed_sites).tolist():
        tj = t[:, j]
        ok = np.isfinite(tj)
        if not ok.any():
            continue
        tj = np.where(ok, tj, np.nanmax(np.where(ok, tj, np.nan)) * 2 + 1)
        diff = np.abs(tj[u] - tj[v])
        delta = 0.1 * float(np.median(diff)) if len(diff) else 1.0
        w = diff + max(delta, 1e-9)
        g = sp.csr_matrix((w, (u, v)), shape=(n, n))
        _, pred = dijkstra(g, directed=True, indices=int(problem.roots[j]),
                           return_predecessors=True)
        parent[j] = np.where(pred >= 0, pred, -1)
    return parent


# ---------------------------------------------------------------------- feasibility checks
def open_from_assignment(problem: Problem, assignment: np.ndarray) -> np.ndarray:
    """Open sites implied by an assignment: always-open sites plus used candidates.

    When ``p`` asks for more sites, unused candidates that may stay empty (no root, no
    floor) are added, so the count row can hold.
    """
    a = np.asarray(assignment, dtype=np.int64)
    opened = problem.always_open.copy()
    used = np.zeros(problem.n_sites, bool)
    used[a[a >= 0]] = True
    opened |= used & ~problem.closed_sites
    if problem.p is not None and opened.sum() < problem.p:
        spare = problem.candidates & ~opened
        if problem.roots is not None:
            spare &= problem.roots < 0
        if problem.capacity is not None:
            spare &= problem.min_util * problem.capacity <= _TOL
        extra = np.flatnonzero(spare)[: problem.p - int(opened.sum())]
        opened[extra] = True
    return opened


def plan_checks(problem: Problem, assignment: np.ndarray, graph: UnitGraph | None = None,
                contiguity: bool = True) -> list[str]:
    """What ``assignment`` breaks (empty list: a valid plan), in short words."""
    a = np.asarray(assignment, dtype=np.int64)
    n, m = problem.n_units, problem.n_sites
    out: list[str] = []
    if a.shape != (n,) or a.min(initial=0) < 0 or a.max(initial=0) >= m:
        return ["not every unit has a site"]
    if not problem.allowed[np.arange(n), a].all():
        out.append("a unit is assigned to a site it may not use")
    opened = open_from_assignment(problem, a)
    if problem.p is not None and int(opened.sum()) != problem.p:
        out.append(f"{int(opened.sum())} sites open, {problem.p} asked")
    if problem.roots is not None:
        r = problem.roots
        rooted = opened & (r >= 0)
        if np.any(a[r[rooted]] != np.flatnonzero(rooted)):
            out.append("a site's own unit is in another zone")
    if problem.capacity is not None:
        load = _loads(problem, a)
        cap = problem.capacity[None, :]
        if np.any(opened & (load > problem.max_util * cap + _TOL).any(axis=0)):
            out.append("capacity exceeded")
        if np.any(opened & (load < problem.min_util * cap - _TOL).any(axis=0)):
            out.append("below minimum utilization")
    if problem.max_moved is not None and _moved(problem, a) > problem.max_moved + _TOL:
        out.append("too many students moved")
    if contiguity and problem.contiguous:
        g = graph or UnitGraph.of(problem)
        if fragments(problem, g, a):
            out.append("a zone is not connected")
    return out


def _loads(problem: Problem, a: np.ndarray) -> np.ndarray:
    m = problem.n_sites
    ok = a >= 0
    return np.stack([np.bincount(a[ok], weights=row[ok], minlength=m) for row in problem.demand])


def _moved(problem: Problem, a: np.ndarray) -> float:
    cur = problem.current
    moved = (cur >= 0) & (a != cur)
    return float(problem.demand[0][moved].sum())


# ---------------------------------------------------------------------- repair
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
    attached = _attached(a, labels, _main_labels(problem, a, labels))
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
        self.load = _loads(problem, a)
        self.moved = _moved(problem, a)
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


def improve(
    problem: Problem,
    graph: UnitGraph,
    assignment: np.ndarray,
    passes: int = 3,
) -> np.ndarray:
    """Local search: move boundary units to a neighbouring zone while it lowers the cost.

    A move of unit i from zone j to a neighbouring zone k is taken when it is allowed, i is
    not locked and not a site's root, capacity and floors hold in every year, the
    moved-students limit holds, and zone j stays connected without i (checked by a
    breadth-first search from one of i's neighbours in j). Best improvement first.
    """
    a = np.asarray(assignment, dtype=np.int64).copy()
    wc = problem.weighted_cost
    allowed = problem.allowed
    movable = problem.locks < 0
    if problem.roots is not None:
        movable[problem.roots[problem.roots >= 0]] = False
    loads = _Loads(problem, a)
    nbrs = graph.lists
    n = graph.n
    for _ in range(passes):
        u, v = graph.u, graph.v
        diff = a[u] != a[v]
        cu, cv = u[diff], a[v[diff]]
        gain = wc[cu, a[cu]] - wc[cu, cv]
        keep = (gain > _TOL) & movable[cu] & allowed[cu, cv]
        cu, cv, gain = cu[keep], cv[keep], gain[keep]
        if not len(cu):
            break
        order = np.argsort(-gain, kind="stable")
        done = np.zeros(n, bool)
        changed = False
        al = a.tolist()
        for i, k in zip(cu[order].tolist(), cv[order].tolist(), strict=True):
            if done[i]:
                continue
            j = al[i]
            if j == k or not any(al[w] == k for w in nbrs[i]):
                continue
            one = np.array([i])
            if not loads.can_move(one, j, k):
                continue
            if not _stays_connected(i, j, al, nbrs):
                continue
            loads.apply(one, j, k)
            al[i] = k
            done[i] = True
            changed = True
        a = np.array(al, dtype=np.int64)
        if not changed:
            break
    return a


def zone_touch(graph: UnitGraph, assignment: np.ndarray, m: int) -> np.ndarray:
    """(m, m) number of unit-graph edges between each pair of zones of a plan."""
    a = np.asarray(assignment, np.int64)
    u, v = graph.u, graph.v
    diff = a[u] != a[v]
    return np.bincount(a[u][diff] * m + a[v][diff], minlength=m * m).reshape(m, m)


def _stays_connected(i: int, j: int, al: list[int], nbrs: list[list[int]]) -> bool:
    """True when zone j stays connected after unit i leaves it.

    One breadth-first search grows from each of i's neighbours in j, taking turns, and
    searches that meet merge. The answer is known as soon as one search has merged them
    all (connected) or one runs out of units unmet (cut off), so a unit whose move would
    cut off a small branch costs the size of the branch, not of the zone.
    """
    same = [w for w in nbrs[i] if al[w] == j]
    k = len(same)
    if k <= 1:
        return True
    owner = {w: s for s, w in enumerate(same)}
    owner[i] = -1
    parent = list(range(k))

    def find(x: int) -> int:
        while parent[x] != x:
            parent[x] = parent[parent[x]]
            x = parent[x]
        return x

    queues = {s: deque([w]) for s, w in enumerate(same)}
    groups = k
    while True:
        for r in list(queues):
            q = queues.get(r)
            if q is None:
                continue  # merged into another search during this turn
            if not q:
                return False
            x = q.popleft()
            for y in nbrs[x]:
                if al[y] != j:
                    continue
                o = owner.get(y)
                if o is None:
                    owner[y] = r
                    q.append(y)
                elif o >= 0:
                    a, b = find(o), find(r)
                    if a != b:
                        parent[b] = a
                        queues[a].extend(queues.pop(b))
                        groups -= 1
                        if groups == 1:
                            return True
                        r, q = a, queues[a]
