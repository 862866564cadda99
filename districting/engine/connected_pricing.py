"""Pricing a connected zone: the best zone of one site for given reduced costs.

In the column-generation view of the model (:mod:`districting.engine.columns`) a column is
one site ``j`` with a zone ``Z``: a unit set allowed for ``j`` that holds the site's root unit
and every unit locked to it, is connected in the unit graph, and keeps the site's students
inside its band in every demand row. Pricing asks for

    min_Z  sum_{i in Z} r[i]   s.t.  root in Z,  locked units in Z,  Z connected,
                                    lo[t] <= sum_{i in Z} d[t, i] <= hi[t]  for every row t

for the reduced costs ``r`` (inf where the pair is not allowed): a rooted connected knapsack
(the pricing problem of districting columns, Mehrotra, Johnson & Nemhauser, "An optimization
based heuristic for political districting", Management Science 44(8), 1998).

Two ways, one answer type (:class:`~districting.engine.pricing.Priced`, shared with the
pricing without contiguity):

- ``exact=False``: greedy growth from the root over the unit graph, best reduced cost first,
  a unit of positive cost taken only as a bridge to a cheaper neighbour (a one-step lookahead);
  fast, no bound.
- ``exact=True``: a small HiGHS MIP over the units the site can reach, connectivity imposed
  lazily by root separator cuts ``x[i] <= sum_{s in S} x[s]`` for every vertex set ``S``
  between ``i`` and the root (Validi, Buchanan & Lykhovyd, Operations Research 70(2), 2022;
  the same inequalities as the full model's, :mod:`districting.engine.cuts`). Every model of
  the loop is a relaxation of the pricing problem, so its dual bound is a valid lower bound
  even when the time runs out; the root's part of each cut-off answer is a column too.
  Cuts found for a site are kept in ``pool`` (a dict the caller holds for one run) and
  start the next call: a separator depends only on the graph, the root and the allowed
  units, which stay the same while the reduced costs change.
"""

from __future__ import annotations

import heapq
import time
from collections import deque

import numpy as np

from ..problem import Problem
from ..rules import seat_limits
from . import tuning
from .connectivity import UnitGraph
from .cuts import min_separator, rooted_cuts, separator
from .formulation import undominated
from .pricing import Priced

__all__ = ["Priced", "price_connected", "reachable_units"]

_TOL = 1e-6
#: At most this many rounds of cuts from the LP relaxation before the pricing MIP.
LP_ROUNDS = 10
#: The pricing MIP stops once a zone is within this share of its bound.
PRICE_GAP = 1e-4


def reachable_units(graph: UnitGraph, ok: np.ndarray, root: int) -> np.ndarray:
    """Units joined to ``root`` through units of ``ok`` (the root's component), sorted."""
    if root < 0 or not ok[root]:
        return np.zeros(0, np.int64)
    lab = graph.components(ok)
    return np.flatnonzero(lab == lab[root])


class _Site:
    """The pricing problem of one site on its reachable units, in local indices."""

    def __init__(self, problem: Problem, graph: UnitGraph, site: int,
                 reduced: np.ndarray) -> None:
        self.site = site
        ok = np.isfinite(reduced) & problem.allowed[:, site]
        root = int(problem.roots[site]) if problem.roots is not None else -1
        self.units = reachable_units(graph, ok, root)
        fewest, most = seat_limits(problem)
        self.lo = np.full(problem.n_years, float(fewest[site]))
        self.hi = np.full(problem.n_years, float(most[site]))
        locked = np.flatnonzero(problem.locks == site)
        n = len(self.units)
        local = np.full(problem.n_units, -1, np.int64)
        local[self.units] = np.arange(n)
        self.local = local
        # every unit locked here must be reachable, else no zone exists
        self.feasible = n > 0 and bool((local[locked] >= 0).all())
        self.root = int(local[root]) if n else -1
        self.forced = local[locked] if self.feasible else np.zeros(0, np.int64)
        sel = (local[graph.u] >= 0) & (local[graph.v] >= 0)
        e = np.stack([local[graph.u[sel]], local[graph.v[sel]]], axis=1)
        self.graph = UnitGraph(n, e[e[:, 0] < e[:, 1]])
        self.r = np.asarray(reduced, float)[self.units]
        self.d = problem.demand[:, self.units]
        self.kept: np.ndarray | None = None  # after pruning: which units of the parent stay

    def zone(self, chosen: np.ndarray) -> np.ndarray:
        """Global sorted unit indices of a local selection."""
        return np.sort(self.units[chosen])

    def fits(self, chosen: np.ndarray) -> bool:
        load = self.d[:, chosen].sum(axis=1)
        return bool(np.all(load >= self.lo - _TOL) and np.all(load <= self.hi + _TOL))


