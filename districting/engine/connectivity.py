"""Contiguous zones: the unit graph, connectivity checks and what a plan breaks.

A zone is contiguous when the units assigned to its site induce a connected subgraph of the
unit graph that holds the site's root unit (Oehrlein & Haunert, "A cutting-plane method for
contiguity-constrained spatial aggregation", Journal of Spatial Information Science 15, 2017,
for the root-based form). The separator cuts that enforce it are in
:mod:`districting.engine.cuts`; the repair of broken plans in :mod:`districting.engine.repair`.
Pure numpy / scipy over a :class:`UnitGraph`.
"""

from __future__ import annotations

from collections import deque
from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
from scipy.sparse.csgraph import connected_components

from ..problem import Problem
from ..rules import district_shares, group_shares, open_sites, transported
from .feeding import feeder_breaks

__all__ = [
    "UnitGraph",
    "Cut",
    "zone_components",
    "main_labels",
    "attached_mask",
    "fragments",
    "is_contiguous",
    "free_units",
    "site_trees",
    "tree_links",
    "plan_checks",
    "zone_loads",
    "moved_students",
    "zone_touch",
    "stays_connected",
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


def main_labels(problem: Problem, a: np.ndarray, labels: np.ndarray) -> np.ndarray:
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


def attached_mask(a: np.ndarray, labels: np.ndarray, main: np.ndarray) -> np.ndarray:
    """Units in their zone's main piece."""
    return (a >= 0) & (labels == main[np.maximum(a, 0)])


def fragments(problem: Problem, graph: UnitGraph, assignment: np.ndarray) -> list[np.ndarray]:
    """Units of each zone piece that is not the zone's main piece (root piece), one array each."""
    a = np.asarray(assignment, dtype=np.int64)
    labels = zone_components(graph, a)
    bad = (a >= 0) & ~attached_mask(a, labels, main_labels(problem, a, labels))
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


def free_units(problem: Problem) -> np.ndarray:
    """Units any zone may take at no cost: no students in any row, no lock, no site's root,
    not bound by whole feeding to the other units of its lower zone."""
    free = ~(problem.demand > 0).any(axis=0)
    if problem.feeder_rule == "whole" and problem.feeder_groups is not None:
        free &= problem.feeder_groups < 0
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


def tree_links(problem: Problem, parent: np.ndarray, xi: np.ndarray, xj: np.ndarray,
               colmap: np.ndarray, drop: np.ndarray
               ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Each pair column's link in its site's tree (``parent`` from :func:`site_trees`):
    (the pair columns k with a link, the column of the pair (q, j) for every column, -1
    without one, and the mask of the columns a tree-shaped zone cannot use), q being unit
    i's nearest ancestor in site j's tree that is in the model (not in ``drop``). A site
    without a root and a site's root unit have no link."""
    q = parent[xj, xi].copy()
    for _ in range(problem.n_units):  # climb over units left out of the model
        up = (q >= 0) & drop[np.maximum(q, 0)]
        if not up.any():
            break
        q[up] = parent[xj[up], q[up]]
    roots = problem.roots if problem.roots is not None else np.full(problem.n_sites, -1)
    linked = (roots[xj] >= 0) & (xi != roots[xj])
    qc = np.where(q >= 0, colmap[np.maximum(q, 0), xj], -1)
    return np.flatnonzero(linked & (qc >= 0)), qc, linked & (qc < 0)


# ---------------------------------------------------------------------- feasibility checks
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
    opened = open_sites(problem, a)
    if problem.p is not None and int(opened.sum()) != problem.p:
        out.append(f"{int(opened.sum())} sites open, {problem.p} asked")
    if problem.roots is not None:
        r = problem.roots
        rooted = opened & (r >= 0)
        if np.any(a[r[rooted]] != np.flatnonzero(rooted)):
            out.append("a site's own unit is in another zone")
    if problem.capacity is not None:
        load = zone_loads(problem, a)
        cap = problem.capacity[None, :]
        if np.any(opened & (load > problem.max_util * cap + _TOL).any(axis=0)):
            out.append("capacity exceeded")
        if np.any(opened & (load < problem.min_util * cap - _TOL).any(axis=0)):
            out.append("below minimum utilization")
    if problem.max_moved is not None and moved_students(problem, a) > problem.max_moved + _TOL:
        out.append("too many students moved")
    broken = feeder_breaks(problem, a)
    if broken:
        out.append(broken)
    out += practice_checks(problem, a, opened)
    if contiguity and problem.contiguous:
        g = graph or UnitGraph.of(problem)
        if fragments(problem, g, a):
            out.append("a zone is not connected")
    return out


def practice_checks(problem: Problem, a: np.ndarray, opened: np.ndarray) -> list[str]:
    """The transport cap and the group band (keeping walkers is a forbidden pair)."""
    out = []
    if (problem.max_transported is not None
            and transported(problem, a).sum() > problem.max_transported + _TOL):
        out.append("too many students need transport")
    if problem.groups is not None and problem.group_band > 0:
        off = np.abs(group_shares(problem, a) - district_shares(problem)[:, :, None])
        if np.any(opened & (off > problem.group_band + _TOL)):
            out.append("a school's group share is outside its band")
    return out


def zone_loads(problem: Problem, a: np.ndarray) -> np.ndarray:
    """(rows, sites) students per demand row and site of a plan (units without a site
    count nowhere)."""
    m = problem.n_sites
    ok = a >= 0
    return np.stack([np.bincount(a[ok], weights=row[ok], minlength=m) for row in problem.demand])


def moved_students(problem: Problem, a: np.ndarray) -> float:
    """Students (first demand row) whose unit leaves its current site."""
    cur = problem.current
    moved = (cur >= 0) & (a != cur)
    return float(problem.demand[0][moved].sum())


def zone_touch(graph: UnitGraph, assignment: np.ndarray, m: int) -> np.ndarray:
    """(m, m) number of unit-graph edges between each pair of zones of a plan."""
    a = np.asarray(assignment, np.int64)
    u, v = graph.u, graph.v
    diff = a[u] != a[v]
    return np.bincount(a[u][diff] * m + a[v][diff], minlength=m * m).reshape(m, m)


def stays_connected(i: int, j: int, al: list[int], nbrs: list[list[int]]) -> bool:
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
