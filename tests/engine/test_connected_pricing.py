"""Pricing a connected zone, held against plain enumeration on small grids.

The reference is written apart from the code under test: every unit set holding the root
is enumerated, its connectivity checked with networkx and its band with plain sums.
"""

from __future__ import annotations

import itertools

import networkx as nx
import numpy as np
import pytest

from districting.engine.connected_pricing import price_connected
from districting.engine.connectivity import UnitGraph
from districting.problem import Problem


def _grid(rows: int, cols: int) -> list[tuple[int, int]]:
    edges = []
    for r in range(rows):
        for c in range(cols):
            k = r * cols + c
            if c + 1 < cols:
                edges.append((k, k + 1))
            if r + 1 < rows:
                edges.append((k, k + cols))
    return edges


def _brute(problem: Problem, edges, site: int, reduced: np.ndarray) -> float:
    """min over connected unit sets holding the root, the locks and inside the band."""
    n = problem.n_units
    g = nx.Graph(edges)
    g.add_nodes_from(range(n))
    root = int(problem.roots[site])
    ok = problem.allowed[:, site] & np.isfinite(reduced)
    locked = set(np.flatnonzero(problem.locks == site).tolist())
    lo = problem.min_util[site] * problem.capacity[site]
    hi = problem.max_util[site] * problem.capacity[site]
    others = [i for i in range(n) if i != root and ok[i]]
    best = np.inf
    for k in range(len(others) + 1):
        for extra in itertools.combinations(others, k):
            zone = [root, *extra]
            if not locked <= set(zone):
                continue
            load = problem.demand[:, zone].sum(axis=1)
            if np.any(load < lo - 1e-9) or np.any(load > hi + 1e-9):
                continue
            if not nx.is_connected(g.subgraph(zone)):
                continue
            best = min(best, float(reduced[zone].sum()))
    return best


def _check_zone(problem: Problem, edges, site: int, zone: np.ndarray) -> None:
    g = nx.Graph(edges)
    g.add_nodes_from(range(problem.n_units))
    assert problem.roots[site] in zone
    assert nx.is_connected(g.subgraph(zone.tolist()))
    load = problem.demand[:, zone].sum(axis=1)
    q = problem.capacity[site]
    assert np.all(load >= problem.min_util[site] * q - 1e-9)
    assert np.all(load <= problem.max_util[site] * q + 1e-9)
    assert problem.allowed[zone, site].all()
    assert set(np.flatnonzero(problem.locks == site)) <= set(zone.tolist())


def _town(seed: int, locks=None, forbid=None) -> tuple[Problem, list]:
    rng = np.random.default_rng(seed)
    rows, cols = 3, 4
    n = rows * cols
    edges = _grid(rows, cols)
    demand = rng.integers(5, 30, size=(2, n)).astype(float)
    forbidden = np.zeros((n, 2), bool)
    if forbid is not None:
        forbidden[forbid, 0] = True
    p = Problem.from_arrays(
        rng.uniform(1, 5, size=(n, 2)), demand, capacity=[120.0, 200.0], edges=edges,
        roots=[0, n - 1], locks=locks or {}, min_util=0.5, max_util=1.0,
        forbidden=forbidden)
    return p, edges


@pytest.mark.parametrize("seed", range(6))
def test_exact_pricing_matches_enumeration(seed: int) -> None:
    """Hand-checkable grids (3 x 4 units, two demand rows with different loads, a floor):
    the exact zone's value equals the enumerated optimum and its bound does not exceed it."""
    p, edges = _town(seed)
    rng = np.random.default_rng(100 + seed)
    reduced = rng.normal(0.0, 10.0, p.n_units)
    want = _brute(p, edges, 0, reduced)
    got = price_connected(p, UnitGraph.of(p), 0, reduced, exact=True, time_limit=30)
    assert np.isfinite(want)
    assert min(got.values) == pytest.approx(want, abs=1e-6)
    assert got.bound <= want + 1e-6
    assert got.bound >= want - 1e-3 * max(1.0, abs(want))
    for zone in got.zones:
        _check_zone(p, edges, 0, zone)


@pytest.mark.parametrize("seed", range(3))
def test_greedy_zones_are_feasible(seed: int) -> None:
    p, edges = _town(seed)
    reduced = np.random.default_rng(seed).normal(0.0, 10.0, p.n_units)
    got = price_connected(p, UnitGraph.of(p), 0, reduced, exact=False, time_limit=None)
    assert got.bound == -np.inf
    for zone in got.zones:
        _check_zone(p, edges, 0, zone)


def test_a_cheap_far_side_is_reached_across_a_dear_bridge() -> None:
    """A path of units; the root's neighbour costs +5, the two beyond it -20 each: the
    best zone crosses the bridge (value -35), which a greedy without lookahead misses."""
    edges = [(0, 1), (1, 2), (2, 3)]
    p = Problem.from_arrays(np.ones((4, 1)), np.ones(4), capacity=[10.0], edges=edges,
                            roots=[0])
    reduced = np.array([0.0, 5.0, -20.0, -20.0])
    for exact in (False, True):
        got = price_connected(p, UnitGraph.of(p), 0, reduced, exact=exact, time_limit=10)
        assert min(got.values) == pytest.approx(-35.0)


def test_locks_and_forbids_are_kept() -> None:
    """A unit locked to the site is in every zone; a forbidden unit in none."""
    p, edges = _town(3, locks={6: 0}, forbid=[5])
    reduced = np.random.default_rng(7).normal(0.0, 10.0, p.n_units)
    reduced[6] = 50.0  # dear: only the lock keeps it
    got = price_connected(p, UnitGraph.of(p), 0, reduced, exact=True, time_limit=30)
    want = _brute(p, edges, 0, reduced)
    assert min(got.values) == pytest.approx(want, abs=1e-6)
    for zone in got.zones:
        assert 6 in zone and 5 not in zone
        _check_zone(p, edges, 0, zone)


def test_no_zone_when_the_floor_is_out_of_reach() -> None:
    """Only 4 students can reach the root but the floor asks for 6: no zone, bound inf."""
    edges = [(0, 1), (2, 3)]
    p = Problem.from_arrays(np.ones((4, 1)), [2.0, 2.0, 5.0, 5.0], capacity=[10.0],
                            edges=edges, roots=[0], min_util=0.6)
    for exact in (False, True):
        got = price_connected(p, UnitGraph.of(p), 0, np.zeros(4), exact=exact,
                              time_limit=10)
        assert got.zones == []
    assert price_connected(p, UnitGraph.of(p), 0, np.zeros(4), exact=True,
                           time_limit=10).bound == np.inf