def _root_part(s: _Site, mask: np.ndarray) -> np.ndarray:
    """Local units of ``mask`` joined to the root inside ``mask``."""
    lab = s.graph.components(mask)
    return np.flatnonzero(lab == lab[s.root])


def _connect_forced(s: _Site) -> np.ndarray | None:
    """Bool mask: the root, the locked units and hop-shortest paths joining them."""
    mask = np.zeros(len(s.units), bool)
    mask[s.root] = True
    nbrs = s.graph.lists
    for f in s.forced.tolist():
        if mask[f]:
            continue
        prev = {f: -1}
        queue = deque([f])
        hit = -1
        while queue:
            u = queue.popleft()
            if mask[u]:
                hit = u
                break
            for v in nbrs[u]:
                if v not in prev:
                    prev[v] = u
                    queue.append(v)
        if hit < 0:
            return None
        u = hit
        while u >= 0:
            mask[u] = True
            u = prev[u]
    return mask


def _greedy(s: _Site, mask: np.ndarray | None = None) -> np.ndarray | None:
    """Grow the zone from ``mask`` (default: the root, the locked units and paths joining
    them) by the best boundary unit: its own reduced cost plus its best outside
    neighbour's when that is negative (a bridge), while the upper band holds; units of
    positive cost join only to reach the floor or as a bridge. None when the floor cannot
    be reached this way."""
    mask = _connect_forced(s) if mask is None else mask.copy()
    if mask is None:
        return None
    load = s.d[:, mask].sum(axis=1)
    if np.any(load > s.hi + _TOL):
        return None
    nbrs = s.graph.lists
    r = s.r
    best_out = np.array([min((r[v] for v in nbrs[u]), default=0.0) for u in range(len(r))])

    def score(u: int) -> float:
        return float(r[u] + min(0.0, best_out[u]))

    heap: list[tuple[float, int]] = []
    for u in np.flatnonzero(s.graph.touching(mask) & ~mask).tolist():
        heapq.heappush(heap, (score(u), u))
    while heap:
        sc, u = heapq.heappop(heap)
        if mask[u]:
            continue
        short = bool(np.any(load < s.lo - _TOL))
        if sc >= 0 and not short:
            break
        if np.any(load + s.d[:, u] > s.hi + _TOL):
            continue  # loads only grow: it never fits later
        mask[u] = True
        load = load + s.d[:, u]
        for v in nbrs[u]:
            if not mask[v]:
                heapq.heappush(heap, (score(v), v))
    if np.any(load < s.lo - _TOL):
        return None
    return mask


