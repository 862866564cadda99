"""A square grid of units with schools in random units: straight-line costs, rook adjacency.

Shared by the tests that need a town larger than a hand-worked one (invented, seeded).
"""

from __future__ import annotations

import numpy as np


def grid_town(side: int, m: int, seed: int):
    """(rng, roots, cost, edges): ``side`` x ``side`` units, ``m`` schools in random units,
    cost = straight-line distance in grid steps, edges between rook neighbours. The rng is
    returned so a caller draws what it needs next from the same seeded stream."""
    rng = np.random.default_rng(seed)
    n = side * side
    xy = np.c_[np.arange(n) % side, np.arange(n) // side].astype(float)
    roots = rng.choice(n, m, replace=False)
    cost = np.hypot(*(xy[:, None, :] - xy[roots][None, :, :]).transpose(2, 0, 1))
    edges = [(i, i + 1) for i in range(n) if (i + 1) % side] + [
        (i, i + side) for i in range(n - side)]
    return rng, roots, cost, edges
