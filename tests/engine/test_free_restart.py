"""The restart from the optimum without contiguity, repaired (``Session._free_restart``).

Relaxing contiguity never raises the optimum, so the free optimum is a lower bound of every
contiguous plan, and where the free optimum happens to be contiguous it is the optimum.
Both are checked against references written here apart from the engine: the free optimum
is the tests' own exact model (``tests/flow_milp.py``, Shirabe 2005, scipy's HiGHS) on the
complete graph, where every zone is connected; connectivity of a plan is networkx's.
"""

from __future__ import annotations

import itertools

import networkx as nx
import numpy as np
import pytest
from flow_milp import flow_optimum
from grid_town import grid_town

from districting import Problem
from districting.engine import Session


def town(seed: int, side: int = 6, m: int = 3) -> Problem:
    rng, roots, cost, edges = grid_town(side, m, seed)
    demand = rng.integers(1, 20, (2, side * side)).astype(float)
    cap = np.full(m, demand.sum(axis=1).max() / m / 0.9)
    return Problem.from_arrays(cost + 0.5, demand, capacity=cap, min_util=0.7, edges=edges,
                               roots=roots)


def connected(problem: Problem, a: np.ndarray) -> bool:
    g = nx.Graph(problem.edges.tolist())
    g.add_nodes_from(range(problem.n_units))
    return all(nx.is_connected(g.subgraph(np.flatnonzero(a == j).tolist()))
               and a[problem.roots[j]] == j for j in np.unique(a))


@pytest.mark.parametrize("seed", range(6))
def test_before_any_exact_round_the_bound_is_the_free_optimum_and_a_connected_one_is_proven(
        seed):
    problem = town(seed)
    n = problem.n_units
    complete = np.array(list(itertools.combinations(range(n), 2)))
    free_opt, free_plan = flow_optimum(problem.replace(edges=complete), time_limit=60)
    plan = Session(problem).solve(gap=1e-6, max_rounds=0)  # the stages before the rounds
    assert plan.feasible and connected(problem, plan.assignment)
    assert plan.bound >= free_opt * (1 - 1e-6)
    if connected(problem, free_plan):
        assert plan.status == "optimal"
        assert plan.objective == pytest.approx(free_opt, rel=1e-6)
