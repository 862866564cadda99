"""The travel cache: a hit returns what was stored, any change of input misses, a folder
that cannot be written only costs the cache."""

from __future__ import annotations

import numpy as np
import shapely

from districting.travel.cache import cache_file, cache_key, cached_arrays

LINES = np.array([shapely.LineString([(0, 0), (100, 0)])], dtype=object)
UNITS, SITES = np.array([[1.0, 2.0]]), np.array([[50.0, 5.0]])


def key(measure="streets", lines=LINES, units=UNITS, sites=SITES):
    return cache_key(measure, lines, unit_xy=units, site_xy=sites)


def test_every_input_changes_the_key():
    moved = np.array([shapely.LineString([(0, 0), (100, 0.01)])], dtype=object)
    keys = {key(), key("straight-line"), key(lines=moved), key(units=UNITS + 0.001),
            key(sites=SITES[::-1] * 2)}
    assert len(keys) == 5 and key() == key()


def test_hit_reads_the_stored_arrays(tmp_path):
    calls = []

    def compute():
        calls.append(1)
        return {"metres": np.array([[3.0, np.inf]])}

    first = cached_arrays(tmp_path, key(), compute)
    again = cached_arrays(tmp_path, key(), compute)
    assert len(calls) == 1 and cache_file(tmp_path, key()).exists()
    assert np.array_equal(first["metres"], again["metres"])
    cache_file(tmp_path, key()).write_bytes(b"damaged")
    assert np.array_equal(cached_arrays(tmp_path, key(), compute)["metres"], first["metres"])
    assert len(calls) == 2  # a damaged file is computed again


def test_unwritable_cache_computes_without_error(tmp_path):
    """The cache folder cannot be made (a file holds its name; as on read-only media)."""
    (tmp_path / ".districting-cache").write_text("not a folder")
    got = cached_arrays(tmp_path, key(), lambda: {"metres": np.ones((1, 1))})
    assert got["metres"][0, 0] == 1.0
