"""Reduced-cost fixing: the columns no plan cheaper than a known one can change.

For the LP relaxation min c x (rows, and 0 <= x <= 1) with optimum z and reduced costs
rc at an optimal basis, weak duality gives, for every feasible x,

    c x >= z + sum over columns at 0 of rc_k x_k + sum over columns at 1 of -rc_k (1 - x_k)

(rc_k >= 0 at the lower bound, rc_k <= 0 at the upper; the row terms are never negative).
So a plan that uses a column the LP leaves at 0 costs at least z + rc_k, and one that
drops a column the LP sets to 1 at least z - rc_k. When that exceeds ``ub``, the cost of
a valid plan in hand, no better plan does it, and the column is fixed for good
(reduced-cost fixing; Nemhauser & Wolsey, "Integer and Combinatorial Optimization", Wiley
1988, cited from memory). The rows added later (cuts) only cut the LP's feasible set, so
the test stays valid with the LP solved before them.

The HiGHS route applies it to the pairs (a unit's site) and to the candidate sites: a site
whose opening alone would cost more than the plan in hand is closed with a proof, and one
whose closing would is opened. Measured (2026-12-04, 2-core machine; HiGHS with the pairs
fixed as before, from the same start and bound 986 / 1,045): on Osman & Christofides 14, 11
of 100 candidate sites closed this way, proof in 19.1-19.6 s instead of 25.2-25.6 s; on
instance 18, 9 sites, 20.1-20.8 s instead of 29.1-29.7 s.
"""

from __future__ import annotations

import numpy as np

__all__ = ["fixable"]


def fixable(z: float, value: np.ndarray, rc: np.ndarray, ub: float,
            free: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(to_zero, to_one) masks over the columns given: ``value`` and ``rc`` their LP values
    and reduced costs in an LP of optimum ``z``; ``free`` the columns whose bounds are still
    [0, 1]. Nothing is fixed without a finite ``ub``."""
    value, rc, free = np.asarray(value), np.asarray(rc), np.asarray(free, bool)
    if not np.isfinite(ub):
        none = np.zeros(len(value), bool)
        return none, none.copy()
    slack = max(abs(ub), 1.0) * 1e-9
    to_zero = free & (value < 0.5) & (z + rc > ub + slack)
    to_one = free & (value > 0.5) & (z - rc > ub + slack)
    return to_zero, to_one
