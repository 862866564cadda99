"""Barrier-aware travel for projects without streets: around the barrier lines, crossing
them only at a bridge or crossing.

Method (chosen by measurement against travel along the demo town's streets,
``benchmarks/bench_travel_measures.py``): shortest paths in a Delaunay triangulation.

1. Nodes: the unit points, the site points, the points of the crossings (a point bridge,
   or the vertices and middle of a bridge drawn as a line) and, when unit polygons are
   given, their vertices (a vertex on a barrier line keeps no edge: every edge from it
   meets the line). Equal coordinates are one node.
2. Edges: the Delaunay triangulation of the nodes (``scipy.spatial.Delaunay``), each edge
   as long as the straight line between its ends.
3. An edge that meets a barrier line is removed unless every place where it meets one lies
   within ``tolerance`` of a crossing: the edges are tested in one vectorised shapely call
   against the barrier lines with a gap of radius ``tolerance`` cut around each crossing.
4. ``scipy.sparse.csgraph.dijkstra`` from every site; a unit no path reaches gets ``inf``.

Why a Delaunay triangulation: without barriers, the shortest path between two of its nodes
is at most a constant times their straight-line distance (below 1.998; G. Xia, "The
stretch factor of the Delaunay triangulation is less than 1.998", SIAM J. Computing 42(4),
2013, cited from memory), and on points as dense as planning units it is typically a few
percent longer. With the barrier edges removed the paths bend round the lines' ends or pass
through the gaps at the crossings, as walkers do. The polygon vertices give the
triangulation points along each unit's border, so a path can hug a barrier instead of
zig-zagging between unit points.
"""

from __future__ import annotations

import numpy as np
import shapely
from scipy.sparse import coo_matrix
from scipy.sparse.csgraph import dijkstra
from scipy.spatial import Delaunay

__all__ = ["barrier_distances", "barrier_graph", "TOLERANCE"]

#: Metres: an edge may meet a barrier within this distance of a crossing (the half-width
#: of a bridge deck and its approaches; a choice of ours, not a published value).
TOLERANCE = 15.0


def _lines(geoms) -> object:
    """One (multi)line geometry of barrier lines; polygons count by their outline."""
    arr = np.asarray(geoms, dtype=object).ravel()
    arr = arr[~(shapely.is_missing(arr) | shapely.is_empty(arr))] if len(arr) else arr
    if not len(arr):
        return None
    poly = np.isin(shapely.get_type_id(arr), [3, 6])
    arr = np.where(poly, shapely.boundary(arr), arr)
    return shapely.union_all(arr)


def _crossing_points(crossings) -> np.ndarray:
    """(k, 2) points of the crossings: each vertex, and the middle of each line."""
    arr = np.asarray(crossings if crossings is not None else [], dtype=object).ravel()
    arr = arr[~(shapely.is_missing(arr) | shapely.is_empty(arr))] if len(arr) else arr
    if not len(arr):
        return np.zeros((0, 2))
    mid = shapely.line_interpolate_point(
        arr[np.isin(shapely.get_type_id(arr), [1, 5])], 0.5, normalized=True)
    return np.vstack([shapely.get_coordinates(arr), shapely.get_coordinates(mid)])


def barrier_graph(unit_xy: np.ndarray, site_xy: np.ndarray, barriers, crossings,
                  unit_polygons: np.ndarray | None = None, tolerance: float = TOLERANCE):
    """The graph of the module docstring.

    Returns ``(points, edges, unit_node, site_node)``: node coordinates (k, 2), edges
    (e, 2) of node indices (i < j, each once, length = straight line), and the node of
    each unit point and each site point.
    """
    unit_xy = np.asarray(unit_xy, dtype=float).reshape(-1, 2)
    site_xy = np.asarray(site_xy, dtype=float).reshape(-1, 2)
    lines = _lines(barriers)
    extra = [_crossing_points(crossings)]
    if unit_polygons is not None and len(unit_polygons):
        extra.append(shapely.get_coordinates(np.asarray(unit_polygons, dtype=object)))
    xy = np.vstack([unit_xy, site_xy, *extra])
    points, inverse = np.unique(xy, axis=0, return_inverse=True)
    inverse = inverse.ravel()
    n, m = len(unit_xy), len(site_xy)
    if len(points) < 3:
        edges = np.array([[0, 1]]) if len(points) == 2 else np.zeros((0, 2), int)
    else:
        tri = Delaunay(points).simplices
        pairs = np.vstack([tri[:, [0, 1]], tri[:, [1, 2]], tri[:, [0, 2]]])
        edges = np.unique(np.sort(pairs, axis=1), axis=0)
    if lines is not None and len(edges):
        gaps = np.asarray(crossings if crossings is not None else [], dtype=object).ravel()
        gaps = gaps[~(shapely.is_missing(gaps) | shapely.is_empty(gaps))] if len(gaps) else gaps
        blocked = (shapely.difference(lines, shapely.buffer(shapely.union_all(gaps), tolerance))
                   if len(gaps) else lines)
        shapely.prepare(blocked)
        segments = shapely.linestrings(np.stack([points[edges[:, 0]], points[edges[:, 1]]], 1))
        edges = edges[~shapely.intersects(blocked, segments)]
    return points, edges, inverse[:n], inverse[n:n + m]


def barrier_distances(unit_xy: np.ndarray, site_xy: np.ndarray, barriers: np.ndarray,
                      crossings: np.ndarray, unit_polygons: np.ndarray | None = None,
                      ) -> np.ndarray:
    """(n units, m sites) travel in metres around the barriers, crossing them only at the
    crossings (bridges: points or lines); ``inf`` where no such path exists. See the
    module docstring for the method."""
    points, edges, unit_node, site_node = barrier_graph(
        unit_xy, site_xy, barriers, crossings, unit_polygons)
    k = len(points)
    length = np.hypot(*(points[edges[:, 0]] - points[edges[:, 1]]).T)
    graph = coo_matrix((length, (edges[:, 0], edges[:, 1])), shape=(k, k)).tocsr()
    if not len(site_node):
        return np.zeros((len(unit_node), 0))
    dist = dijkstra(graph, directed=False, indices=site_node)
    return dist[:, unit_node].T
