"""The Pyomo reference model: same optimum as independent routes, exact contiguity forms."""

from __future__ import annotations

import itertools

import networkx as nx
import numpy as np
import pytest
import scipy.optimize as so
import scipy.sparse as sp
from plan_check import assert_plan_valid

from districting import Problem
from districting.engine.pyomo_route import add_separator_cut, build_model, solve_model


# ---------------------------------------------------------------------------- helpers
def grid(rows: int, cols: int):
    xy = np.array([(r, c) for r in range(rows) for c in range(cols)], float)
    edges = [(r * cols + c, r * cols + c + 1) for r in range(rows) for c in range(cols - 1)]
    edges += [(r * cols + c, (r + 1) * cols + c) for r in range(rows - 1) for c in range(cols)]
    return xy, edges


def cut_loop(problem: Problem, max_rounds: int = 100):
    """Separator cuts in rounds through add_separator_cut, connectivity checked by networkx.

    For a zone piece C that misses its root, the neighbours N(C) outside C separate every
    unit of C from the root, so x[i, j] <= sum_{s in N(C)} x[s, j] is valid for i in C.
    """
    graph = nx.Graph()
    graph.add_nodes_from(range(problem.n_units))
    graph.add_edges_from(problem.edges.tolist())
    m = build_model(problem, "cuts")
    for _ in range(max_rounds):
        res = solve_model(m, gap=1e-9)
        assert res.status == "optimal"
        added = 0
        for j in np.flatnonzero(res.open_sites):
            zone = np.flatnonzero(res.assignment == j).tolist()
            root = int(problem.roots[j])
            for comp in nx.connected_components(graph.subgraph(zone)):
                if root in comp:
                    continue
                sep = set().union(*(graph[u] for u in comp)) - comp
                for i in comp:
                    add_separator_cut(m, i, int(j), sep)
                    added += 1
        if not added:
            return res, len(m.separator_cuts)
    raise AssertionError("cut loop did not converge")


def connected_zones(problem: Problem, assignment: np.ndarray) -> bool:
    graph = nx.Graph(problem.edges.tolist())
    graph.add_nodes_from(range(problem.n_units))
    for j in np.unique(assignment):
        zone = np.flatnonzero(assignment == j).tolist()
        if not nx.is_connected(graph.subgraph(zone)) or problem.roots[j] not in zone:
            return False
    return True


def scipy_milp_optimum(problem: Problem) -> float:
    """The same MIP written independently with scipy.optimize.milp (HiGHS through SciPy).

    Columns: x[i, j] for every unit-site pair (disallowed pairs get upper bound 0), then
    y[j]. Rows written straight from the formulas in districting.problem's notation.
    """
    n, m, T = problem.n_units, problem.n_sites, problem.n_years
    allowed = problem.allowed
    w = np.where(allowed, problem.weighted_cost, 0.0)
    nx_ = n * m

    def xcol(i, j):
        return i * m + j

    c = np.concatenate([w.ravel(), np.zeros(m)])
    lb = np.zeros(nx_ + m)
    ub = np.concatenate([allowed.ravel().astype(float), (~problem.closed_sites).astype(float)])
    lb[nx_:][problem.always_open] = 1.0
    if problem.p is None:
        lb[nx_:][~problem.closed_sites] = 1.0
    rows, lo, hi = [], [], []

    def row(coefs, low, high):
        r = np.zeros(nx_ + m)
        for k, v in coefs:
            r[k] += v
        rows.append(r)
        lo.append(low)
        hi.append(high)

    for i in range(n):
        row([(xcol(i, j), 1.0) for j in range(m)], 1, 1)
    for i, j in itertools.product(range(n), range(m)):
        row([(xcol(i, j), 1.0), (nx_ + j, -1.0)], -np.inf, 0)
    if problem.p is not None:
        row([(nx_ + j, 1.0) for j in range(m)], problem.p, problem.p)
    if problem.roots is not None:
        for j in range(m):
            if problem.roots[j] >= 0:
                row([(xcol(int(problem.roots[j]), j), 1.0), (nx_ + j, -1.0)], 0, 0)
    for t, j in itertools.product(range(T), range(m)):
        load = [(xcol(i, j), problem.demand[t, i]) for i in range(n)]
        cap = problem.capacity[j]
        row(load + [(nx_ + j, -problem.max_util[j] * cap)], -np.inf, 0)
        row(load + [(nx_ + j, -problem.min_util[j] * cap)], 0, np.inf)
    if problem.max_moved is not None:
        cur = problem.current
        stay = [(xcol(i, int(cur[i])), problem.demand[0, i]) for i in range(n) if cur[i] >= 0]
        total = sum(problem.demand[0, i] for i in range(n) if cur[i] >= 0)
        row(stay, total - problem.max_moved, np.inf)
    cons = so.LinearConstraint(sp.csr_matrix(np.array(rows)), lo, hi)
    res = so.milp(c, constraints=cons, integrality=np.ones(nx_ + m),
                  bounds=so.Bounds(lb, ub), options={"mip_rel_gap": 1e-9})
    assert res.status == 0, res.message
    return float(res.fun)


