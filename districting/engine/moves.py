"""Pieces shared by the local searches over plans (:mod:`~districting.engine.rebalance`,
:mod:`~districting.engine.improve`): which units never move, each site's load limits, the
units a move carries along so that zones stay connected, and the students a move moves.
"""

from __future__ import annotations

from collections import deque

import numpy as np

from ..problem import Problem
from ..rules import seat_limits

__all__ = ["TOL", "fixed_units", "load_limits", "reach", "branch", "moved_delta"]

TOL = 1e-6


def fixed_units(problem: Problem) -> np.ndarray:
    """Units that never move: locked units and the root unit of every site."""
    fixed = problem.locks >= 0
    if problem.roots is not None:
        r = problem.roots[problem.roots >= 0]
        fixed[r] = True
    return fixed


def load_limits(problem: Problem, a: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(m,) upper and lower load limits; sites that take nobody have no floor."""
    m = problem.n_sites
    if problem.capacity is None:
        return np.full(m, np.inf), np.zeros(m)
    used = np.zeros(m, bool)
    used[a[a >= 0]] = True
    used |= problem.always_open
    floor, hi = seat_limits(problem)
    return hi, np.where(used, floor, 0.0)


def reach(j: int, al: list[int], nbrs: list[list[int]], start: int,
          avoid: int = -1) -> set[int]:
    """Units of zone j reachable from ``start`` inside zone j (never through ``avoid``)."""
    seen = {start, avoid}
    queue = deque([start])
    while queue:
        u = queue.popleft()
        for w in nbrs[u]:
            if w not in seen and al[w] == j:
                seen.add(w)
                queue.append(w)
    seen.discard(avoid)
    return seen


def moved_delta(problem: Problem, units: np.ndarray, frm: np.ndarray, to: np.ndarray
                ) -> np.ndarray:
    """Change per unit in students moved away from today's site when ``units`` go from
    ``frm`` to ``to`` (plan year)."""
    cur = problem.current[units]
    d0 = problem.demand[0, units]
    before = (cur >= 0) & (cur != frm)
    after = (cur >= 0) & (cur != to)
    return d0 * after - d0 * before


def branch(i: int, j: int, al: list[int], nbrs: list[list[int]], root: int) -> np.ndarray:
    """Unit i and the units of zone j that lose their path to ``root`` when i leaves."""
    seen = reach(j, al, nbrs, root, avoid=i)
    cut = [x for x, z in enumerate(al) if z == j and x != i and x not in seen]
    return np.array([i, *cut], dtype=np.int64)
