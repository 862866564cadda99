"""The SCIP branch-and-cut route against sources outside it.

- Osman & Christofides (1994) instance 1 (OR-Library pmedcap1, published optimum 713 on
  line 1 of the file): the route without contiguity reaches it.
- libpysal's columbus polygons (49 Columbus OH neighbourhoods, rook adjacency from libpysal):
  every zone connected and holding its school's unit per networkx, and the route's cost
  equal to the exact flow model of tests/flow_milp.py (Shirabe 2005, scipy.optimize.milp,
  no engine code) and to the HiGHS engine's proven optimum.
"""

from __future__ import annotations

import networkx as nx
import numpy as np
import pytest
from flow_milp import flow_optimum
from plan_check import assert_plan_valid
from test_benchmarks import capacitated, osman_instance
from test_contiguous_optimum import columbus

from districting import solve
from districting.engine.scip_route import solve_scip


def connected_zones(problem, assignment) -> bool:
    """networkx: each open site's units induce one connected subgraph holding its root."""
    g = nx.Graph()
    g.add_nodes_from(range(problem.n_units))
    g.add_edges_from(np.asarray(problem.edges).tolist())
    for j in np.unique(assignment).tolist():
        units = np.flatnonzero(assignment == j).tolist()
        if problem.roots[j] not in units or not nx.is_connected(g.subgraph(units)):
            return False
    return True


def test_osman_christofides_1_published_optimum():
    # Osman & Christofides (1994) instance 1: published optimum 713
    dist, dem, p, q, opt = osman_instance(1)
    problem = capacitated(dist, dem, p, q)
    plan = solve_scip(problem, time_limit=60, gap=1e-6)
    assert plan.status == "optimal"
    assert dist[np.arange(len(dem)), plan.assignment].sum() == pytest.approx(opt)
    assert plan.bound == pytest.approx(opt)
    assert_plan_valid(problem, plan)


def test_columbus_zones_connected_at_the_proven_optimum():
    # libpysal columbus (rook adjacency), 5 schools; optimum from the flow model (Shirabe 2005)
    problem = columbus(5, 0.25, 0.6)
    free = solve(problem.replace(edges=None), gap=0.0)
    assert not connected_zones(problem, free.assignment)  # contiguity binds here
    plan = solve(problem, gap=0.0, time_limit=60, solver="scip-tree")  # the session's opt-in
    assert plan.status == "optimal" and plan.route == "scip-tree"
    assert connected_zones(problem, plan.assignment)
    assert_plan_valid(problem, plan)
    want, _ = flow_optimum(problem, 60)
    assert plan.objective == pytest.approx(want, rel=1e-7)
    assert plan.bound == pytest.approx(want, rel=1e-7)
    engine = solve(problem, gap=0.0, time_limit=60)
    assert engine.status == "optimal"
    assert plan.objective == pytest.approx(engine.objective, rel=1e-7)
