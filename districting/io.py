"""Atomic writes.

Every file the project writes goes through :func:`atomic_path`: the writer fills a
temporary file beside the target, and only a complete file is renamed over it (an atomic
``os.replace`` on the same file system). A crash or a kill mid-write leaves the previous
file untouched and at most a stray ``.tmp-*`` file.
"""

from __future__ import annotations

import contextlib
import os
import shutil
import tempfile
from collections.abc import Iterator
from pathlib import Path

__all__ = ["atomic_path", "atomic_write_text", "atomic_write_bytes", "atomic_copy_edit"]


@contextlib.contextmanager
def atomic_path(target: str | os.PathLike, suffix: str | None = None) -> Iterator[Path]:
    """Yield a temporary path beside ``target``; rename it over ``target`` on success.

    The temporary name keeps the target's suffix (drivers such as GDAL's pick the format
    from it). On an exception the temporary file is removed and ``target`` is unchanged.
    """
    target = Path(target)
    target.parent.mkdir(parents=True, exist_ok=True)
    sfx = target.suffix if suffix is None else suffix
    fd, tmp = tempfile.mkstemp(prefix=f".tmp-{target.stem}-", suffix=sfx, dir=target.parent)
    os.close(fd)
    tmp_path = Path(tmp)
    tmp_path.unlink()  # writers create the file themselves (some refuse an existing one)
    try:
        yield tmp_path
        if not tmp_path.exists():
            raise RuntimeError(f"writer produced no file for {target}")
        with open(tmp_path, "rb+") as fh:
            os.fsync(fh.fileno())
        os.replace(tmp_path, target)
    finally:
        if tmp_path.exists():
            tmp_path.unlink()
        for side in tmp_path.parent.glob(tmp_path.name + "-*"):  # e.g. SQLite -wal/-shm
            side.unlink(missing_ok=True)


def atomic_write_bytes(target: str | os.PathLike, data: bytes) -> None:
    with atomic_path(target) as tmp:
        tmp.write_bytes(data)


def atomic_write_text(target: str | os.PathLike, text: str) -> None:
    atomic_write_bytes(target, text.encode("utf-8"))


@contextlib.contextmanager
def atomic_copy_edit(target: str | os.PathLike) -> Iterator[Path]:
    """Edit a copy of an existing file (e.g. add a layer to a GeoPackage), then swap it in.

    Yields the path of a temporary copy of ``target`` (an empty name when ``target`` does
    not exist yet); the copy replaces ``target`` only when the block ends without error.
    """
    target = Path(target)
    with atomic_path(target) as tmp:
        if target.exists():
            shutil.copy2(target, tmp)
        yield tmp
