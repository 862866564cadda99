"""Travel matrices kept on disk per project, so a project reopened costs no recomputation.

The key is a sha256 over the measure, :data:`FORMAT`, the geometries the measure reads
(streets, or barriers and bridges, as WKB) and the unit and site coordinates: a changed
layer or a moved point gives a new key, so a stale matrix is never read. The file is
``<project folder>/.districting-cache/travel-<key>.npz`` (several named arrays: the
street measure keeps its access legs and pieces for the checks). A folder that cannot be
written (read-only media, a shared drive) only means the matrix is computed each time.
"""

from __future__ import annotations

import hashlib
import zipfile
from collections.abc import Callable
from pathlib import Path

import numpy as np
import shapely

from ..io import atomic_path

__all__ = ["FORMAT", "CACHE_FOLDER", "cache_key", "cached_arrays", "cache_file"]

#: Raise when the meaning or layout of a cached file changes: old files are then ignored.
FORMAT = 1
CACHE_FOLDER = ".districting-cache"


def cache_key(measure: str, *geometries, unit_xy: np.ndarray, site_xy: np.ndarray) -> str:
    """Hex sha256 of everything a travel matrix depends on."""
    h = hashlib.sha256(f"travel {measure} format {FORMAT}".encode())
    for geoms in geometries:
        geoms = np.asarray(geoms if geoms is not None else [], dtype=object)
        h.update(b"|geometries %d|" % len(geoms))
        for wkb in shapely.to_wkb(geoms, hex=False, include_srid=False):
            h.update(b"-" if wkb is None else len(wkb).to_bytes(8, "little") + wkb)
    for xy in (unit_xy, site_xy):
        xy = np.ascontiguousarray(xy, dtype=np.float64)
        h.update(b"|points %d|" % len(xy) + xy.tobytes())
    return h.hexdigest()


def cache_file(folder: Path, key: str) -> Path:
    return Path(folder) / CACHE_FOLDER / f"travel-{key}.npz"


def _load(path: Path) -> dict[str, np.ndarray] | None:
    try:
        with np.load(path, allow_pickle=False) as data:
            return {k: data[k] for k in data.files}
    except (OSError, ValueError, KeyError, zipfile.BadZipFile, EOFError):
        return None  # absent, or damaged: computed again and rewritten


def cached_arrays(folder: Path | None, key: str,
                  compute: Callable[[], dict[str, np.ndarray]]) -> dict[str, np.ndarray]:
    """The arrays stored under ``key`` in ``folder``'s cache, else ``compute()`` (then stored).

    ``folder`` None: no disk cache. A cache that cannot be written is skipped silently.
    """
    if folder is None:
        return compute()
    path = cache_file(folder, key)
    found = _load(path)
    if found is not None:
        return found
    arrays = compute()
    try:
        with atomic_path(path) as tmp, open(tmp, "wb") as fh:
            np.savez(fh, **arrays)
    except OSError:
        pass  # read-only or full: the result stands, only the cache is missing
    return arrays