def _exact(s: _Site, pool: list[tuple[np.ndarray, np.ndarray]], time_limit: float | None,
           found: list[np.ndarray]) -> float:
    """The pricing MIP with lazy root separator cuts; returns its dual bound (inf when no
    zone exists). Feasible zones met on the way are appended to ``found`` (local masks)."""
    import highspy

    from .answer import quiet_highs

    n = len(s.units)
    deadline = None if time_limit is None else time.monotonic() + time_limit
    h = quiet_highs()
    h.setOptionValue("threads", int(tuning.HIGHS_THREADS))  # one scheduler per process
    h.setOptionValue("mip_rel_gap", PRICE_GAP / 2)
    lower = np.zeros(n)
    lower[s.root] = 1.0
    lower[s.forced] = 1.0
    inf = highspy.kHighsInf
    h.addVars(n, lower, np.ones(n))
    h.changeColsCost(n, np.arange(n, dtype=np.int32), s.r)
    h.changeColsIntegrality(n, np.arange(n, dtype=np.int32),
                            np.full(n, highspy.HighsVarType.kInteger))
    for t in undominated(s.d, larger=True):
        if np.isfinite(s.hi[t]):
            _add_row(h, -inf, float(s.hi[t]), np.arange(n), s.d[t])
    for t in undominated(s.d, larger=False):
        if s.lo[t] > _TOL:
            _add_row(h, float(s.lo[t]), inf, np.arange(n), s.d[t])
    for units, sep in pool:
        _add_cuts(h, units, sep)
    bound = _lp_rounds(h, s, pool, deadline)
    while True:
        if deadline is not None:
            left = deadline - time.monotonic()
            if left <= 0:
                return bound
            h.setOptionValue("time_limit", float(left))
        _run(h)
        info = h.getInfo()
        status = h.getModelStatus()
        if status == highspy.HighsModelStatus.kInfeasible:
            return np.inf
        bound = max(bound, float(info.mip_dual_bound))
        if info.primal_solution_status != 2:
            return bound
        x = np.asarray(h.getSolution().col_value) > 0.5
        part = _root_part(s, x)
        keep = np.zeros(n, bool)
        keep[part] = True
        if keep.sum() == x.sum():
            found.append(x)
            return bound
        grown = _greedy(s, keep) if keep[s.forced].all() else None
        if grown is not None and s.fits(grown):
            found.append(grown)
        best = min(float(s.r[m].sum()) for m in found) if found else np.inf
        if best - bound <= PRICE_GAP * max(1.0, abs(bound)):
            return bound
        lab = s.graph.components(x)
        for c in np.unique(lab[x & ~keep]).tolist():
            piece = np.flatnonzero(lab == c)
            units, sep = _beyond(s, piece, np.flatnonzero(x))
            pool.append((units, sep))
            _add_cuts(h, units, sep)
        if status != highspy.HighsModelStatus.kOptimal:
            return bound


def _lp_rounds(h, s: _Site, pool: list, deadline: float | None) -> float:
    """Root separator cuts violated by the LP relaxation's point, added until none is
    (at most ``LP_ROUNDS``); the last LP value, a bound on the pricing problem."""
    import highspy

    n = len(s.units)
    idx = np.arange(n, dtype=np.int32)
    h.changeColsIntegrality(n, idx, np.full(n, highspy.HighsVarType.kContinuous))
    value = -np.inf
    none = np.zeros(n, bool)
    try:
        for _ in range(LP_ROUNDS):
            if deadline is not None and time.monotonic() > deadline and value > -np.inf:
                break  # the first LP runs in any case: its value is the bound
            _run(h)
            if h.getModelStatus() != highspy.HighsModelStatus.kOptimal:
                break
            value = float(h.getInfo().objective_function_value)
            found = rooted_cuts(s.graph, np.asarray(h.getSolution().col_value), s.root, none)
            if not found:
                break
            for units, sep in found:
                pool.append((units, sep))
                _add_cuts(h, units, sep)
    finally:
        h.changeColsIntegrality(n, idx, np.full(n, highspy.HighsVarType.kInteger))
    return value


