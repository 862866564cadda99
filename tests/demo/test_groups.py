"""The demo town's invented group counts: read by the project, never above the students."""

from __future__ import annotations

import numpy as np

from districting.demo import demo_folder
from districting.demo.groups import GROUPS
from districting.intake import load_project


def test_the_demo_reads_its_group_counts_within_the_students():
    inputs = load_project(demo_folder() / "project.toml")
    assert inputs.settings.groups.names == tuple(GROUPS)
    assert inputs.settings.groups.band_points == 0  # shares reported; the band is the run's
    for level, counts in inputs.counts.items():
        groups = inputs.groups[level]
        assert groups.shape == (len(GROUPS), *counts.shape)
        assert not np.isnan(groups).any()  # counted in every year
        assert (groups <= counts[None]).all() and (groups >= 0).all()
        for g, (low, high) in enumerate(GROUPS.values()):
            share = groups[g].sum() / counts.sum()
            assert low / 2 < share < high  # the invented rates, spread over neighbourhoods
