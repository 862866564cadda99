"""Units left out of the MIP: cuts that can be written without them, and the corridor of
left-out units a fragment needs. networkx (an independent library) checks that each cut
separates and that each corridor unit lies on a shortest path; the small cases are worked
by hand; whole solves that take units in reach the optimum of the exact flow model written
in the tests alone (Shirabe 2005, with scipy; tests/flow_milp.py)."""

from __future__ import annotations

import networkx as nx
import numpy as np
import pytest
from flow_milp import flow_optimum
from test_connectivity import grid, nx_graph, random_town

from districting import Problem, solve
from districting.engine import connectivity as cg
from districting.engine import cuts as cutting
from districting.engine import session
from districting.engine.formulation import formulate, separator_rows


def corner_town():
    """5 x 5 grid, site 0 rooted at unit 0, site 1 at unit 24; units 6 and 11 have no
    students. Zone 0 holds 0, 1, 5 and, cut off, unit 12; 6 and 11 are left out."""
    _, edges = grid(5, 5)
    n = 25
    demand = np.ones(n)
    demand[[6, 11]] = 0
    problem = Problem.from_arrays(np.ones((n, 2)), demand, edges=edges, roots=[0, 24])
    a = np.ones(n, np.int64)
    a[[0, 1, 5, 12]] = 0
    a[[6, 11]] = -1
    dropped = np.zeros(n, bool)
    dropped[[6, 11]] = True
    return problem, edges, a, dropped


def test_fragment_joined_through_left_out_units_gets_no_cut_but_a_corridor():
    # worked by hand: 12 reaches the root only through 11 and 6 (12-11-6-1-0 or
    # 12-11-6-5-0), which the model leaves out, so no row can cut it; the corridor is
    # exactly those two units
    problem, edges, a, dropped = corner_town()
    graph = cg.UnitGraph.of(problem)
    passable = cg.free_units(problem)
    assert passable.tolist() == dropped.tolist()
    cuts = cutting.separator_cuts(problem, graph, a, passable=passable, dropped=dropped)
    assert not [c for c in cuts if 12 in c.units.tolist()]
    need = cutting.corridor(problem, graph, a, dropped)
    assert np.flatnonzero(need).tolist() == [6, 11]
    # with them in the model the fragment is cut, by a set that separates it (networkx)
    cuts = cutting.separator_cuts(problem, graph, a, passable=passable,
                                  dropped=dropped & ~need)
    mine = [c for c in cuts if 12 in c.units.tolist()]
    assert mine
    for cut in mine:
        g = nx_graph(problem.n_units, edges)
        g.remove_nodes_from(cut.separator.tolist())
        assert not nx.has_path(g, 12, 0)


def test_units_the_zone_may_not_take_are_walls():
    # the same town with site 0 forbidden on unit 11: 12 can no longer reach the root
    # through left-out units, so it is cut at once, by a set without unit 6 or 11 that
    # the model can write (11 weighs nothing: zone 0 can never take it)
    problem, edges, a, dropped = corner_town()
    forbidden = np.zeros((problem.n_units, 2), bool)
    forbidden[11, 0] = True
    problem = problem.replace(forbidden=forbidden)
    graph = cg.UnitGraph.of(problem)
    passable = cg.free_units(problem)
    assert not cutting.corridor(problem, graph, a, dropped).any()
    cuts = cutting.separator_cuts(problem, graph, a, passable=passable, dropped=dropped)
    mine = [c for c in cuts if 12 in c.units.tolist()]
    assert mine
    for cut in mine:
        assert not (dropped[cut.separator] & problem.allowed[cut.separator, 0]).any()
        g = nx_graph(problem.n_units, edges)
        g.remove_nodes_from(cut.separator.tolist())
        g.remove_nodes_from([11])  # a wall for zone 0 (when not in the separator already)
        assert not nx.has_path(g, 12, 0)
    # and the model writes it: a row per unit, without unit 11 (it has no column there)
    f = formulate(problem, drop=dropped)
    block = separator_rows(f, mine)
    assert block.n_rows == sum(len(c.units) for c in mine)


def test_rows_through_a_left_out_unit_the_zone_may_take_are_not_written():
    # a cut whose separator holds unit 6 (left out, zone 0 may take it): x[6, 0] is not
    # in the model, so the row would not be valid there; it is skipped
    problem, _, _, dropped = corner_town()
    f = formulate(problem, drop=dropped)
    cut = cg.Cut(site=0, units=np.array([12]), separator=np.array([6, 7, 13, 17]))
    assert separator_rows(f, [cut]).n_rows == 0
    fine = cg.Cut(site=0, units=np.array([12]), separator=np.array([7, 13, 17, 2]))
    assert separator_rows(f, [fine]).n_rows == 1