def _beyond(s: _Site, piece: np.ndarray,
            chosen: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """A smallest vertex set S of units outside the answer's zone ``chosen`` between a
    cut-off piece and the root (max-flow, so the cut is violated; the
    minimal separator of the piece's neighbourhood when none is found), and every unit
    S cuts off with the piece: each of them needs a unit of S in the zone. Where a river
    crossing or a narrow neck cuts the piece off, S is the crossing, and one round's cuts
    hold for the whole far side."""
    sep = min_separator(s.graph, piece, s.root, avoid=chosen)
    if sep is None or not len(sep):
        sep = separator(s.graph, piece, s.root)
    off = np.ones(len(s.units), bool)
    off[sep] = False
    lab = s.graph.components(off)
    return np.flatnonzero(lab == lab[piece[0]]), sep


def _run(h) -> None:
    """Run HiGHS; an error (not a status such as infeasible) is a bug, so it is raised."""
    import highspy

    if h.run() == highspy.HighsStatus.kError:
        raise RuntimeError(f"HiGHS failed on a pricing model: {h.getModelStatus()}")


def _add_row(h, lo: float, hi: float, cols: np.ndarray, vals: np.ndarray) -> None:
    nz = np.flatnonzero(vals)
    h.addRow(lo, hi, len(nz), cols[nz].astype(np.int32), np.asarray(vals)[nz].astype(float))


def _add_cuts(h, units: np.ndarray, sep: np.ndarray) -> None:
    """x[i] - sum_{s in sep} x[s] <= 0 for every i of the piece."""
    k, w = len(units), 1 + len(sep)
    idx = np.empty((k, w), np.int32)
    idx[:, 0] = units
    idx[:, 1:] = sep[None, :]
    vals = -np.ones((k, w))
    vals[:, 0] = 1.0
    h.addRows(k, np.full(k, -np.inf), np.zeros(k), k * w,
              np.arange(k, dtype=np.int32) * w, idx.ravel(), vals.ravel())


def _path_costs(s: _Site) -> np.ndarray:
    """Per local unit: the least sum of positive reduced costs on a path from the root to
    it (the unit included): every zone holding the unit pays at least that."""
    from scipy.sparse import csr_matrix
    from scipy.sparse.csgraph import dijkstra

    pos = np.maximum(s.r, 0.0)
    g = s.graph
    w = pos[g.v] + 1e-12  # arc u -> v costs v's positive part (zero weights kept)
    net = csr_matrix((w, (g.u, g.v)), shape=(g.n, g.n))
    return dijkstra(net, indices=s.root) + pos[s.root]


def _pruned(s: _Site, problem: Problem, graph: UnitGraph, reduced: np.ndarray,
            best: float) -> _Site:
    """The site without units no zone better than ``best`` can hold: a zone with unit i
    costs at least (all negative reduced costs) + (i's path cost from the root), so i goes
    when that exceeds ``best`` (a known zone's value). The min over zones is unchanged."""
    if not np.isfinite(best) or len(s.forced):
        return s
    floor = float(np.minimum(s.r, 0.0).sum())
    drop = floor + _path_costs(s) > best + _TOL * max(1.0, abs(best))
    if not drop.any():
        return s
    keep_r = np.asarray(reduced, float).copy()
    keep_r[s.units[drop]] = np.inf
    t = _Site(problem, graph, s.site, keep_r)
    t.kept = np.isin(s.units, t.units)
    return t


def price_connected(problem: Problem, graph: UnitGraph | None, site: int,
                    reduced: np.ndarray, *, exact: bool, time_limit: float | None,
                    pool: dict | None = None) -> Priced:
    """The best connected zones of ``site`` for the reduced costs ``reduced`` (n,).

    ``exact=False``: greedy growth, no bound (-inf). ``exact=True``: the greedy zone and the
    pricing MIP's zones with the MIP's dual bound (valid when cut short by ``time_limit``).
    ``pool`` (optional, kept by the caller for one problem) carries separator cuts between
    calls. A site whose root cannot be reached, or whose locked units cannot be joined to
    it, has no zone: bound inf.
    """
    if graph is None:
        graph = UnitGraph.of(problem)
    s = _Site(problem, graph, site, reduced)
    if not s.feasible:
        return Priced([], [], np.inf)
    masks: list[np.ndarray] = []
    g = _greedy(s)
    if g is not None and s.fits(g):
        masks.append(g)
    bound = -np.inf
    if exact:
        best = min((float(s.r[m].sum()) for m in masks), default=np.inf)
        s = _pruned(s, problem, graph, reduced, best)
        masks = [m[s.kept] for m in masks] if s.kept is not None else masks
        # cuts hold local indices: valid only over the same reachable units
        key = (site, s.units.tobytes())
        cuts = [] if pool is None else pool.setdefault(key, [])
        bound = _exact(s, cuts, time_limit, masks)
    zones, values, seen = [], [], set()
    for m in masks:
        key = m.tobytes()
        if key in seen:
            continue
        seen.add(key)
        zones.append(s.zone(m))
        values.append(float(s.r[m].sum()))
    return Priced(zones, values, bound)
