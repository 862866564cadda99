"""Invented student-group counts of the demo town (meal support, language learners).

A random stream of its own (``default_rng([seed, GROUP_STREAM])``), so the units, sites,
zones and streets do not change with it. Each neighbourhood gets a rate per group, each
unit a rate near its neighbourhood's, and each level and year a binomial draw of that
rate over the unit's students: a group count never exceeds the students it is part of.
"""

from __future__ import annotations

import numpy as np

from .constants import CURRENT_YEAR, LEVELS, YEARS

__all__ = ["GROUP_STREAM", "GROUPS", "group_columns", "group_counts"]

GROUP_STREAM = 17  # second key of the groups' random stream
#: group -> (lowest, highest) neighbourhood rate; invented, spread so the shares differ
GROUPS = {"meal_support": (0.12, 0.55), "language_learners": (0.03, 0.22)}


def group_columns() -> list[str]:
    """The [groups] columns templates of the demo project."""
    return [f"{g}_{{level}}_{{year}}" for g in GROUPS]


def group_counts(seed: int, counts: dict[str, np.ndarray], hood: np.ndarray
                 ) -> dict[str, np.ndarray]:
    """Group students per unit, keyed ``{group}_{level}_{year}`` like the counts."""
    rng = np.random.default_rng([seed, GROUP_STREAM])
    n_hood = int(hood.max()) + 1
    out: dict[str, np.ndarray] = {}
    for group, (low, high) in GROUPS.items():
        hood_rate = rng.uniform(low, high, n_hood)
        unit_rate = np.clip(hood_rate[hood] * rng.lognormal(0.0, 0.2, len(hood)), 0.0, 0.95)
        for level in LEVELS:
            for year in (CURRENT_YEAR, *YEARS):
                students = np.asarray(counts[f"{level}_{year}"], np.int64)
                out[f"{group}_{level}_{year}"] = rng.binomial(students, unit_rate)
    return out