def shortest_path_units(edges, n, inside, sources, target):
    """Units on some shortest path from ``sources`` to ``target`` inside ``inside``
    (networkx, written apart from the code under test)."""
    g = nx_graph(n, edges).subgraph(np.flatnonzero(inside).tolist()).copy()
    g.add_edges_from(("src", int(s)) for s in sources)
    out = set()
    for path in nx.all_shortest_paths(g, "src", int(target)):
        out.update(v for v in path if v != "src")
    return out


@pytest.mark.parametrize("seed", range(8))
def test_cuts_and_corridors_on_random_grids(seed):
    # random zones on a grid with units without students, a random half of those left
    # out: every cut separates its units from the root (networkx) and can be written
    # (no left-out unit the zone may take); every fragment without a cut that reaches its
    # root through left-out units gets a corridor, and every corridor unit is left out and
    # lies on a shortest such path (networkx)
    problem, edges = random_town(seed, w=8, h=7, m=3, empty=0.45)
    rng = np.random.default_rng(seed)
    n, m = problem.n_units, problem.n_sites
    graph = cg.UnitGraph.of(problem)
    passable = cg.free_units(problem)
    dropped = passable & (rng.random(n) < 0.5)
    a = np.argmin(problem.cost + rng.uniform(0, 3, (n, m)), axis=1).astype(np.int64)
    a[problem.roots] = np.arange(m)
    a[dropped] = -1
    allowed = problem.allowed
    cuts = cutting.separator_cuts(problem, graph, a, passable=passable, dropped=dropped)
    for cut in cuts:
        j = cut.site
        assert not (dropped[cut.separator] & allowed[cut.separator, j]).any()
        g = nx_graph(n, edges)
        g.remove_nodes_from(cut.separator.tolist())
        for i in cut.units.tolist():
            assert not nx.has_path(g, i, int(problem.roots[j]))
    need = cutting.corridor(problem, graph, a, dropped)
    assert not (need & ~dropped).any()
    cut_units = {i for c in cuts for i in c.units.tolist()}
    expected = set()
    for piece in cg.fragments(problem, graph, a):
        j, root = int(a[piece[0]]), int(problem.roots[a[piece[0]]])
        inside = (a == j) | (dropped & allowed[:, j])
        g = nx_graph(n, edges).subgraph(np.flatnonzero(inside).tolist())
        if nx.has_path(g, int(piece[0]), root):
            path_units = shortest_path_units(edges, n, inside, piece, root)
            expected |= {v for v in path_units if dropped[v]}
        else:
            assert set(piece.tolist()) <= cut_units, "a fragment without a cut or corridor"
    assert set(np.flatnonzero(need).tolist()) == expected


def scattered_town(seed: int) -> Problem:
    """9 x 8 grid, 4 schools, 55% of units without students, travel = distance plus a
    random 0-4 per pair (so zones want to break up), capacity 1.25 x the mean load."""
    rng = np.random.default_rng(900 + seed)
    xy, edges = grid(9, 8)
    n = len(xy)
    roots = rng.choice(n, 4, replace=False)
    dist = np.hypot(*(xy[:, None, :] - xy[roots][None, :, :]).transpose(2, 0, 1))
    cost = dist + rng.uniform(0, 4, (n, 4))
    d = rng.integers(1, 4, n).astype(float)
    d[rng.random(n) < 0.55] = 0
    d[roots] = 1
    cap = np.full(4, d.sum() / 4 * 1.25)
    return Problem.from_arrays(cost, d, capacity=cap, edges=edges, roots=roots)


@pytest.mark.parametrize("seed", [27, 79])
def test_solves_that_take_units_in_reach_the_flow_optimum(seed, monkeypatch):
    # on these towns a round's answer has a piece joined to its school only through units
    # left out of the MIP, so the session takes a corridor of them in (counted by a spy
    # that calls the real method); the plan is still the exact optimum
    taken = []
    real = session.Session._bring_in

    def spy(self, st, answer, only):
        before = int(st.dropped.sum())
        out = real(self, st, answer, only)
        left_out = np.zeros(st.problem.n_units, bool) if st.dropped is None else st.dropped
        taken.append(before - int(left_out.sum()))
        # the model in use now has columns for the units taken in
        assert np.array_equal(np.asarray(st.backend.drop, bool), left_out)
        return out

    monkeypatch.setattr(session.Session, "_bring_in", spy)
    problem = scattered_town(seed)
    plan = solve(problem, gap=0.0)
    want, _ = flow_optimum(problem, 120)
    assert taken and all(k > 0 for k in taken)
    assert plan.status == "optimal"
    assert plan.objective == pytest.approx(want, rel=1e-7)
