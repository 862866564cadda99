"""The engine's contiguous optimum against an exact flow model written in the tests alone.

Sources outside the project: libpysal's example polygons (shipped with the package, BSD-3:
columbus - 49 Columbus OH neighbourhoods; sids2 - North Carolina's 100 counties with births
for 1974 and 1979), adjacency from libpysal's own contiguity builder, the flow model of
Shirabe (2005) built with scipy.optimize.milp in tests/flow_milp.py, and brute-force
enumeration on the tiniest towns (each assignment judged by the independent checker).
"""

from __future__ import annotations

import itertools

import geopandas as gpd
import numpy as np
import pytest
from flow_milp import flow_optimum
from hypothesis import HealthCheck, event, given, settings
from hypothesis import strategies as st
from libpysal import examples
from libpysal.graph import Graph

from districting import Problem, solve
from districting.verify import check_plan, facts_of_problem


def polygons(shp: str):
    df = gpd.read_file(examples.get_path(shp))
    adj = Graph.build_contiguity(df, rook=True).adjacency.reset_index()
    pairs = adj[adj["weight"] > 0][["focal", "neighbor"]].to_numpy()
    xy = np.column_stack([df.geometry.centroid.x, df.geometry.centroid.y])
    return df, pairs[pairs[:, 0] < pairs[:, 1]], xy


def agree(problem: Problem, time_limit: float = 60.0) -> float:
    """The engine and the flow model reach the same optimum (or both find none)."""
    want, flow_plan = flow_optimum(problem, time_limit)
    plan = solve(problem, gap=0.0, time_limit=time_limit)
    if want is None:
        assert plan.status == "infeasible"
        return float("nan")
    assert check_plan(facts_of_problem(problem), flow_plan) == []
    assert plan.status == "optimal", plan.message
    assert plan.objective == pytest.approx(want, rel=1e-7, abs=1e-6)
    return want


def unconnected_optimum(problem: Problem) -> float:
    return solve(problem.replace(edges=None), gap=0.0).objective


def columbus(k: int, share: float, floor: float) -> Problem:
    """libpysal columbus: 49 neighbourhoods, rook adjacency. Students: CRIME rounded (plan
    year) and a seeded growth of it (second year). k schools spread west to east, each
    seating ``share`` of the larger year's students, with a floor."""
    df, edges, xy = polygons("columbus.shp")
    rng = np.random.default_rng(5)
    d0 = np.round(df["CRIME"].to_numpy())
    d1 = np.round(d0 * rng.uniform(0.8, 1.3, len(d0)))
    sites = np.argsort(xy[:, 0])[np.linspace(2, 46, k).astype(int)]
    cost = np.linalg.norm(xy[:, None] - xy[sites][None], axis=2)
    cap = np.full(k, max(d0.sum(), d1.sum()) * share)
    return Problem.from_arrays(cost, np.vstack([d0, d1]), capacity=cap, edges=edges,
                               roots=sites, min_util=floor)


def sids2(k: int, share: float, reach: float) -> Problem:
    """libpysal sids2: North Carolina's 100 counties, rook adjacency; "students" are births
    in 1974 and 1979 in hundreds. k schools spread west to east, each seating ``share`` of
    the larger year's total, floor 40%; counties more than ``reach`` degrees from a school
    may not go there (a maximum distance)."""
    df, edges, xy = polygons("sids2.shp")
    demand = np.round(df[["BIR74", "BIR79"]].to_numpy().T / 100.0)
    sites = np.argsort(xy[:, 0])[np.linspace(5, 94, k).astype(int)]
    dist = np.linalg.norm(xy[:, None] - xy[sites][None], axis=2)
    cost = np.where(dist <= reach, dist, np.inf)
    cap = np.full(k, demand.max(axis=0).sum() * share)
    return Problem.from_arrays(cost, demand, capacity=cap, edges=edges, roots=sites,
                               min_util=0.4)


def test_columbus_neighbourhoods_four_schools():
    p = columbus(4, 0.27, 0.6)
    want = agree(p)
    assert want > unconnected_optimum(p) + 1.0  # connected zones cost more: they bind here


def test_sids2_counties_six_schools():
    p = sids2(6, 0.2, 2.5)
    want = agree(p)
    assert want > unconnected_optimum(p) + 1.0


@pytest.mark.slow
@pytest.mark.parametrize("make", [lambda: columbus(5, 0.22, 0.6), lambda: sids2(4, 0.3, 3.5)],
                         ids=["columbus-5", "sids2-4"])
def test_polygons_larger_cases(make):
    p = make()
    assert agree(p, time_limit=120) > unconnected_optimum(p) + 1.0


# ------------------------------------------------------------------ random small towns
@st.composite
def towns(draw, max_units: int = 16):
    """A grid town with a few borders closed (a river), 2-3 schools, 1-3 years of counts."""
    rows = draw(st.integers(2, min(4, max_units // 2)))
    cols = draw(st.integers(2, max_units // rows))
    n = rows * cols
    grid = [(r * cols + c, r * cols + c + 1) for r in range(rows) for c in range(cols - 1)]
    grid += [(r * cols + c, (r + 1) * cols + c) for r in range(rows - 1) for c in range(cols)]
    closed = draw(st.sets(st.integers(0, len(grid) - 1), max_size=max(1, len(grid) // 6)))
    edges = [e for k, e in enumerate(grid) if k not in closed]
    m = draw(st.integers(2, min(3, n)))
    sites = draw(st.lists(st.integers(0, n - 1), min_size=m, max_size=m, unique=True))
    years = draw(st.integers(1, 3))
    demand = np.array(draw(st.lists(st.integers(0, 9), min_size=n * years,
                                    max_size=n * years)), float).reshape(years, n)
    xy = np.array([(r, c) for r in range(rows) for c in range(cols)], float)
    cost = np.abs(xy[:, None] - xy[sites][None]).sum(axis=2) + 1.0
    share = draw(st.sampled_from([0.55, 0.7, 1.0]))
    floor = draw(st.sampled_from([0.0, 0.0, 0.25]))
    cap = np.full(m, max(demand.sum(axis=1).max(), 1.0) * share)
    return Problem.from_arrays(cost, demand, capacity=cap, edges=edges, roots=sites,
                               min_util=floor)


@settings(max_examples=30, deadline=None, derandomize=True,
          suppress_health_check=[HealthCheck.too_slow])
@given(towns())
def test_random_towns_engine_equals_flow_model(problem):
    want = agree(problem, time_limit=30.0)
    event("no plan" if want != want else "plan")


def brute_force(problem: Problem) -> float:
    """The cheapest assignment the independent checker accepts (inf if none)."""
    facts = facts_of_problem(problem)
    w = np.where(np.isfinite(problem.cost), problem.demand[0][:, None] * problem.cost, 0.0)
    best = float("inf")
    n = problem.n_units
    for a in itertools.product(range(problem.n_sites), repeat=n):
        a = np.array(a)
        cost = float(w[np.arange(n), a].sum())
        if cost < best and not check_plan(facts, a):
            best = cost
    return best


@settings(max_examples=15, deadline=None, derandomize=True,
          suppress_health_check=[HealthCheck.too_slow])
@given(towns(max_units=8))
def test_tiny_towns_engine_equals_brute_force(problem):
    want = brute_force(problem)
    plan = solve(problem, gap=0.0)
    event("no plan" if want == float("inf") else "plan")
    if want == float("inf"):
        assert plan.status == "infeasible"
    else:
        assert plan.status == "optimal"
        assert plan.objective == pytest.approx(want, abs=1e-9)
