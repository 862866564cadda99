"""The map's data of one project, prepared once and shared by every session's map.

:meth:`MapData.of` gives one :class:`MapData` per project Inputs: the units' polygons as
Bokeh paths, the barrier lines grouped by kind (the barrier layer is read from disk at
most once, for its ``kind`` column), the bridges, the streets when the project has them and, per
level, the outlines of today's zones (dissolved once per level). Views only read these;
a plan change sends colours and attributes, never shapes. No Panel or Bokeh import here:
paths are plain lists.
"""

from __future__ import annotations

import threading
import weakref

import numpy as np
import shapely

__all__ = ["MapData", "polygon_paths", "line_paths", "barrier_paths", "street_paths",
           "bridge_points"]

Paths = tuple[list, list]


# ---------------------------------------------------------------------- geometry to paths
def polygon_paths(geoms) -> Paths:
    """Bokeh multi-polygon xs / ys (unit -> polygons -> rings) from (Multi)Polygons.

    One ``shapely.to_ragged_array`` call gives every coordinate and the ring, part and
    geometry offsets; the nested lists Bokeh wants are slices of those arrays. Plain lists,
    not arrays: BokehJS decodes one array per ring otherwise, several times slower.
    """
    geoms = np.asarray(geoms, dtype=object)
    kind, coords, offsets = shapely.to_ragged_array(geoms)
    if kind == shapely.GeometryType.POLYGON:
        ring_off, geom_off = offsets
        part_off = np.arange(len(geom_off))
        geom_off, part_off = part_off, geom_off  # each geometry is one part
    elif kind == shapely.GeometryType.MULTIPOLYGON:
        ring_off, part_off, geom_off = offsets
    else:
        raise ValueError(f"planning units must be polygons; got {kind.name.lower()} geometries")
    coords = np.round(coords, 1)
    x, y = coords[:, 0].tolist(), coords[:, 1].tolist()
    bounds = list(zip(ring_off[:-1].tolist(), ring_off[1:].tolist(), strict=True))
    rx = [x[a:b] for a, b in bounds]
    ry = [y[a:b] for a, b in bounds]
    xs, ys = [], []
    for g0, g1 in zip(geom_off[:-1], geom_off[1:], strict=True):
        parts = list(zip(part_off[g0:g1], part_off[g0 + 1:g1 + 1], strict=True))
        xs.append([rx[r0:r1] for r0, r1 in parts])
        ys.append([ry[r0:r1] for r0, r1 in parts])
    return xs, ys


def line_paths(geoms) -> Paths:
    """Bokeh multi_line xs / ys from lines, multi-lines or polygon boundaries (one path each)."""
    geoms = np.asarray(geoms, dtype=object)
    if not len(geoms):
        return [], []
    # Polygons give their rings; lines (multi-lines too: their boundary is their end points)
    # are drawn as they are.
    polygons = np.isin(shapely.get_type_id(geoms), (shapely.GeometryType.POLYGON,
                                                    shapely.GeometryType.MULTIPOLYGON))
    geoms = geoms.copy()
    geoms[polygons] = shapely.boundary(geoms[polygons])
    lines = shapely.get_parts(geoms)
    lines = lines[~shapely.is_empty(lines)]
    if not len(lines):
        return [], []
    coords, index = shapely.get_coordinates(lines, return_index=True)
    cuts = [0, *(np.flatnonzero(np.diff(index)) + 1).tolist(), len(index)]
    coords = np.round(coords, 1)
    x, y = coords[:, 0].tolist(), coords[:, 1].tolist()
    pairs = list(zip(cuts[:-1], cuts[1:], strict=True))
    return [x[a:b] for a, b in pairs], [y[a:b] for a, b in pairs]


# ---------------------------------------------------------------------- project data
def barrier_paths(inputs) -> dict[str, Paths]:
    """Barrier lines per kind (a key of :data:`districting.outputs.symbols.BARRIER_SYMBOLS`,
    from :func:`districting.outputs.reference.barrier_kinds`: "barrier" for a line of no
    known kind); kinds with no line are left out."""
    bars = inputs.barriers
    if bars is None or not len(bars):
        return {}
    from districting.outputs.reference import barrier_kinds
    from districting.outputs.symbols import BARRIER_SYMBOLS

    geoms = np.asarray(bars.geometry if hasattr(bars, "geometry") else bars, dtype=object)
    kinds = barrier_kinds(inputs)
    return {kind: line_paths(geoms[kinds == kind]) for kind in BARRIER_SYMBOLS
            if (kinds == kind).any()}


def street_paths(inputs) -> Paths | None:
    """The project's street lines (:func:`districting.outputs.reference.streets`), or None."""
    from districting.outputs.reference import streets

    lines = streets(inputs)
    return None if lines is None else line_paths(np.asarray(lines.geometry, dtype=object))


def bridge_points(inputs) -> tuple[list, list]:
    """x and y of each bridge or overpass (the centre of a short line)."""
    bridges = getattr(inputs, "bridges", None)
    if bridges is None or not len(bridges):
        return [], []
    xy = np.round(shapely.get_coordinates(shapely.centroid(
        np.asarray(bridges.geometry, dtype=object))), 1)
    return xy[:, 0].tolist(), xy[:, 1].tolist()


class MapData:
    """Shapes of one project's map: built once per Inputs, read by every session."""

    _cache: weakref.WeakKeyDictionary = weakref.WeakKeyDictionary()
    _cache_lock = threading.Lock()

    def __init__(self, inputs) -> None:
        self.inputs = inputs
        self.units: Paths = polygon_paths(inputs.units.geometry.to_numpy())
        self.bounds = tuple(float(v) for v in inputs.units.total_bounds)
        self.barriers: dict[str, Paths] = barrier_paths(inputs)
        self.streets: Paths | None = street_paths(inputs)
        self.bridges: tuple[list, list] = bridge_points(inputs)
        self._today: dict[str, Paths] = {}
        self._colors: dict[str, dict[str, str]] = {}
        self._lock = threading.Lock()

    @classmethod
    def of(cls, inputs) -> MapData:
        """The map data of a project's Inputs, made on first use and then shared."""
        with cls._cache_lock:
            data = cls._cache.get(inputs)
            if data is None:
                data = cls._cache[inputs] = cls(inputs)
            return data

    def today(self, level: str) -> Paths:
        """Outlines of today's zones of a level (dissolved once per level)."""
        with self._lock:
            if level not in self._today:
                from districting.outputs.zones import dissolve_zones

                inputs = self.inputs
                sites = inputs.sites
                ids = np.array([*sites["site_id"].astype(str), ""], dtype=object)
                cur = inputs.current[level]
                zones = dissolve_zones(inputs.units, ids[np.where(cur >= 0, cur, len(sites))],
                                      coverage=inputs.units_coverage)
                self._today[level] = line_paths(np.asarray(zones.geometry, dtype=object))
            return self._today[level]

    def school_colors(self, level: str) -> dict[str, str]:
        """The display colour of every school of a level: the same on every map of the
        workbench (plan on screen, compare maps, print), in the exports and the packet,
        whatever the plan.

        The one place the workbench gets zone colours: the project's stored colours
        (:func:`districting.outputs.store.stored_school_colours`, chosen once and kept in
        the options store; a store that cannot be read or written only means they are not
        kept). Read once per level by this process.
        """
        with self._lock:
            if level not in self._colors:
                from districting.outputs.store import stored_school_colours

                self._colors[level] = stored_school_colours(self.inputs, level)
            return dict(self._colors[level])
