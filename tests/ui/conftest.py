"""Fixtures of the workbench tests (tests/ui/): the invented grid town of tests/ui_town.py."""

from __future__ import annotations

import pytest
from ui_town import grid_inputs


@pytest.fixture
def inputs(tmp_path):
    """The grid town, with a store GeoPackage of this test's own."""
    return grid_inputs(tmp_path)
