"""The exact flow route: contiguity as a single-commodity flow per site, in one HiGHS model.

For towns with few zones the separator-cut loop can hold a plan far above the optimum while
its bound is tight: each exact round's answer has a small disconnected piece, the repair
moves whole pieces between zones and lands well above the optimum, and the next round's cut
only removes that one piece (measured in ``benchmarks/bench_proof.py``). A formulation
that is exact in one solve avoids the loop: Shirabe's single-commodity flow (T. Shirabe, "A
model of contiguity for spatial unit allocation", Geographical Analysis 37(1), 2005, 2-16),
written here on the engine's own arrays (:func:`~districting.engine.formulation.formulate`)
so HiGHS receives it at once, warm-started from the best plan with its tree flows.

For site j with root r_j and the n_j units allowed to it, flow f[u, v, j] >= 0 runs on both
directions of every edge whose ends may both join j (never into r_j), and

- f[u, v, j] <= (n_j - 1) x[u, j] and f[u, v, j] <= (n_j - 1) x[v, j] (flow inside the zone);
- inflow - outflow = x[i, j] for every unit i != r_j allowed to j (each unit consumes one).

Every unit of zone j then receives flow from r_j along units of zone j: the zone is
connected and holds its root. Sites without a root unit are not handled (the route is then
not used). The route proves nothing the engine relies on beyond HiGHS's own bound of this
exact model, which is a valid lower bound of the problem.
"""

from __future__ import annotations

import time
from collections import deque
from collections.abc import Callable

import numpy as np
import scipy.sparse as sp

from ..problem import Problem
from . import tuning
from .answer import Answer, highs_assignment, highs_status, set_interrupt, set_start
from .formulation import formulate

__all__ = ["FlowRoute", "flow_size", "tree_flows"]


