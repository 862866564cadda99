"""Separator cuts: networkx (an independent library) checks that every cut separates, is
minimal, is as small as the minimum node cut, and never removes a contiguous plan."""

from __future__ import annotations

import itertools

import networkx as nx
import numpy as np
import pytest
from test_connectivity import grid, nx_graph

from districting import Problem
from districting.engine import connectivity as cg
from districting.engine import cuts as cutting


def test_separator_separates_fragment_from_root():
    # a zone split in two: the separator must cut every path (networkx node connectivity)
    xy, edges = grid(5, 5)
    n = 25
    problem = Problem.from_arrays(np.ones((n, 2)), np.ones(n), edges=edges, roots=[0, 24])
    a = np.ones(n, np.int64)
    a[[0, 1, 5]] = 0
    a[[18, 19]] = 0  # fragment of zone 0 near the far corner
    graph = cg.UnitGraph.of(problem)
    frags = cg.fragments(problem, graph, a)
    assert [sorted(f.tolist()) for f in frags] == [[18, 19]]
    cuts = cutting.separator_cuts(problem, graph, a)
    # the fragment's own separator, then the smallest one (here the root's two neighbours)
    assert len(cuts) == 2
    for cut in cuts:
        g = nx_graph(n, edges)
        g.remove_nodes_from(cut.separator.tolist())
        assert not nx.has_path(g, 18, 0)
    sep = set(cuts[0].separator.tolist())
    # minimal: putting any one unit back reconnects
    for s in sep:
        h = nx_graph(n, edges)
        h.remove_nodes_from(sep - {s})
        assert nx.has_path(h, 18, 0)
    # minimum: as small as networkx's minimum node cut (independent library; Menger)
    g = nx_graph(n, edges)
    g.add_edges_from([("piece", 18), ("piece", 19)])
    assert len(cuts[1].separator) == len(nx.minimum_node_cut(g, "piece", 0))
    assert sorted(cuts[1].separator.tolist()) == [1, 5]


def split_graph_min_cut(n, edges, weight, source, sink):
    """Minimum weight of a vertex set separating ``source`` from ``sink``, by networkx's
    max-flow on its own split graph (an independent construction; Menger's theorem)."""
    g = nx.DiGraph()
    for v in range(n):
        cap = np.inf if v in (source, sink) else float(weight[v])
        g.add_edge(("in", v), ("out", v), capacity=cap)
    for u, v in edges:
        g.add_edge(("out", u), ("in", v), capacity=np.inf)
        g.add_edge(("out", v), ("in", u), capacity=np.inf)
    return nx.maximum_flow_value(g, ("in", source), ("out", sink))


def test_fractional_cut_weight_matches_networkx_and_separates():
    # 5x5 grid, root of site 0 at corner 0; unit 24 (far corner) fully in zone 0 while the
    # units around it carry little of zone 0: the LP point breaks a separator inequality
    xy, edges = grid(5, 5)
    n = 25
    problem = Problem.from_arrays(np.ones((n, 2)), np.ones(n), edges=edges, roots=[0, 12])
    point = np.zeros((n, 2))
    point[:, 0] = 0.5
    point[[0, 1, 5]] = [1.0, 0.0]
    point[[24]] = [1.0, 0.0]
    point[[19, 23]] = [0.2, 0.8]
    point[:, 1] = 1.0 - point[:, 0]
    point[12] = [0.0, 1.0]
    graph = cg.UnitGraph.of(problem)
    cuts = [c for c in cutting.fractional_cuts(problem, graph, point) if c.site == 0]
    expected = split_graph_min_cut(n, edges, point[:, 0], 24, 0)
    assert expected == pytest.approx(0.4)  # its two neighbours, 0.2 each
    assert cuts, "a violated cut was not found"
    cut = next(c for c in cuts if 24 in c.units.tolist())
    assert point[cut.separator, 0].sum() == pytest.approx(expected)
    g = nx_graph(n, edges)
    g.remove_nodes_from(cut.separator.tolist())
    assert not nx.has_path(g, 24, 0)
    # a point whose every unit reaches its root through heavier units breaks no cut
    solid = np.zeros((n, 2))
    solid[:, 0] = 1.0
    solid[12] = [0.0, 1.0]
    assert not [c for c in cutting.fractional_cuts(problem, graph, solid) if c.site == 0]


@pytest.mark.parametrize("seed", range(3))
def test_fractional_cuts_hold_for_every_contiguous_plan(seed):
    # 3x3 grid, 2 sites: every cut found at random fractional points holds for each of the
    # contiguous plans, enumerated with networkx (cuts must never remove a valid plan)
    rng = np.random.default_rng(seed)
    xy, edges = grid(3, 3)
    n, roots = 9, [0, 8]
    problem = Problem.from_arrays(np.ones((n, 2)), np.ones(n), edges=edges, roots=roots)
    graph = cg.UnitGraph.of(problem)
    g = nx_graph(n, edges)
    plans = []
    for combo in itertools.product(range(2), repeat=n):
        a = np.array(combo)
        if a[0] == 0 and a[8] == 1 and all(
                nx.is_connected(g.subgraph(np.flatnonzero(a == j).tolist())) for j in (0, 1)):
            plans.append(np.eye(2)[a])
    found = 0
    for _ in range(40):
        x0 = rng.random(n)
        point = np.column_stack([x0, 1 - x0])
        point[0], point[8] = [1, 0], [0, 1]
        for cut in cutting.fractional_cuts(problem, graph, point):
            found += 1
            for x in plans:
                lhs = x[cut.units, cut.site]
                assert (lhs <= x[cut.separator, cut.site].sum() + 1e-9).all()
    assert found > 0
