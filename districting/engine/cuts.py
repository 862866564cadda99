"""Separator cuts: the inequalities that make zones contiguous, from integer and LP points.

A plan that breaks contiguity is cut off with minimal a-b separator inequalities (Validi,
Buchanan & Lykhovyd, "Imposing contiguity constraints in political districting models",
Operations Research 70(2), 2022, 867-892): if unit ``i`` sits in zone ``j`` but is cut from
the root ``r_j``, every vertex set ``S`` separating ``i`` from ``r_j`` must hold a unit of
zone ``j``::

    x[i, j] <= sum_{s in S} x[s, j]

(for a site without a root the a-b form ``x[a, j] + x[i, j] - 1 <= sum_S x[s, j]`` with an
anchor unit ``a``). :mod:`districting.engine.formulation` writes a :class:`Cut` as rows.
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp

from ..problem import Problem
from .connectivity import Cut, UnitGraph, fragments, main_labels, zone_components

__all__ = ["separator", "min_separator", "separator_cuts", "corridor", "fractional_cuts",
           "rooted_cuts"]


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
    dropped: np.ndarray | None = None,
) -> list[Cut]:
    """Separator cuts violated by ``assignment``, one :class:`Cut` per fragment.

    ``only`` (bool mask) limits the cuts to fragments holding at least one of those units.
    ``passable`` marks units any zone may take at no cost (no students, no lock, no root):
    a fragment C is first grown through them to C' (its piece in the graph of its zone plus
    the passable units). When C' misses the root, N(C') separates C from the root and holds
    no passable unit, so the cut asks for a unit with students -- the MIP cannot answer it
    by annexing one empty unit at a time (only units the zone may take are grown through:
    the others weigh nothing in the cut). When C' reaches the root the usual separator
    around C is used. ``dropped`` marks passable units the caller's model leaves out (no
    columns): then C is grown through them instead, and a fragment that reaches its root
    that way gets no cut (:func:`corridor` names the units the model would need).
    """
    a = np.asarray(assignment, dtype=np.int64)
    cuts: list[Cut] = []
    grown_by_site: dict[int, np.ndarray] = {}
    open_by_site: dict[int, np.ndarray] = {}
    allowed = problem.allowed if passable is not None or dropped is not None else None
    for piece, j, other, anchor in _cut_off(problem, graph, a, only):
        units, sep = piece, None
        if passable is not None:
            ok = allowed[:, j]  # a unit that may not join the zone is a wall for it
            units, sep = _grown_cut(graph, a, piece, other, passable & ok, j, grown_by_site)
        if sep is None and dropped is not None and dropped.any():
            units, sep = _grown_cut(graph, a, piece, other, dropped & allowed[:, j], j,
                                    open_by_site)
            if sep is None:
                continue  # joined to its root through units the model leaves out
        if sep is None:
            sep = separator(graph, piece, other)
        cuts.append(Cut(site=j, units=units, separator=sep, anchor=anchor))
        if anchor < 0:
            # also the smallest separator (a bridge, a neck): it lifts the bound far faster
            narrow = min_separator(graph, units, other, avoid=passable)
            if narrow is not None and 0 < len(narrow) < len(sep):
                cuts.append(Cut(site=j, units=units, separator=narrow))
    return cuts


def corridor(problem: Problem, graph: UnitGraph, assignment: np.ndarray,
             dropped: np.ndarray, only: np.ndarray | None = None) -> np.ndarray:
    """The ``dropped`` units a model needs to cut ``assignment``'s fragments that
    :func:`separator_cuts` could not: a fragment joined to its zone's root only through
    units the model leaves out. Per such fragment, the dropped units on a shortest path
    (fewest units) from it to the root through its zone and the dropped units; with them
    in the model the fragment's separators can be written. Bool mask over the units."""
    a = np.asarray(assignment, dtype=np.int64)
    need = np.zeros(graph.n, bool)
    by_site: dict[int, np.ndarray] = {}
    allowed = problem.allowed
    for piece, j, other, _ in _cut_off(problem, graph, a, only):
        if j not in by_site:
            by_site[j] = graph.components((a == j) | (dropped & allowed[:, j]))
        lab = by_site[j]
        if lab[other] != lab[piece[0]]:
            continue
        inside = lab == lab[other]
        d_piece = _hops(graph, inside, piece)
        d_root = _hops(graph, inside, np.array([other]))
        far = d_piece[other]
        need |= dropped & inside & (np.abs(d_piece + d_root - far) < 0.5)
    return need


def _cut_off(problem: Problem, graph: UnitGraph, a: np.ndarray, only: np.ndarray | None):
    """Each fragment of ``a`` (holding one of the ``only`` units, when given) with its
    site ``j``, the unit it must reach (the site's root, else the first unit of the zone's
    main piece) and the a-b anchor (-1 with a root): (piece, j, other, anchor)."""
    labels = zone_components(graph, a)
    main = main_labels(problem, a, labels)
    for piece in fragments(problem, graph, a):
        if only is not None and not only[piece].any():
            continue
        j = int(a[piece[0]])
        r = -1 if problem.roots is None else int(problem.roots[j])
        if r >= 0:
            yield piece, j, r, -1
            continue
        members = np.flatnonzero((a == j) & (labels == main[j]))
        if len(members):
            yield piece, j, int(members[0]), int(members[0])


def _grown_cut(graph: UnitGraph, a: np.ndarray, piece: np.ndarray, other: int,
               through: np.ndarray, j: int, cache: dict[int, np.ndarray]
               ) -> tuple[np.ndarray, np.ndarray | None]:
    """The fragment grown through the units ``through`` (with its zone's own units): when
    that misses ``other``, (its units of zone ``j``, a separator holding none of
    ``through``); else (``piece``, None)."""
    if j not in cache:
        cache[j] = graph.components((a == j) | through)
    lab = cache[j]
    if lab[other] == lab[piece[0]]:
        return piece, None
    grown = np.flatnonzero(lab == lab[piece[0]])
    return grown[a[grown] == j], separator(graph, grown, other)


def _hops(graph: UnitGraph, inside: np.ndarray, sources: np.ndarray) -> np.ndarray:
    """Fewest edges from ``sources`` to each unit, moving only through ``inside`` units
    (infinite where unreachable)."""
    from scipy.sparse.csgraph import shortest_path

    sel = inside[graph.u] & inside[graph.v]
    n = graph.n
    src = n  # a super source one edge before every source unit
    rows = np.concatenate([graph.u[sel], np.full(len(sources), src)])
    cols = np.concatenate([graph.v[sel], sources])
    g = sp.csr_matrix((np.ones(len(rows), np.int8), (rows, cols)), shape=(n + 1, n + 1))
    return shortest_path(g, directed=True, unweighted=True, indices=src)[:n] - 1


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
        for units, sep in rooted_cuts(graph, x[:, j], int(problem.roots[j]), pas, violation):
            cuts.append(Cut(site=j, units=units, separator=sep))
    return cuts


def rooted_cuts(graph: UnitGraph, w: np.ndarray, root: int, passable: np.ndarray,
                violation: float = 0.01) -> list[tuple[np.ndarray, np.ndarray]]:
    """The violated cuts of one zone (:func:`fractional_cuts`): ``w`` (n,) the point's
    values x*[., j], ``root`` its root unit; (units, separator) pairs, one per piece."""
    n, r, pas = graph.n, root, passable
    out_cuts: list[tuple[np.ndarray, np.ndarray]] = []
    cand = (w > violation) & ~pas
    cand[r] = False
    if not cand.any():
        return out_cuts
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
                out_cuts.append((units, sep))
    return out_cuts
