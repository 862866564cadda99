"""Reading a project's layers and tables.

:func:`read_layer` and :func:`read_table` read a project's sources (GeoPackage, GeoJSON,
zipped Shapefile, FlatGeobuf; CSV) and raise :class:`ReadError` with the file, what is
wrong and the fix.
"""

from __future__ import annotations

import os
from pathlib import Path

__all__ = ["read_layer", "read_table", "ReadError"]


class ReadError(ValueError):
    """A source that cannot be read: which file, what is wrong, how to fix it.

    ``kind`` is ``"missing"`` (no such file), ``"unreadable"`` (not a format we read, or
    damaged), ``"layer"`` (the layer is absent or must be named) or ``"geometry"`` (the
    layer has no geometry column).
    """

    def __init__(self, path: str | os.PathLike, kind: str, problem: str, fix: str,
                 layers: tuple[str, ...] = ()):
        self.path = Path(path)
        self.kind = kind
        self.problem = problem
        self.fix = fix
        self.layers = layers
        super().__init__(f"{self.path}: {problem}. Fix: {fix}")


def _layer_names(path: Path, what: str) -> list[tuple[str, str | None]]:
    import pyogrio

    try:
        found = pyogrio.list_layers(path)
    except Exception as err:  # pyogrio raises DataSourceError for unknown or damaged files
        raise ReadError(
            path, "unreadable",
            f"the {what} file cannot be opened as a GIS layer ({_first_line(err, path)})",
            "export it again as GeoPackage (.gpkg), GeoJSON, FlatGeobuf (.fgb) or a "
            "zipped Shapefile (.zip holding .shp, .shx, .dbf and .prj)",
        ) from None
    return [(str(name), None if gtype is None else str(gtype)) for name, gtype in found]


def _first_line(err: BaseException, path: Path | None = None) -> str:
    """The gist of a library's message (its first sentence, without the file's path)."""
    text = str(err).strip()
    if path is not None:
        text = text.replace(f"'{path}' ", "").replace(str(path), path.name)
    text = text.splitlines()[0] if text else type(err).__name__
    return text.split(";")[0].strip()


def read_layer(path: str | os.PathLike, layer: str | None = None, what: str = "units"):
    """Read one vector layer as a GeoDataFrame (GeoPackage, GeoJSON, zipped Shapefile, FlatGeobuf).

    ``layer`` names a layer of a multi-layer file (a GeoPackage, or a .zip holding several
    Shapefiles); a file with one spatial layer needs none. ``what`` ("units", "sites"...)
    only words the messages. Raises :class:`ReadError` naming the file, what is wrong
    (listing the layers that exist when ``layer`` is absent) and the fix.
    """
    import geopandas as gpd

    path = Path(path)
    if not path.is_file():
        hint = "the path is a folder" if path.is_dir() else "no such file"
        raise ReadError(path, "missing", f"the {what} file does not exist ({hint})",
                        "correct the source path in the project file (paths are relative "
                        "to the project file's folder)")
    found = _layer_names(path, what)
    names = tuple(name for name, _ in found)
    spatial = [name for name, gtype in found if gtype is not None]
    if layer:
        if layer not in names:
            listing = ", ".join(names) if names else "none"
            raise ReadError(path, "layer", f"there is no layer {layer!r} (layers: {listing})",
                            "set layer to one of the layers listed", layers=names)
    elif len(spatial) == 1:
        layer = spatial[0]
    elif not spatial:
        raise ReadError(path, "geometry", f"the {what} file holds no layer with geometry",
                        "export the layer with its geometry", layers=names)
    else:
        raise ReadError(path, "layer",
                        f"the file holds several layers ({', '.join(spatial)}) and the "
                        f"project names none for the {what}",
                        "set layer to one of the layers listed", layers=names)
    try:
        frame = gpd.read_file(path, layer=layer, engine="pyogrio")
    except Exception as err:
        raise ReadError(path, "unreadable",
                        f"layer {layer!r} cannot be read ({_first_line(err, path)})",
                        "open the file in a GIS, repair or export it again") from None
    if not isinstance(frame, gpd.GeoDataFrame) or frame.geometry.name not in frame.columns:
        raise ReadError(path, "geometry", f"layer {layer!r} has no geometry column",
                        "export the layer with its geometry", layers=names)
    return frame


def read_table(path: str | os.PathLike, what: str = "table"):
    """Read a CSV file as a DataFrame of text cells (column names stripped).

    Every cell stays text ("" where empty) so that ids keep leading zeros and the caller can
    tell a missing value from a non-numeric one. The delimiter is a comma, or a semicolon or
    tab when the header line holds more of those (spreadsheets in many locales write ";").
    A UTF-8 byte-order mark is ignored. Raises :class:`ReadError` when the file is missing
    or is not a readable CSV.
    """
    import pandas as pd

    path = Path(path)
    if not path.is_file():
        raise ReadError(path, "missing", f"the {what} file does not exist",
                        "correct the path in the project file (paths are relative to the "
                        "project file's folder)")
    fix = "save it as CSV (UTF-8) with one header row"
    try:
        with open(path, encoding="utf-8-sig") as fh:
            header = fh.readline()
    except (UnicodeDecodeError, OSError) as err:
        raise ReadError(path, "unreadable", f"the {what} file is not UTF-8 text "
                        f"({_first_line(err)})", fix) from None
    if not header.strip():
        raise ReadError(path, "unreadable", f"the {what} file is empty", fix)
    sep = max((",", ";", "\t"), key=header.count)
    try:
        frame = pd.read_csv(path, sep=sep, dtype=str, keep_default_na=False,
                            encoding="utf-8-sig", skipinitialspace=True)
    except Exception as err:  # pandas' ParserError and friends
        raise ReadError(path, "unreadable", f"the {what} file is not a readable CSV "
                        f"({_first_line(err)})", fix) from None
    frame.columns = [str(c).strip() for c in frame.columns]
    return frame.apply(lambda col: col.str.strip())