def rich_problem(seed: int = 3) -> Problem:
    """Candidates with p, two demand rows, floor, lock, forbid, stability and a move limit."""
    rng = np.random.default_rng(seed)
    n, m = 14, 4
    units = rng.uniform(0, 10, (n, 2))
    sites = rng.uniform(0, 10, (m, 2))
    cost = np.linalg.norm(units[:, None] - sites[None], axis=2)
    d0 = rng.integers(1, 12, n).astype(float)
    demand = np.vstack([d0, d0 * rng.uniform(0.8, 1.3, n)])
    capacity = np.full(m, demand.sum(axis=1).max() * 0.45)
    forbidden = np.zeros((n, m), bool)
    forbidden[2, 1] = True
    current = np.argmin(cost, axis=1)
    return Problem.from_arrays(
        cost, demand, capacity, p=3, open_sites=[True, False, False, False],
        locks={5: 3}, min_util=0.3, max_util=0.95, forbidden=forbidden, current=current,
        stability_weight=0.7, max_moved=float(d0.sum() * 0.6),
    )


# ---------------------------------------------------------------------------- routes agree
def test_pyomo_model_matches_independent_scipy_milp():
    # Independent second route: scipy.optimize.milp on a formulation written in this test.
    for seed in (3, 4, 5):
        problem = rich_problem(seed)
        res = solve_model(build_model(problem, "none"), gap=1e-9)
        assert res.status == "optimal"
        assert res.objective == pytest.approx(scipy_milp_optimum(problem), rel=1e-7)
        assert res.bound == pytest.approx(res.objective, rel=1e-6)
        assert res.assignment[5] == 3  # the lock holds
        assert res.open_sites[0] and res.open_sites.sum() == 3
        assert_plan_valid(problem, res.assignment)  # every rule, by the independent checker


def test_pyomo_route_matches_highs_array_route():
    # The fast highspy route (districting.solve, default) against the Pyomo route.
    import districting

    problem = rich_problem(6)
    fast = districting.solve(problem, gap=1e-9)
    slow = districting.solve(problem, gap=1e-9, solver="appsi_highs")
    ref = solve_model(build_model(problem, "none"), gap=1e-9)
    assert fast.objective == pytest.approx(ref.objective, rel=1e-7)
    assert slow.objective == pytest.approx(ref.objective, rel=1e-7)


def test_warm_start_and_objective_of_start():
    problem = rich_problem(7)
    first = solve_model(build_model(problem, "none"), gap=1e-9)
    again = solve_model(build_model(problem, "none"), gap=1e-9, start=first.assignment)
    assert again.status == "optimal"
    assert again.objective == pytest.approx(first.objective, rel=1e-9)
    w = problem.weighted_cost
    assert first.objective == pytest.approx(w[np.arange(problem.n_units), first.assignment].sum())


