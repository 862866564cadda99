"""The non-dominated options: no other option moves fewer students and travels less.

Both figures are to be kept low. An option is dominated when another is at least as good
on both and better on one; the frontier is every option that is not. Equal options are
both kept (neither is better). Points with a missing figure (no plan) are never on it.
"""

from __future__ import annotations

import numpy as np

__all__ = ["non_dominated"]


def non_dominated(moved, travel) -> np.ndarray:
    """Mask of the non-dominated points of (students moved, travel), both minimised.

    Sorted by students moved, a point is on the frontier when its travel is the lowest of
    its group of equal moves and below the lowest travel of every group with fewer moves.
    """
    x = np.asarray(moved, float)
    y = np.asarray(travel, float)
    keep = np.zeros(len(x), bool)
    valid = np.flatnonzero(np.isfinite(x) & np.isfinite(y))
    order = valid[np.lexsort((y[valid], x[valid]))]
    best = np.inf  # lowest travel among fewer moves
    k = 0
    while k < len(order):
        group = order[x[order] == x[order[k]]]  # equal moves (sorted: contiguous)
        lowest = y[group].min()
        if lowest < best:
            keep[group[y[group] == lowest]] = True
            best = lowest
        k += len(group)
    return keep
