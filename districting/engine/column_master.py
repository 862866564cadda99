"""The zone master of the column generation (:mod:`districting.engine.columns`) in HiGHS.

Rows (fixed when the master is built): cover, one per unit (``= 1``); convexity, one per
site (``= 1`` always open, ``<= 1`` candidate, ``0`` closed); the count of open candidates
when p is set; the limits on students moved and transported when set. Columns (appended):
one per (site, zone), plus priced artificial columns that make any row reachable until the
real columns do. Solved as an LP for duals, and with whole columns as a MIP for a plan.
"""

from __future__ import annotations

import time

import numpy as np

from ..problem import Problem
from .answer import set_interrupt, set_lp_time_limit

__all__ = ["ZoneMaster"]


class ZoneMaster:
    """The restricted master LP in HiGHS: rows fixed, columns appended."""

    def __init__(self, problem: Problem, big: float | None) -> None:
        """``big``: the price of the artificial columns (None: no artificials, the start's
        columns make the master feasible)."""
        import highspy

        from .answer import quiet_highs

        p, n, m = problem, problem.n_units, problem.n_sites
        self.problem, self.hs = p, highspy
        inf = highspy.kHighsInf
        self.cand = p.candidates & ~p.closed_sites
        self.k_open = None if p.p is None or not self.cand.any() else p.p - int(
            p.always_open.sum())
        conv_lo = np.where(p.always_open, 1.0, 0.0)
        conv_hi = np.where(p.closed_sites, 0.0, 1.0)
        lo = [np.ones(n), conv_lo]
        hi = [np.ones(n), conv_hi]
        nrow = n + m
        self.count_row = self.moved_row = self.ride_row = -1
        if self.k_open is not None:
            self.count_row, nrow = nrow, nrow + 1
            lo.append([self.k_open])
            hi.append([self.k_open])
        if p.max_moved is not None:
            self.moved_row, nrow = nrow, nrow + 1
            lo.append([-inf])
            hi.append([p.max_moved])
        if p.max_transported is not None and p.walk is not None:
            self.ride_row, nrow = nrow, nrow + 1
            lo.append([-inf])
            hi.append([p.max_transported])
        self.nrow = nrow
        h = quiet_highs()
        row_lo, row_hi = np.concatenate(lo).astype(float), np.concatenate(hi).astype(float)
        h.addRows(nrow, row_lo, row_hi, 0, np.zeros(nrow, np.int32), np.zeros(0, np.int32),
                  np.zeros(0))
        # artificials: any row can be met at a high price (the start's columns make them 0)
        art_rows = [*range(n), *(n + np.flatnonzero(p.always_open)).tolist()]
        art_coef = [1.0] * len(art_rows)
        for r, c in ((self.count_row, 1.0), (self.moved_row, -1.0), (self.ride_row, -1.0)):
            if r >= 0:
                art_rows.append(r)
                art_coef.append(c)
        k = len(art_rows) if big is not None else 0
        if k:
            h.addCols(k, np.full(k, big), np.zeros(k), np.full(k, inf), k,
                      np.arange(k, dtype=np.int32), np.asarray(art_rows, np.int32),
                      np.asarray(art_coef))
        self.n_art = k
        self.h = h
        self.sites: list[int] = []
        self.zones: list[np.ndarray] = []
        self.seen: set[tuple[int, bytes]] = set()
        d0 = p.demand[0]
        self.moved = (d0[:, None] * ((p.current[:, None] >= 0)
                                     & (p.current[:, None] != np.arange(m)[None, :])))
        self.ride = None if self.ride_row < 0 else d0[:, None] * ~p.walk

    def add(self, site: int, zone: np.ndarray) -> bool:
        """Append the column (site, zone) unless it is there already."""
        key = (site, zone.tobytes())
        if key in self.seen:
            return False
        self.seen.add(key)
        p = self.problem
        rows, coef = list(zone.tolist()) + [p.n_units + site], [1.0] * (len(zone) + 1)
        extra = ((self.count_row, 1.0 if self.cand[site] else 0.0),
                 (self.moved_row, float(self.moved[zone, site].sum())),
                 (self.ride_row, 0.0 if self.ride is None else float(self.ride[zone, site].sum())))
        for r, c in extra:
            if r >= 0 and c != 0.0:
                rows.append(r)
                coef.append(c)
        cost = float(p.weighted_cost[zone, site].sum())
        self.h.addCol(cost, 0.0, self.hs.kHighsInf, len(rows), np.asarray(rows, np.int32),
                      np.asarray(coef))
        self.sites.append(site)
        self.zones.append(zone)
        return True

    def _limit(self, seconds: float | None) -> None:
        """The next run's time limit (:func:`~districting.engine.answer.set_lp_time_limit`)."""
        set_lp_time_limit(self.h, np.inf if seconds is None else max(seconds, 0.01))

    def solve_lp(self, time_limit: float | None) -> tuple[float, np.ndarray] | None:
        """(value, row duals) of the restricted master LP; None when it did not finish."""
        self._limit(time_limit)
        self.h.run()
        if self.h.getModelStatus() != self.hs.HighsModelStatus.kOptimal:
            return None
        sol = self.h.getSolution()
        return float(self.h.getInfo().objective_function_value), np.asarray(sol.row_dual)

    def solve_mip(self, time_limit: float | None, start: np.ndarray | None
                  ) -> np.ndarray | None:
        """The restricted master with whole columns and no artificials: a plan or None."""
        hs, h = self.hs, self.h
        k = len(self.zones)
        if not k:
            return None
        idx = np.arange(self.n_art, self.n_art + k, dtype=np.int32)
        h.changeColsIntegrality(k, idx, np.full(k, hs.HighsVarType.kInteger))
        if self.n_art:
            art = np.arange(self.n_art, dtype=np.int32)
            h.changeColsBounds(self.n_art, art, np.zeros(self.n_art), np.zeros(self.n_art))
        # a MIP run is held against its own time, not the model's summed run time
        mip_limit = np.inf if time_limit is None else max(time_limit, 0.01)
        h.setOptionValue("time_limit", float(mip_limit))
        h.setOptionValue("mip_rel_gap", 1e-9)
        if start is not None:
            sol = hs.HighsSolution()
            sol.col_value = np.concatenate([np.zeros(self.n_art), start])
            sol.value_valid = True
            h.setSolution(sol)
        deadline = time.monotonic() + (time_limit or np.inf) + 0.5

        def interrupt(e) -> None:  # HiGHS checks its own limit rarely on some models
            set_interrupt(e, time.monotonic() > deadline)

        h.cbMipInterrupt.subscribe(interrupt)
        try:
            h.run()
        finally:
            h.cbMipInterrupt.unsubscribe(interrupt)  # the next run has its own deadline
        if h.getInfo().primal_solution_status != 2:
            return None
        x = np.asarray(h.getSolution().col_value)[self.n_art:]
        a = np.full(self.problem.n_units, -1, np.int64)
        for c in np.flatnonzero(x > 0.5).tolist():
            a[self.zones[c]] = self.sites[c]
        return a