def _arcs(problem: Problem, colmap: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(tail, head, site) of every flow arc: both directions of each edge whose ends may both
    join the site, never into the site's root."""
    e = np.asarray(problem.edges, np.int64)
    both = np.concatenate([e, e[:, ::-1]])
    tails, heads, sites = [], [], []
    for j in range(problem.n_sites):
        ok = (colmap[both[:, 0], j] >= 0) & (colmap[both[:, 1], j] >= 0)
        ok &= both[:, 1] != problem.roots[j]
        tails.append(both[ok, 0])
        heads.append(both[ok, 1])
        sites.append(np.full(int(ok.sum()), j, np.int64))
    return np.concatenate(tails), np.concatenate(heads), np.concatenate(sites)


def tree_flows(problem: Problem, a: np.ndarray, sites, roots=None):
    """Flows of a plan on a BFS tree of each zone from its root: (tail, head, site, amount),
    each tree arc carrying the units of its subtree. A zone whose tree does not reach all
    its units (a disconnected zone) gets no flows. ``roots`` defaults to the problem's."""
    roots = problem.roots if roots is None else roots
    adj: list[list[int]] = [[] for _ in range(problem.n_units)]
    for u, v in np.asarray(problem.edges).tolist():
        adj[u].append(v)
        adj[v].append(u)
    out = []
    for j in sites:
        r = int(roots[j])
        if a[r] != j:
            continue
        parent, order, queue = {r: -1}, [], deque([r])
        while queue:
            u = queue.popleft()
            order.append(u)
            for v in adj[u]:
                if v not in parent and a[v] == j:
                    parent[v] = u
                    queue.append(v)
        if len(order) != int((a == j).sum()):
            continue
        size = dict.fromkeys(order, 1)
        for u in reversed(order[1:]):
            size[parent[u]] += size[u]
            out.append((parent[u], u, j, size[u]))
    return out


def flow_size(problem: Problem) -> int | None:
    """Flow arcs the route would add, or None when it does not apply (no graph, a site
    without a root unit)."""
    if problem.edges is None or problem.roots is None or (problem.roots < 0).any():
        return None
    allowed = problem.allowed
    e = np.asarray(problem.edges, np.int64)
    return int(2 * (allowed[e[:, 0]] & allowed[e[:, 1]]).sum())


class FlowRoute:
    """The full formulation plus flow columns and rows, passed to HiGHS as arrays."""

    def __init__(self, problem: Problem, threads: int | None = None) -> None:
        import highspy

        from .answer import quiet_highs

        self._hs, self.problem = highspy, problem
        f = formulate(problem)
        self.formulation = f
        self.xi, self.xj, self.colmap, self.ycol = f.xi, f.xj, f.colmap, f.ycol
        self.infeasible_reason = f.infeasible_reason
        a0, lo0, hi0 = f.matrix()
        tail, head, site = _arcs(problem, f.colmap)
        self.tail, self.head, self.site = tail, head, site
        n0, k = f.ncol, len(tail)
        self.n0 = n0
        fcol = n0 + np.arange(k)
        self.arc_of = {(int(u), int(v), int(j)): int(c)
                       for u, v, j, c in zip(tail, head, site, fcol, strict=True)}
        n_j = np.bincount(f.xj, minlength=problem.n_sites).astype(float)
        big = np.maximum(n_j[site] - 1.0, 0.0)
        # f - big x[tail] <= 0 and f - big x[head] <= 0
        r = np.arange(2 * k)
        link = sp.csr_matrix((np.concatenate([np.ones(2 * k), -np.concatenate([big, big])]),
                              (np.concatenate([r, r]),
                               np.concatenate([fcol, fcol, f.colmap[tail, site],
                                               f.colmap[head, site]]))),
                             shape=(2 * k, n0 + k))
        # inflow - outflow - x[i, j] = 0 for every pair (i, j) with i != r_j
        pairs = np.flatnonzero(f.xi != problem.roots[f.xj])
        prow = np.full(f.colmap.shape, -1, np.int64)
        prow[f.xi[pairs], f.xj[pairs]] = np.arange(len(pairs))
        into, out = prow[head, site], prow[tail, site]
        keep_out = out >= 0  # arcs out of a root have no balance row at the root
        bal = sp.csr_matrix((np.concatenate([np.ones(k), -np.ones(int(keep_out.sum())),
                                             -np.ones(len(pairs))]),
                             (np.concatenate([into, out[keep_out], np.arange(len(pairs))]),
                              np.concatenate([fcol, fcol[keep_out], pairs]))),
                            shape=(len(pairs), n0 + k))
        a = sp.vstack([sp.hstack([a0, sp.csc_matrix((a0.shape[0], k))]), link, bal]).tocsc()
        lp = highspy.HighsLp()
        lp.num_col_, lp.num_row_ = n0 + k, a.shape[0]
        lp.col_cost_ = np.concatenate([f.cost, np.zeros(k)])
        lp.col_lower_ = np.concatenate([f.lower, np.zeros(k)])
        lp.col_upper_ = np.concatenate([f.upper, big])
        lp.row_lower_ = np.concatenate([lo0, np.full(2 * k, -np.inf), np.zeros(len(pairs))])
        lp.row_upper_ = np.concatenate([hi0, np.zeros(2 * k), np.zeros(len(pairs))])
        lp.a_matrix_.format_ = highspy.MatrixFormat.kColwise
        lp.a_matrix_.start_ = a.indptr.astype(np.int32)
        lp.a_matrix_.index_ = a.indices.astype(np.int32)
        lp.a_matrix_.value_ = a.data
        integer, cont = highspy.HighsVarType.kInteger, highspy.HighsVarType.kContinuous
        lp.integrality_ = [integer] * n0 + [cont] * k
        self._cost = np.asarray(lp.col_cost_, float)
        h = quiet_highs()
        h.setOptionValue("threads", int(threads or tuning.HIGHS_THREADS))
        h.passModel(lp)
        self.h = h
        self.ncol = n0 + k
        self._stop: Callable[[], bool] = lambda: False
        h.cbMipInterrupt.subscribe(lambda e: set_interrupt(e, self._stop()))

    def vector(self, a: np.ndarray) -> np.ndarray:
        """Column values of a valid plan: x, y, feeder z and tree flows (each arc carries its
        subtree)."""
        p = self.problem
        x = np.zeros(self.ncol)
        c = self.colmap[np.arange(p.n_units), a]
        x[c[c >= 0]] = 1.0
        opened = np.bincount(a, minlength=p.n_sites) > 0
        x[self.ycol[opened & (self.ycol >= 0)]] = 1.0
        x[self.formulation.split_on(a)] = 1.0
        for u, v, j, amount in tree_flows(p, a, np.flatnonzero(opened).tolist()):
            x[self.arc_of[(u, v, j)]] = amount
        return x

    def solve(self, gap: float, time_left: float | None, start: np.ndarray | None,
              cancel: Callable[[], bool] | None) -> Answer:
        """One solve of the exact model; ``start`` must be a valid (connected) plan."""
        h = self.h
        if self.infeasible_reason:
            return Answer("infeasible", None, np.inf, np.inf, self.infeasible_reason)
        tl = np.inf if time_left is None else max(float(time_left), 0.01)
        h.setOptionValue("mip_rel_gap", float(gap))
        h.setOptionValue("time_limit", float(tl))
        deadline = time.monotonic() + tl + 0.5
        self._stop = lambda: (cancel is not None and cancel()) or time.monotonic() > deadline
        if start is not None:
            set_start(h, self.vector(np.asarray(start, np.int64)))
        h.run()
        info = h.getInfo()
        a = highs_assignment(h, self.xi, self.xj, self.problem.n_units)
        if a is not None and (a < 0).any():
            a = None
        status = highs_status(h)
        if status == "cancelled":
            status = "time_limit"
        if status == "time_limit" and cancel is not None and cancel():
            status = "cancelled"
        bound = float(info.mip_dual_bound) if status != "infeasible" else np.inf
        obj = float(info.objective_function_value) if a is not None else np.inf
        return Answer(status, a, obj, bound if not np.isnan(bound) else -np.inf)
