"""Contiguity as a single-commodity flow (Shirabe 2005) on the Pyomo model: exact in one solve.

The baseline the separator-cut loop is measured against (``benchmarks/bench_engine.py``) and
the form :mod:`districting.engine.diagnose` uses to decide whether connected zones are
possible at all. Added to a model built by :func:`districting.engine.pyomo_route.build_model`.
"""

from __future__ import annotations

import numpy as np
import pyomo.environ as pyo

from .flow_route import tree_flows

__all__ = ["contiguity_flow", "set_start_flow"]


def _sum(terms) -> object:
    return pyo.quicksum(terms) if terms else 0.0


def contiguity_flow(m: pyo.ConcreteModel) -> None:
    """The single-commodity flow formulation of contiguity, one commodity per site.

    Shirabe, T. (2005), "A model of contiguity for spatial unit allocation", Geographical
    Analysis 37(1), 2-16. For site j with root r_j and n_j allowed units, flow f[u, v, j] >= 0
    runs on both directions of every edge whose ends may both join j, and

    - consumption: sum_u f[u, i, j] - sum_v f[i, v, j] = x[i, j] for every unit i != r_j;
    - supply: sum_v f[r_j, v, j] - sum_u f[u, r_j, j] = sum_{i != r_j} x[i, j];
    - flow only inside the zone: f[u, v, j] <= (n_j - 1) x[u, j] and <= (n_j - 1) x[v, j].

    Every unit of zone j then receives its unit of flow from r_j along units of zone j, so the
    zone is connected and holds its root. A site without a root unit chooses its source:
    binary w[i, j] <= x[i, j], sum_i w[i, j] = y[j], supply s[i, j] <= (n_j - 1) w[i, j] and
    the consumption row of every unit gains + s[i, j] (Shirabe's source choice).
    """
    prob = m.problem
    roots_arr = prob.roots if prob.roots is not None else np.full(prob.n_sites, -1)
    edges = prob.edges
    arcs, big = [], {}
    nbrs: dict[tuple[int, int], tuple[list, list]] = {}
    for j in m.J:
        members = m.units_of[j]
        if not members:
            continue
        big[j] = float(len(members) - 1)
        ok = np.zeros(prob.n_units, bool)
        ok[members] = True
        e = edges[ok[edges[:, 0]] & ok[edges[:, 1]]]
        for u, v in e.tolist():
            arcs.append((u, v, j))
            arcs.append((v, u, j))
    m.flow_arcs = pyo.Set(dimen=3, initialize=arcs, ordered=True)
    m.f = pyo.Var(m.flow_arcs, domain=pyo.NonNegativeReals)
    for u, v, j in arcs:
        nbrs.setdefault((v, j), ([], []))[0].append(m.f[u, v, j])  # into v
        nbrs.setdefault((u, j), ([], []))[1].append(m.f[u, v, j])  # out of u
    m.flow_tail = pyo.Constraint(
        m.flow_arcs, rule=lambda m, u, v, j: m.f[u, v, j] <= big[j] * m.x[u, j]
    )
    m.flow_head = pyo.Constraint(
        m.flow_arcs, rule=lambda m, u, v, j: m.f[u, v, j] <= big[j] * m.x[v, j]
    )
    rootless = [j for j in big if roots_arr[j] < 0]
    m.source_pairs = pyo.Set(dimen=2, initialize=[(i, j) for j in rootless
                                                  for i in m.units_of[j]], ordered=True)
    m.source = pyo.Var(m.source_pairs, domain=pyo.Binary)
    m.supply = pyo.Var(m.source_pairs, domain=pyo.NonNegativeReals)
    m.source_in_zone = pyo.Constraint(
        m.source_pairs, rule=lambda m, i, j: m.source[i, j] <= m.x[i, j]
    )
    m.source_supply = pyo.Constraint(
        m.source_pairs, rule=lambda m, i, j: m.supply[i, j] <= big[j] * m.source[i, j]
    )
    m.J_rootless = pyo.Set(initialize=rootless, ordered=True)
    m.one_source = pyo.Constraint(
        m.J_rootless,
        rule=lambda m, j: _sum([m.source[i, j] for i in m.units_of[j]]) == m.y[j],
    )

    def balance(m, i, j):
        into, out = nbrs.get((i, j), ([], []))
        net_in = _sum(into) - _sum(out)
        r = int(roots_arr[j])
        if r == i:
            others = [m.x[k, j] for k in m.units_of[j] if k != r]
            return -net_in == _sum(others)
        if r < 0:
            return net_in + m.supply[i, j] == m.x[i, j]
        return net_in == m.x[i, j]

    m.flow_pairs = pyo.Set(dimen=2, initialize=[(i, j) for j in big for i in m.units_of[j]],
                           ordered=True)
    m.flow_balance = pyo.Constraint(m.flow_pairs, rule=balance)


def set_start_flow(m: pyo.ConcreteModel, a: np.ndarray) -> None:
    """Flows of a connected start: on a BFS tree from each source, an arc carries its subtree."""
    prob = m.problem
    for var in m.f.values():
        var.set_value(0)
    for var in list(m.source.values()) + list(m.supply.values()):
        var.set_value(0)
    roots_arr = prob.roots if prob.roots is not None else np.full(prob.n_sites, -1)
    a = np.asarray(a, np.int64)
    firsts = {j: int(np.flatnonzero(a == j)[0]) for j in m.J if (a == j).any()}
    roots = np.array([roots_arr[j] if roots_arr[j] >= 0 else firsts.get(j, 0)
                      for j in range(prob.n_sites)])
    for u, v, j, amount in tree_flows(prob, a, list(firsts), roots):
        m.f[u, v, j].set_value(amount)
    for j in firsts:
        if roots_arr[j] < 0:  # the source chosen: the zone's first unit
            m.source[int(roots[j]), j].set_value(1)
            m.supply[int(roots[j]), j].set_value(int((a == j).sum()))
