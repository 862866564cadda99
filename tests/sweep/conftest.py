"""Fixtures of the sweep tests: the grid town of tests/sweep_town.py, an in-process cluster."""

from __future__ import annotations

from pathlib import Path

import pytest
from sweep_town import write_sweep_town


@pytest.fixture()
def project(tmp_path) -> Path:
    return write_sweep_town(tmp_path / "town")


@pytest.fixture(scope="module")
def client():
    """An in-process Dask cluster (threads of this process): quick to start."""
    from districting.sweep.cluster import open_client

    with open_client(workers=2, processes=False) as c:
        yield c
