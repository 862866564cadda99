"""Local search over contiguous plans, checked with networkx (an independent library).

Hand-made grids: a plan with fragments and an over-full school goes in, a valid plan comes
out (every zone connected and holding its root, every school inside its band in every
year), and the relocate / exchange moves never raise the cost.
"""

from __future__ import annotations

import networkx as nx
import numpy as np
from plan_check import assert_plan_valid

from districting import Problem
from districting.engine import improve as ls
from districting.engine import rebalance as rb
from districting.engine import repair
from districting.engine.connectivity import UnitGraph


def grid(w: int, h: int):
    xy = np.array([(x, y) for y in range(h) for x in range(w)], float)
    edges = [(y * w + x, y * w + x + 1) for y in range(h) for x in range(w - 1)]
    edges += [(y * w + x, (y + 1) * w + x) for y in range(h - 1) for x in range(w)]
    return xy, edges


def zones_connected(a, problem, edges) -> bool:
    g = nx.Graph(edges)
    g.add_nodes_from(range(problem.n_units))
    for j in range(problem.n_sites):
        members = np.flatnonzero(a == j).tolist()
        if members and (not nx.is_connected(g.subgraph(members))
                        or int(problem.roots[j]) not in members):
            return False
    return True


def make(capacity, seed=0, years=2):
    xy, edges = grid(8, 6)
    sites = np.array([0, 7, 44])
    cost = np.hypot(xy[:, None, 0] - xy[sites][None, :, 0], xy[:, None, 1] - xy[sites][None, :, 1])
    rng = np.random.default_rng(seed)
    d = rng.integers(1, 6, size=(years, len(xy))).astype(float)
    d[:, [20, 21, 28]] = 0  # empty units (a park)
    prob = Problem.from_arrays(cost, d, capacity=capacity, edges=edges, roots=sites,
                               max_util=1.0, min_util=0.3)
    return prob, edges


def objective(problem, a) -> float:
    return float(problem.weighted_cost[np.arange(problem.n_units), a].sum())


def loads(problem, a):
    return np.stack([np.bincount(a, weights=row, minlength=problem.n_sites)
                     for row in problem.demand])


def test_rebalance_clears_an_over_full_school_in_every_year():
    # nearest-school zones put 47 and 46 students into school 0 (cap 40) in the two years
    prob, edges = make(capacity=[40, 70, 120])
    g = UnitGraph.of(prob)
    a = repair.absorb(prob, g, np.argmin(prob.cost, axis=1))
    assert a is not None and zones_connected(a, prob, edges)
    assert (loads(prob, a)[:, 0] > 40).all()
    b = rb.rebalance(prob, g, a)
    assert b is not None
    assert (loads(prob, b)[:, 0] <= 40).all()
    assert_plan_valid(prob, b)  # the independent checker
    assert zones_connected(b, prob, edges)


def test_improve_never_raises_the_cost_and_keeps_the_plan_valid():
    for seed in range(4):
        prob, edges = make(capacity=[70, 70, 70], seed=seed)
        g = UnitGraph.of(prob)
        a = repair.make_valid(prob, g, np.argmin(prob.cost, axis=1))
        assert a is not None
        b = ls.improve(prob, g, a)
        assert objective(prob, b) <= objective(prob, a) + 1e-9
        assert_plan_valid(prob, b)  # the independent checker
        assert zones_connected(b, prob, edges)


def test_locked_units_and_roots_never_move():
    xy, edges = grid(8, 6)
    sites = np.array([0, 7, 44])
    cost = np.hypot(xy[:, None, 0] - xy[sites][None, :, 0], xy[:, None, 1] - xy[sites][None, :, 1])
    d = np.ones((1, len(xy)))
    prob = Problem.from_arrays(cost, d, capacity=[20, 20, 20], edges=edges, roots=sites,
                               locks={9: 0})
    g = UnitGraph.of(prob)
    a = np.argmin(prob.cost, axis=1)
    a[9] = 0
    b = repair.make_valid(prob, g, a)
    assert b is not None
    assert b[9] == 0 and list(b[sites]) == [0, 1, 2]
    assert_plan_valid(prob, b)  # the independent checker


def test_rebalance_passes_the_excess_along_a_chain_of_zones():
    # Hand-worked: path 0-1-2-3-4-5, zones A={0,1} (root 0), B={2,3} (root 2), C={4,5}
    # (root 5); students 5,3,5,3,1,1; caps A 6, B 8, C 6. A holds 8 (2 over), B is full,
    # C has room for 4. Handing unit 1 (3 students) to B clears A but puts B 3 over, so no
    # single move lowers the excess and none keeps it equal; the chain 1: A->B, 3: B->C
    # ends with loads 5, 8, 5: every school in band.
    edges = [(k, k + 1) for k in range(5)]
    cost = np.abs(np.arange(6)[:, None] - np.array([0, 2, 5])[None, :]).astype(float) + 1
    d = np.array([5, 3, 5, 3, 1, 1], float)
    prob = Problem.from_arrays(cost, d, capacity=[6, 8, 6], edges=edges, roots=[0, 2, 5])
    g = UnitGraph.of(prob)
    a = np.array([0, 0, 1, 1, 2, 2])
    b = rb.rebalance(prob, g, a)
    assert b is not None
    assert list(b) == [0, 1, 1, 2, 2, 2]
    assert list(loads(prob, b)[0]) == [5, 8, 5]
    assert zones_connected(b, prob, edges)


