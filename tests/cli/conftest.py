"""The invented 4 x 3 grid town of tests/data/make_broken.py, for the command-line tests."""

from __future__ import annotations

import importlib.util
from pathlib import Path

import pytest

_spec = importlib.util.spec_from_file_location(
    "make_broken", Path(__file__).parents[1] / "data" / "make_broken.py")
_town = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(_town)


@pytest.fixture(scope="session")
def town():
    """The module that writes the grid town (``town.write_town(folder)``)."""
    return _town