# ---------------------------------------------------------------------------- contiguity
def brute_force(problem: Problem) -> float:
    """Every assignment of the units to the sites, checked with networkx; the cheapest valid."""
    n, m = problem.n_units, problem.n_sites
    w = problem.weighted_cost
    best = np.inf
    for combo in itertools.product(range(m), repeat=n):
        a = np.array(combo)
        load = np.stack([np.bincount(a, weights=row, minlength=m) for row in problem.demand])
        if np.any(load > problem.capacity * problem.max_util + 1e-9):
            continue
        if not connected_zones(problem, a):
            continue
        best = min(best, float(w[np.arange(n), a].sum()))
    return best


def test_flow_cuts_and_brute_force_agree_on_3x3():
    _, edges = grid(3, 3)
    # 0 1 2 / 3 4 5 / 6 7 8, roots 0 and 8, one student per unit, site 0 seats 3. Site 0
    # prefers the corners 0, 2, 6 (cost 0), which are not connected; site 8 charges them 9.
    # Without contiguity: {0, 2, 6} -> 0 costs 0, the rest cost 5 (units 1,3,4,5,7) -> 5.
    # With it: {0, 1, 2} or {0, 3, 6} at site 0 (5) and 6 or 2 at site 8 (9) + 4 others -> 18.
    cost = np.array([[0, 9], [5, 1], [0, 9], [5, 1], [5, 1], [5, 1], [0, 9], [5, 1], [5, 0]],
                    float)
    problem = Problem.from_arrays(cost, np.ones(9), capacity=[3, 9], edges=edges,
                                  roots=[0, 8])
    exact = brute_force(problem)
    flow = solve_model(build_model(problem, "flow"), gap=1e-9)
    cuts, _ = cut_loop(problem)
    assert exact == pytest.approx(18.0)
    assert flow.objective == pytest.approx(exact)
    assert cuts.objective == pytest.approx(exact)
    assert connected_zones(problem, flow.assignment)
    # Without contiguity the optimum is lower here: the constraint is doing work.
    free = solve_model(build_model(problem, "none"), gap=1e-9)
    assert free.objective == pytest.approx(5.0)


@pytest.mark.parametrize("seed,n_sites", [(1, 2), (2, 3), (3, 4), (4, 3)])
def test_flow_equals_cut_loop_on_random_grids(seed, n_sites):
    rng = np.random.default_rng(seed)
    xy, edges = grid(5, 6)
    n = len(xy)
    sites = rng.choice(n, n_sites, replace=False)
    cost = np.linalg.norm(xy[:, None] - xy[sites][None], axis=2)
    demand = rng.integers(0, 10, n).astype(float) * (rng.random(n) > 0.3)
    capacity = np.full(n_sites, demand.sum() / n_sites * 1.15)
    problem = Problem.from_arrays(cost, demand, capacity, edges=edges, roots=sites)
    flow = solve_model(build_model(problem, "flow"), gap=1e-9)
    cuts, _ = cut_loop(problem)
    assert flow.status == "optimal"
    assert flow.objective == pytest.approx(cuts.objective, rel=1e-7, abs=1e-7)
    assert connected_zones(problem, flow.assignment)
    assert connected_zones(problem, cuts.assignment)
    assert_plan_valid(problem, flow.assignment)  # every rule, by the independent checker
    assert_plan_valid(problem, cuts.assignment)