def test_leaving_unit_connectivity_agrees_with_networkx():
    # _stays_connected (interleaved searches from the leaving unit's neighbours) against
    # networkx.has_path on random graphs with two zones
    from districting.engine.connectivity import stays_connected as _stays_connected

    rng = np.random.default_rng(0)
    for t in range(400):
        n = int(rng.integers(5, 30))
        gr = nx.gnm_random_graph(n, int(rng.integers(n, 3 * n)), seed=t)
        nbrs = [list(gr[x]) for x in range(n)]
        al = [int(z) for z in rng.integers(0, 2, n)]
        i = int(rng.integers(n))
        j = al[i]
        rest = gr.subgraph([x for x in range(n) if al[x] == j and x != i])
        same = [w for w in nbrs[i] if al[w] == j]
        expected = all(nx.has_path(rest, same[0], w) for w in same[1:])
        assert _stays_connected(i, j, al, nbrs) == expected


def test_cut_units_are_the_articulation_points_of_each_zone():
    # cut_units (iterative Hopcroft-Tarjan over one zone's induced subgraph) against
    # networkx.articulation_points of that subgraph, on random graphs with three zones; and
    # ZoneCuts, which answers stays_connected from them, agrees with it for every unit while
    # fresh, and never says "yes" wrongly after moves
    from districting.engine.connectivity import stays_connected
    from districting.engine.zone_cuts import ZoneCuts, cut_units

    rng = np.random.default_rng(1)
    for t in range(300):
        n = int(rng.integers(3, 40))
        gr = nx.gnm_random_graph(n, int(rng.integers(n - 1, 3 * n)), seed=t)
        nbrs = [list(gr[x]) for x in range(n)]
        al = [int(z) for z in rng.integers(0, 3, n)]
        av = np.array(al)
        cuts = ZoneCuts(al, nbrs)
        for j in range(3):
            units = [x for x in range(n) if al[x] == j]
            expected = set(nx.articulation_points(gr.subgraph(units)))
            assert cut_units(units, j, al, nbrs) == expected, (t, j)
        for i in rng.permutation(n).tolist() * 2:  # the second pass reads the kept cuts
            assert cuts.keeps(i, al[i], av) == stays_connected(i, al[i], al, nbrs), (t, i)
        for _ in range(40):  # moves, each zone's changes told: "yes" stays true throughout
            i, k = int(rng.integers(n)), int(rng.integers(3))
            j, al[i], av[i] = al[i], k, k
            cuts.changed(j, k)
            for x in range(n):
                if cuts.keeps(x, al[x], av):
                    assert stays_connected(x, al[x], al, nbrs), (t, x)
        cuts.changed()
        for x in range(n):  # computed afresh: exact again
            for _ in range(6):  # past the first single searches
                assert cuts.keeps(x, al[x], av) == stays_connected(x, al[x], al, nbrs), (t, x)


def test_rebalance_keeps_zones_connected_over_many_moves():
    # Long rebalances on 14 x 10 grids with four schools: each move changes two zones, so
    # a zone's cut units kept from before a move would let a unit leave that now splits
    # its zone. networkx checks every zone afterwards, the plan checker every band.
    xy, edges = grid(14, 10)
    sites = np.array([0, 13, 126, 139])
    cost = np.hypot(xy[:, None, 0] - xy[sites][None, :, 0], xy[:, None, 1] - xy[sites][None, :, 1])
    for seed in range(6):
        rng = np.random.default_rng(seed)
        d = rng.integers(1, 6, size=(2, len(xy))).astype(float)
        cap = np.full(4, d.sum(axis=1).max() / 4 * 1.06)
        cap[seed % 4] *= 0.75  # one small school: its nearest zone far over
        cap[(seed + 1) % 4] *= 1.3
        prob = Problem.from_arrays(cost, d, capacity=cap, edges=edges, roots=sites,
                                   max_util=1.0, min_util=0.5)
        g = UnitGraph.of(prob)
        a = repair.absorb(prob, g, np.argmin(prob.cost, axis=1))
        b = rb.rebalance(prob, g, a)
        assert b is not None, seed
        assert zones_connected(b, prob, edges), seed
        assert_plan_valid(prob, b)  # the independent checker
