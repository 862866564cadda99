"""The model's columns and the neutral form its rows are written in.

:class:`Formulation` holds the columns (``x[i, j]`` for every pair some plan may use, then
``y[j]`` for every candidate site, then the feeder columns ``z[g, j]`` when asked), their
bounds and costs, and the row blocks; :class:`RowBlock` is one row family as sparse
entries. :func:`columns` decides which pairs are columns. The row families themselves, each
with its formula, are in :mod:`districting.engine.formulation`.
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field

import numpy as np
import scipy.sparse as sp

from ..problem import Problem
from ..rules import open_sites, seat_limits
from .tuning import TOL

__all__ = ["RowBlock", "Formulation", "columns", "block"]


@dataclass(frozen=True)
class RowBlock:
    """Rows of one family: ``lo[r] <= sum_k coef x_k <= hi[r]`` over entries (row, col, coef).

    ``keys[r]`` names row r in the family's own index (a unit, a (row t, site j) pair...).
    """

    family: str
    row: np.ndarray
    col: np.ndarray
    coef: np.ndarray
    lo: np.ndarray
    hi: np.ndarray
    keys: tuple = ()

    @property
    def n_rows(self) -> int:
        return len(self.lo)


def block(family: str, parts: list[tuple], keys: Sequence = ()) -> RowBlock:
    """A block from per-row parts (cols, coefs, lo, hi)."""
    rows, cols, vals, lo, hi = [], [], [], [], []
    for r, (c, v, a, b) in enumerate(parts):
        c = np.asarray(c, np.int64)
        rows.append(np.full(len(c), r, np.int64))
        cols.append(c)
        vals.append(np.asarray(v, float))
        lo.append(float(a))
        hi.append(float(b))
    if not parts:
        return RowBlock(family, np.zeros(0, np.int64), np.zeros(0, np.int64), np.zeros(0),
                        np.zeros(0), np.zeros(0), ())
    return RowBlock(family, np.concatenate(rows), np.concatenate(cols), np.concatenate(vals),
                    np.array(lo), np.array(hi), tuple(keys))


@dataclass
class Formulation:
    """Columns (x pairs, then y of candidates), their bounds and costs, and the row blocks."""

    problem: Problem
    drop: np.ndarray  # units left out (no students; handed out after each answer)
    xi: np.ndarray  # unit of x column k
    xj: np.ndarray  # site of x column k
    colmap: np.ndarray  # (n, m) x column of a pair, -1 without one
    ycol: np.ndarray  # (m,) y column of a candidate site, -1 otherwise
    cost: np.ndarray
    lower: np.ndarray
    upper: np.ndarray
    elastic: frozenset = frozenset()
    blocks: list[RowBlock] = field(default_factory=list)
    infeasible_reason: str = ""
    zg: np.ndarray = field(default_factory=lambda: np.zeros(0, np.int64))  # z column: group
    zj: np.ndarray = field(default_factory=lambda: np.zeros(0, np.int64))  # z column: site
    zcol: np.ndarray = field(default_factory=lambda: np.zeros(0, np.int64))  # its column

    def split_on(self, assignment: np.ndarray) -> np.ndarray:
        """The z columns a plan sets to 1 (each lower zone's sites), for a start vector."""
        g = self.problem.feeder_groups
        if not len(self.zcol) or g is None:
            return np.zeros(0, np.int64)
        a = np.asarray(assignment, np.int64)
        used = {(int(k), int(j)) for k, j in zip(g, a, strict=True) if k >= 0 and j >= 0}
        return np.array([c for k, j, c in zip(self.zg.tolist(), self.zj.tolist(),
                                               self.zcol.tolist(), strict=True)
                         if (k, j) in used], np.int64)

    def vector(self, assignment: np.ndarray) -> np.ndarray:
        """Column values of a plan: x of its pairs, y of its open candidates, its z."""
        a = np.asarray(assignment, np.int64)
        x = np.zeros(self.ncol)
        has = np.flatnonzero(a >= 0)
        c = self.colmap[has, a[has]]
        x[c[c >= 0]] = 1.0
        opened = open_sites(self.problem, a)
        x[self.ycol[opened & (self.ycol >= 0)]] = 1.0
        x[self.split_on(a)] = 1.0
        return x

    @property
    def ncol(self) -> int:
        return len(self.cost)

    @property
    def n_pairs(self) -> int:
        return len(self.xi)

    def matrix(self) -> tuple[sp.csc_matrix, np.ndarray, np.ndarray]:
        """(A, row lower, row upper) of every block in order."""
        rows, cols, vals, lo, hi = [], [], [], [], []
        nrow = 0
        for b in self.blocks:
            rows.append(b.row + nrow)
            cols.append(b.col)
            vals.append(b.coef)
            lo.append(b.lo)
            hi.append(b.hi)
            nrow += b.n_rows
        a = sp.csc_matrix((np.concatenate(vals), (np.concatenate(rows), np.concatenate(cols))),
                          shape=(nrow, self.ncol))
        a.sum_duplicates()
        return a, np.concatenate(lo), np.concatenate(hi)


# ---------------------------------------------------------------------------- columns
def columns(problem: Problem, drop: np.ndarray | None = None,
            elastic: Iterable[str] = ()) -> Formulation:
    """x[i, j] for allowed pairs of units not in ``drop``, then y[j] for candidates.

    A pair whose students exceed u_max[j] Q[j] in some year is left out (x = 0 in every
    plan), except a locked pair (its infeasibility is reported, not hidden) and when the
    capacity family is elastic. With elastic locks the pairs a lock removes stay in.
    Cost: w[i, j] on x, 0 on y; bounds [0, 1].
    """
    elastic = frozenset(elastic)
    n, m = problem.n_units, problem.n_sites
    drop = np.zeros(n, bool) if drop is None else np.asarray(drop, bool)
    source = problem.replace(locks=np.full(n, -1)) if "locks" in elastic else problem
    ok = source.allowed & ~drop[:, None]
    if problem.capacity is not None and "capacity" not in elastic:
        hi = seat_limits(problem)[1]
        ok &= ~(problem.demand[:, :, None] > hi[None, None, :] + TOL).any(axis=0)
        if problem.locks.max(initial=-1) >= 0:
            li = np.flatnonzero(problem.locks >= 0)
            ok[li, problem.locks[li]] = problem.allowed[li, problem.locks[li]]
    xi, xj = np.nonzero(ok)
    k = len(xi)
    colmap = np.full((n, m), -1, np.int64)
    colmap[xi, xj] = np.arange(k)
    cand = np.flatnonzero(problem.candidates)
    ycol = np.full(m, -1, np.int64)
    ycol[cand] = k + np.arange(len(cand))
    ncol = k + len(cand)
    cost = np.zeros(ncol)
    cost[:k] = problem.weighted_cost[xi, xj]
    return Formulation(problem, drop, xi, xj, colmap, ycol, cost, np.zeros(ncol),
                       np.ones(ncol), elastic)