def test_flow_with_candidate_sites_and_warm_start():
    rng = np.random.default_rng(11)
    xy, edges = grid(4, 5)
    sites = [0, 4, 15, 19, 7]
    cost = np.linalg.norm(xy[:, None] - xy[sites][None], axis=2)
    demand = rng.integers(1, 9, len(xy)).astype(float)
    problem = Problem.from_arrays(cost, demand, np.full(5, demand.sum() * 0.4), p=3,
                                  open_sites=[True, False, False, False, False],
                                  edges=edges, roots=sites)
    flow = solve_model(build_model(problem, "flow"), gap=1e-9)
    cuts, _ = cut_loop(problem)
    assert flow.objective == pytest.approx(cuts.objective, rel=1e-7)
    assert flow.open_sites.sum() == 3
    # A connected start gives the flow its tree values; the optimum is unchanged.
    again = solve_model(build_model(problem, "flow"), gap=1e-9, start=flow.assignment)
    assert again.objective == pytest.approx(flow.objective, rel=1e-9)


def test_flow_equals_cut_loop_on_georgia_counties():
    # libpysal example data: Georgia's 159 counties (G_utm.shp, projected metres, TotPop90).
    import geopandas as gpd
    from libpysal.examples import get_path
    from libpysal.graph import Graph

    counties = gpd.read_file(get_path("G_utm.shp"))
    adj = Graph.build_contiguity(counties, rook=True).adjacency.reset_index()
    pairs = adj[adj["weight"] > 0][["focal", "neighbor"]].to_numpy()
    edges = pairs[pairs[:, 0] < pairs[:, 1]]
    pts = np.column_stack([counties.geometry.centroid.x, counties.geometry.centroid.y])
    demand = np.round(counties["TotPop90"].to_numpy() / 1000.0, 1)
    sites = np.array([20, 60, 100, 140])
    dist = np.linalg.norm(pts[:, None] - pts[sites][None], axis=2) / 1000.0  # km
    cost = np.where(dist <= 250.0, dist, np.inf)  # a max-distance forbid keeps it small
    capacity = np.full(len(sites), demand.sum() / len(sites) * 1.3)
    problem = Problem.from_arrays(cost, demand, capacity, edges=edges, roots=sites)
    flow = solve_model(build_model(problem, "flow"), gap=1e-9, time_limit=60)
    cuts, _ = cut_loop(problem)
    assert flow.status == "optimal"
    assert flow.objective == pytest.approx(cuts.objective, rel=1e-6)
    assert connected_zones(problem, flow.assignment)


# ---------------------------------------------------------------------------- errors
def test_separator_cut_terms_only_for_allowed_pairs():
    xy, edges = grid(2, 3)
    cost = np.abs(xy[:, None] - xy[[0, 5]][None]).sum(axis=2)
    forbidden = np.zeros((6, 2), bool)
    forbidden[1, 1] = True
    problem = Problem.from_arrays(cost, np.ones(6), edges=edges, roots=[0, 5],
                                  forbidden=forbidden)
    m = build_model(problem, "cuts")
    add_separator_cut(m, 2, 1, [1, 4])
    add_separator_cut(m, 1, 1, [0])  # (1, 1) is forbidden: nothing to cut
    assert len(m.separator_cuts) == 1
    body = str(m.separator_cuts[1].body)
    assert "x[2,1]" in body and "x[4,1]" in body and "x[1,1]" not in body


def test_unavailable_solver_says_so():
    problem = rich_problem(3)
    res = solve_model(build_model(problem, "none"), solver="no_such_solver_here")
    assert res.status == "error"
    assert "not available" in res.message and "no_such_solver_here" in res.message


def test_infeasible_model_reports_infeasible():
    cost = np.array([[1.0, 2.0], [2.0, 1.0], [1.0, 1.0]])
    problem = Problem.from_arrays(cost, [5, 5, 5], capacity=[6, 6])
    res = solve_model(build_model(problem, "none"))
    assert res.status == "infeasible" and not res.has_solution


def test_build_refuses_a_unit_without_any_school():
    cost = np.array([[1.0, np.inf], [np.inf, np.inf]])
    problem = Problem.from_arrays(cost, [1, 2], unit_names=["U1", "U2"])
    with pytest.raises(ValueError, match="U2"):
        build_model(problem)
