"""The engine against published p-median optima (instances copied into tests/data/).

- OR-Library uncapacitated p-median: J.E. Beasley, "A note on solving large p-median
  problems", European Journal of Operational Research 21 (1985) 270-273 (optima from
  OR-Library's pmedopt.txt).
- Capacitated p-median: I.H. Osman and N. Christofides, "Capacitated clustering problems by
  hybrid simulated annealing and tabu search", International Transactions in Operational
  Research 1(3) (1994) 317-336 (OR-Library pmedcap1; optimum on line 1 of each file).
- Capacitated p-median SJC1: L.A.N. Lorena and E.L.F. Senne, "A column generation approach
  to capacitated p-median problems", Computers & Operations Research 31(6) (2004) 863-876.

Published optimal assignments (solutions_lit/, JSON with each node's median) are re-costed
here with the same distance convention, so the reader and the cost are checked too.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
from scipy.sparse import coo_matrix
from scipy.sparse.csgraph import shortest_path

from districting import Problem, solve

DATA = Path(__file__).parents[1] / "data"


# ---------------------------------------------------------------------- readers
def read_pmed(path: Path) -> tuple[np.ndarray, int]:
    """OR-Library pmed file -> (all-pairs shortest-path costs, p). The last duplicate edge
    line wins (OR-Library's rule)."""
    tokens = path.read_text().split()
    n, m, p = (int(t) for t in tokens[:3])
    e = np.array(tokens[3:3 + 3 * m], dtype=np.int64).reshape(m, 3)
    last: dict[tuple[int, int], int] = {}
    for i, j, c in e.tolist():
        last[(min(i, j) - 1, max(i, j) - 1)] = c
    ij = np.array(list(last.keys()))
    c = np.array(list(last.values()), float)
    g = coo_matrix((c, (ij[:, 0], ij[:, 1])), shape=(n, n)).tocsr()
    return shortest_path(g, directed=False), p


def pmed_optimum(name: str) -> int:
    for line in (DATA / "orlib_pmed" / "pmedopt.txt").read_text().splitlines()[1:]:
        parts = line.split()
        if parts and parts[0] == name:
            return int(parts[1])
    raise KeyError(name)


def capacitated(dist: np.ndarray, demand: np.ndarray, p: int, cap) -> Problem:
    """cost = distance / demand so the objective counts plain distance; a point without
    demand costs nothing wherever it goes (its distance is kept for reports)."""
    with np.errstate(divide="ignore", invalid="ignore"):
        cost = np.where(demand[:, None] > 0, dist / demand[:, None], 0.0)
    return Problem.from_arrays(cost, demand, capacity=cap, p=p, distance=dist)


def read_osman(path: Path) -> tuple[np.ndarray, np.ndarray, int, float, float]:
    """Osman & Christofides file -> (floor-rounded Euclidean distance, demand, p, Q, optimum)."""
    rows = [ln.split() for ln in path.read_text().splitlines() if ln.strip()]
    opt = float(rows[0][1])
    n, p, q = int(rows[1][0]), int(rows[1][1]), float(rows[1][2])
    pts = np.array(rows[2:2 + n], float)
    xy, dem = pts[:, 1:3], pts[:, 3]
    dist = np.floor(np.hypot(*(xy[:, None, :] - xy[None, :, :]).transpose(2, 0, 1)))
    return dist, dem, p, q, opt


def read_sjc(path: Path) -> tuple[np.ndarray, np.ndarray, int, np.ndarray]:
    """SJC file -> (unrounded Euclidean distance, demand, p, capacities)."""
    rows = [ln.split() for ln in path.read_text().splitlines() if ln.strip()]
    n, p = int(rows[0][0]), int(rows[0][1])
    pts = np.array(rows[1:1 + n], float)
    xy, cap, dem = pts[:, 0:2], pts[:, 2], pts[:, 3]
    dist = np.hypot(*(xy[:, None, :] - xy[None, :, :]).transpose(2, 0, 1))
    return dist, dem, p, cap


def published_assignment(path: Path) -> np.ndarray:
    nodes = json.loads(path.read_text())["nodes"]
    return np.array([int(nd["median"]) for nd in nodes], dtype=np.int64)


# ---------------------------------------------------------------------- tests
# pmed6 (60-90 s on 2 cores) is measured in benchmarks/bench_published.py instead
@pytest.mark.parametrize("k", [1, 2, 3, 4, 5, 7, 8, 9, 10])
def test_orlib_pmed_optimum(k):
    # Beasley (1985), OR-Library pmed1-pmed10: published optima (pmedopt.txt)
    cost, p = read_pmed(DATA / "orlib_pmed" / f"pmed{k}.txt")
    n = len(cost)
    plan = solve(Problem.from_arrays(cost, np.ones(n), p=p), gap=1e-5)
    assert plan.status == "optimal"
    assert round(plan.objective) == pmed_optimum(f"pmed{k}")
    assert plan.open_sites.sum() == p
    assert np.all(plan.open_sites[plan.assignment])
    # every point goes to its nearest open median in an uncapacitated optimum
    opened = np.flatnonzero(plan.open_sites)
    assert np.allclose(cost[np.arange(n), plan.assignment], cost[:, opened].min(axis=1))


def test_pmed1_duplicate_edges_last_line_wins():
    # OR-Library's rule for pmed1 (200 edge lines, 198 distinct edges): the reader keeps the
    # last cost; with the first one the optimum 5819 (Beasley 1985) would not come out.
    tokens = (DATA / "orlib_pmed" / "pmed1.txt").read_text().split()
    m = int(tokens[1])
    e = np.array(tokens[3:3 + 3 * m], dtype=np.int64).reshape(m, 3)
    pairs = {(min(i, j), max(i, j)) for i, j, _ in e.tolist()}
    assert len(pairs) == 198


def osman_instance(k: int):
    """Instance k with its published optimal assignment, which must re-cost to the optimum
    and fit capacity with p medians."""
    dist, dem, p, q, opt = read_osman(DATA / "orlib_pmedcap" / f"pmedcap1_{k:02d}.txt")
    lit = next((DATA / "orlib_pmedcap" / "solutions_lit").glob(f"solOPT.cpmp{k:02d}_*.json"))
    pub = published_assignment(lit)
    n = len(dem)
    assert dist[np.arange(n), pub].sum() == pytest.approx(opt)
    assert np.bincount(pub, weights=dem, minlength=n).max() <= q
    assert len(np.unique(pub)) == p
    return dist, dem, p, q, opt


# instances 8 and 10 (25-70 s each on 2 cores) are measured in benchmarks/bench_published.py
@pytest.mark.parametrize("k", [1, 2, 3, 4, 5, 6, 7, 9])
def test_osman_christofides_optimum(k):
    # Osman & Christofides (1994) instances 1-10: published optimum and assignment
    dist, dem, p, q, opt = osman_instance(k)
    n = len(dem)
    plan = solve(capacitated(dist, dem, p, q), gap=1e-6)
    assert plan.status == "optimal"
    got = dist[np.arange(n), plan.assignment].sum()
    assert got == pytest.approx(opt)
    assert plan.metrics.load.max() <= q + 1e-9
    assert plan.open_sites.sum() == p


def test_lorena_senne_sjc1_optimum():
    # Lorena & Senne (2004) SJC1: n=100, p=10, Q=720, optimum 17288.99 (unrounded Euclidean)
    dist, dem, p, cap = read_sjc(DATA / "lorena_senne_sjc" / "SJC1.dat")
    pub = published_assignment(
        DATA / "lorena_senne_sjc" / "solutions_lit" / "solOPT.SJC1_17288.json")
    n = len(dem)
    assert dist[np.arange(n), pub].sum() == pytest.approx(17288.99, abs=0.01)
    plan = solve(capacitated(dist, dem, p, cap), gap=1e-7)
    assert plan.status == "optimal"
    assert dist[np.arange(n), plan.assignment].sum() == pytest.approx(17288.99, abs=0.01)
    assert plan.open_sites.sum() == p


# ---------------------------------------------------------------------- slow group
# A sample of the larger published instances, each with a time limit (the whole set, with 90 s
# each, is `benchmarks/bench_published.py`: a measurement, not a test). A proof must give the
# published optimum; a plan stopped by the limit must have a bound at or below the optimum and
# a cost at or above it (and, like every plan in the tests, pass the independent checker).
SLOW_LIMIT = 15.0  # seconds per instance


def against_published(plan, cost: float, optimum: float, tol: float) -> None:
    assert plan.feasible, plan.message
    assert plan.bound <= optimum + tol, f"bound {plan.bound} above the optimum {optimum}"
    assert cost >= optimum - tol, f"a plan of cost {cost} below the optimum {optimum}"
    if plan.status == "optimal":
        assert cost == pytest.approx(optimum, abs=tol)
    else:
        assert plan.status == "time_limit"
    print(f"status {plan.status}, cost {cost:.2f}, bound {plan.bound:.2f}, optimum "
          f"{optimum:.2f}, {plan.solve_seconds:.1f} s")


@pytest.mark.slow
@pytest.mark.parametrize("k", [11, 20])
def test_osman_christofides_11_to_20(k):
    # Osman & Christofides (1994) instances 11 and 20 (n=100, p=10): published optima
    dist, dem, p, q, opt = osman_instance(k)
    n = len(dem)
    plan = solve(capacitated(dist, dem, p, q), gap=1e-6, time_limit=SLOW_LIMIT)
    against_published(plan, float(dist[np.arange(n), plan.assignment].sum()), opt, 1e-6)


def sjc_instance(name: str):
    """Lorena & Senne (2004) instance ``name`` and its published optimum: the "fo" of the
    published optimal assignment, which must re-cost to it and fit the capacity."""
    dist, dem, p, cap = read_sjc(DATA / "lorena_senne_sjc" / f"{name}.dat")
    lit = next((DATA / "lorena_senne_sjc" / "solutions_lit").glob(f"solOPT.{name}_*.json"))
    opt = float(json.loads(lit.read_text())["fo"])
    pub = published_assignment(lit)
    n = len(dem)
    assert dist[np.arange(n), pub].sum() == pytest.approx(opt, abs=0.01)
    assert np.bincount(pub, weights=dem, minlength=n).max() <= cap.max()
    return dist, dem, p, cap, opt


@pytest.mark.slow
@pytest.mark.parametrize("name", ["SJC2", "SJC4a"])
def test_lorena_senne_sjc_larger(name):
    # Lorena & Senne (2004) SJC2 (n=200) and SJC4a (n=402, the hardest: HiGHS alone found no
    # plan within 90 s on a CI machine)
    dist, dem, p, cap, opt = sjc_instance(name)
    n = len(dem)
    plan = solve(capacitated(dist, dem, p, cap), gap=1e-7, time_limit=SLOW_LIMIT)
    against_published(plan, float(dist[np.arange(n), plan.assignment].sum()), opt, 0.01)


def test_a_first_plan_within_seconds_on_a_tight_capacitated_instance():
    # Lorena & Senne (2004) SJC4a: 402 points, 30 medians, every point a candidate. Within a
    # 6 s limit the engine must return a valid plan (the independent checker sees it) at or
    # above the published optimum, and not far above: the greedy-add medians, regret
    # assignment and moves measured 5.9% above it with 2 s of moves (a greedy without
    # Cooper's relocation of the medians came out 245% above).
    dist, dem, p, cap, opt = sjc_instance("SJC4a")
    n = len(dem)
    plan = solve(capacitated(dist, dem, p, cap), gap=1e-7, time_limit=6.0)
    assert plan.feasible, plan.message
    cost = float(dist[np.arange(n), plan.assignment].sum())
    assert opt - 0.01 <= cost <= 1.25 * opt
    assert np.bincount(plan.assignment, weights=dem, minlength=n).max() <= cap.max() + 1e-9


@pytest.mark.slow
def test_orlib_pmed_sample_300():
    # Beasley (1985), OR-Library pmed11 (n=300, p=5): pmedopt.txt
    cost, p = read_pmed(DATA / "orlib_pmed" / "pmed11.txt")
    plan = solve(Problem.from_arrays(cost, np.ones(len(cost)), p=p), gap=1e-6,
                 time_limit=SLOW_LIMIT)
    against_published(plan, plan.objective, float(pmed_optimum("pmed11")), 0.5)
