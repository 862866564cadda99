"""An exact contiguous formulation written in the tests alone, with scipy.optimize.milp.

Single-commodity flow contiguity (T. Shirabe, "A model of contiguity for spatial unit
allocation", Geographical Analysis 37 (2005) 2-16): for each school j, its own unit (root)
sends one unit of flow to every other unit of its zone along arcs of the unit graph, and
an arc carries flow for j only between units that are both in j's zone. Capacity and the
utilization band hold in every demand row. Nothing here reads engine code: the problem's
stored arrays are read directly, and the model is built row by row from the formulas.
"""

from __future__ import annotations

import itertools

import numpy as np
import scipy.optimize as so
import scipy.sparse as sp


def flow_optimum(problem, time_limit: float = 60.0) -> tuple[float | None, np.ndarray | None]:
    """(optimum, assignment), or (None, None) when scipy proves there is no plan."""
    cost = np.asarray(problem.cost, float)
    n, m = cost.shape
    demand = np.asarray(problem.demand, float)
    closed = np.asarray(problem.closed_sites, bool)
    locks = np.asarray(problem.locks)
    allowed = np.isfinite(cost) & ~np.asarray(problem.forbidden, bool) & ~closed[None, :]
    for i in np.flatnonzero(locks >= 0):
        allowed[i] = False
        allowed[i, locks[i]] = True
    d0 = demand[0]
    w = np.where(allowed, d0[:, None] * np.where(np.isfinite(cost), cost, 0.0), 0.0)
    cur = np.asarray(problem.current)
    if problem.stability_weight:
        moved = (cur[:, None] >= 0) & (np.arange(m)[None, :] != cur[:, None])
        w = w + problem.stability_weight * d0[:, None] * moved
    pairs = [(i, j) for i in range(n) for j in range(m) if allowed[i, j]]
    xcol = {pair: k for k, pair in enumerate(pairs)}
    ycol = {j: len(pairs) + j for j in range(m)}
    edges = np.asarray(problem.edges)
    roots = np.asarray(problem.roots)
    arcs = [(u, v, j) for j in range(m) for a, b in edges.tolist() for u, v in ((a, b), (b, a))
            if allowed[u, j] and allowed[v, j] and v != roots[j]]
    base = len(pairs) + m
    fcol = {arc: base + k for k, arc in enumerate(arcs)}
    ncols = base + len(arcs)

    rows, cols, vals, lo, hi = [], [], [], [], []

    def row(terms, low, high):
        r = len(lo)
        for c, v in terms:
            rows.append(r)
            cols.append(c)
            vals.append(v)
        lo.append(low)
        hi.append(high)

    for i in range(n):  # every unit in one zone
        row([(xcol[i, j], 1.0) for j in range(m) if allowed[i, j]], 1, 1)
    for (_i, j), k in xcol.items():  # only open schools take units
        row([(k, 1.0), (ycol[j], -1.0)], -np.inf, 0)
    for j in range(m):  # an open school holds its own unit
        r = int(roots[j])
        row([(xcol[r, j], 1.0), (ycol[j], -1.0)] if allowed[r, j] else [(ycol[j], 1.0)], 0, 0)
    always = ~closed if problem.p is None else np.asarray(problem.open_sites, bool)
    if problem.p is not None:
        row([(ycol[j], 1.0) for j in range(m)], problem.p, problem.p)
    if problem.capacity is not None:
        cap = np.asarray(problem.capacity, float)
        for t, j in itertools.product(range(demand.shape[0]), range(m)):
            load = [(xcol[i, j], demand[t, i]) for i in range(n) if allowed[i, j]]
            row(load + [(ycol[j], -problem.max_util[j] * cap[j])], -np.inf, 0)
            row(load + [(ycol[j], -problem.min_util[j] * cap[j])], 0, np.inf)
    if problem.max_moved is not None:
        stay = [(xcol[i, int(cur[i])], d0[i]) for i in range(n)
                if cur[i] >= 0 and allowed[i, cur[i]]]
        row(stay, d0[cur >= 0].sum() - problem.max_moved, np.inf)
    big = n - 1
    inflow: dict = {}
    outflow: dict = {}
    for (u, v, j), k in fcol.items():
        outflow.setdefault((u, j), []).append(k)
        inflow.setdefault((v, j), []).append(k)
        row([(k, 1.0), (xcol[v, j], -big)], -np.inf, 0)  # flow only into the zone ...
        row([(k, 1.0), (xcol[u, j], -big)], -np.inf, 0)  # ... and only out of it
    for (i, j), k in xcol.items():  # every unit but the root consumes one unit of flow
        if i == roots[j]:
            continue
        terms = [(c, 1.0) for c in inflow.get((i, j), [])]
        terms += [(c, -1.0) for c in outflow.get((i, j), [])]
        row(terms + [(k, -1.0)], 0, 0)

    c = np.zeros(ncols)
    for (i, j), k in xcol.items():
        c[k] = w[i, j]
    lb = np.zeros(ncols)
    ub = np.full(ncols, np.inf)
    ub[:base] = 1.0
    for j in range(m):
        lb[ycol[j]] = 1.0 if always[j] else 0.0
        ub[ycol[j]] = 0.0 if closed[j] else 1.0
    integ = np.zeros(ncols)
    integ[:base] = 1
    a = sp.csr_matrix((vals, (rows, cols)), shape=(len(lo), ncols))
    res = so.milp(c, constraints=so.LinearConstraint(a, lo, hi), integrality=integ,
                  bounds=so.Bounds(lb, ub),
                  options={"mip_rel_gap": 1e-9, "time_limit": time_limit})
    if res.status == 2:
        return None, None
    assert res.status == 0, f"the flow model did not prove an optimum: {res.message}"
    assign = np.full(n, -1, np.int64)
    for (i, j), k in xcol.items():
        if res.x[k] > 0.5:
            assign[i] = j
    return float(res.fun), assign
