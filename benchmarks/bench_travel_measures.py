"""Which barrier-aware travel measure comes closest to travel along streets? (demo town)

Reference: travel along the demo town's walkable streets, computed here apart from the
package: the street lines split every 20 m (``shapely.segmentize``), a plain vertex graph
(a vertex shared by two streets is one node) and ``scipy.sparse.csgraph.dijkstra`` from
each site, plus a straight access leg at each end to the nearest of the 8 nearest
vertices whose leg crosses no barrier.

Candidates (no streets used): the straight line; shortest paths through the units' rook
adjacency (the project's own graph, barriers cut except at bridges; edge = distance
between unit points); the Delaunay graph of units, sites and crossings with barrier edges
removed except at crossings; the same with the unit polygons' vertices as extra nodes
(``districting.travel.barriers.barrier_distances``); and that graph plus the edges to the
k nearest nodes that cross no barrier. For each: the ratio to the street distance over
every unit-site pair (median, 90th percentile), the ratio to the straight line, the build
time, the spread of the ratio (90th over 10th percentile: a constant factor would not
matter to the solver, a spread does), and the share of (unit, level) whose nearest school
is the street-nearest one.

Then the time of barrier_distances for 20,000 random points x 50 sites in the same town.

Run: PYTHONPATH=. .venv/bin/python benchmarks/bench_travel_measures.py [FOLDER]
(FOLDER holds project.toml and town.gpkg; default data/demo).
"""

from __future__ import annotations

import sys
import time
from pathlib import Path

import geopandas as gpd
import numpy as np
import shapely
from scipy.sparse import coo_matrix
from scipy.sparse.csgraph import dijkstra
from scipy.spatial import cKDTree

from districting.intake.adjacency import Adjacency
from districting.travel.barriers import TOLERANCE, barrier_distances, barrier_graph


def street_distances(streets, unit_xy, site_xy, barrier_union, step=20.0):
    geoms = shapely.segmentize(streets.geometry[streets["walkable"]].to_numpy(), step)
    xy, line = shapely.get_coordinates(geoms, return_index=True)
    key = np.round(xy * 100).astype(np.int64)
    vertices, node = np.unique(key, axis=0, return_inverse=True)
    vertices = vertices / 100.0
    node = node.ravel()
    same = line[1:] == line[:-1]
    a, b = node[:-1][same], node[1:][same]
    w = np.hypot(*(xy[:-1][same] - xy[1:][same]).T)
    k = len(vertices)
    graph = coo_matrix((w, (a, b)), shape=(k, k)).tocsr()

    def attach(pts):
        dist, idx = cKDTree(vertices).query(pts, k=8)
        legs = shapely.linestrings(np.stack([np.repeat(pts, 8, 0), vertices[idx.ravel()]], 1))
        ok = ~shapely.intersects(barrier_union, legs).reshape(dist.shape)
        first = np.argmax(ok, axis=1)  # nearest leg crossing no barrier
        pick = np.arange(len(pts))
        return idx[pick, first], dist[pick, first]

    u_node, u_leg = attach(unit_xy)
    s_node, s_leg = attach(site_xy)
    d = dijkstra(graph, directed=False, indices=s_node)[:, u_node].T
    return d + u_leg[:, None] + s_leg[None, :]


def rook_distances(units, site_xy, barriers, bridges, unit_xy):
    adj = Adjacency.from_polygons(units.geometry, units["unit_id"], "rook",
                                  barriers=barriers.geometry, bridges=bridges.geometry)
    e = adj.edges
    n = len(unit_xy)
    w = np.hypot(*(unit_xy[e[:, 0]] - unit_xy[e[:, 1]]).T)
    graph = coo_matrix((w, (e[:, 0], e[:, 1])), shape=(n, n)).tocsr()
    holder = shapely.STRtree(units.geometry.to_numpy()).query(
        shapely.points(site_xy), predicate="within")
    site_unit = np.empty(len(site_xy), int)
    site_unit[holder[0]] = holder[1]
    leg = np.hypot(*(site_xy - unit_xy[site_unit]).T)
    return dijkstra(graph, directed=False, indices=site_unit).T + leg[None, :]


def knn_distances(unit_xy, site_xy, barriers, crossings, polygons, k=8):
    """The polygon-vertex Delaunay graph plus edges to the k nearest nodes (kept only when
    they cross no barrier away from a crossing, as the Delaunay edges)."""
    points, edges, unit_node, site_node = barrier_graph(unit_xy, site_xy, barriers,
                                                        crossings, polygons)
    _, idx = cKDTree(points).query(points, k=k + 1)
    extra = np.sort(np.column_stack([np.repeat(np.arange(len(points)), k),
                                     idx[:, 1:].ravel()]), axis=1)
    lines = shapely.union_all(barriers)
    blocked = shapely.difference(lines, shapely.buffer(shapely.union_all(crossings), TOLERANCE))
    segs = shapely.linestrings(np.stack([points[extra[:, 0]], points[extra[:, 1]]], 1))
    extra = extra[~shapely.intersects(blocked, segs)]
    edges = np.unique(np.vstack([edges, extra]), axis=0)
    w = np.hypot(*(points[edges[:, 0]] - points[edges[:, 1]]).T)
    m = len(points)
    graph = coo_matrix((w, (edges[:, 0], edges[:, 1])), shape=(m, m)).tocsr()
    return dijkstra(graph, directed=False, indices=site_node)[:, unit_node].T


def main(folder: Path) -> None:
    gpkg = folder / "town.gpkg"
    units = gpd.read_file(gpkg, layer="units")
    sites = gpd.read_file(gpkg, layer="sites")
    barriers = gpd.read_file(gpkg, layer="barriers")
    bridges = gpd.read_file(gpkg, layer="bridges")
    streets = gpd.read_file(gpkg, layer="streets")
    unit_xy = shapely.get_coordinates(shapely.centroid(units.geometry.to_numpy()))
    site_xy = shapely.get_coordinates(sites.geometry.to_numpy())
    lines, crossings = barriers.geometry.to_numpy(), bridges.geometry.to_numpy()
    polygons = units.geometry.to_numpy()

    t = time.perf_counter()
    ref = street_distances(streets, unit_xy, site_xy, shapely.union_all(lines))
    t_ref = time.perf_counter() - t
    straight = np.hypot(unit_xy[:, None, 0] - site_xy[None, :, 0],
                        unit_xy[:, None, 1] - site_xy[None, :, 1])
    candidates = {
        "straight line": lambda: straight,
        "rook adjacency (unit points)": lambda: rook_distances(
            units, site_xy, barriers, bridges, unit_xy),
        "Delaunay: units, sites, crossings": lambda: barrier_distances(
            unit_xy, site_xy, lines, crossings),
        "Delaunay + polygon vertices": lambda: barrier_distances(
            unit_xy, site_xy, lines, crossings, polygons),
        "Delaunay + polygon vertices + 8-nearest": lambda: knn_distances(
            unit_xy, site_xy, lines, crossings, polygons),
    }
    level = sites["level"].to_numpy()
    print(f"demo town: {len(units)} units x {len(sites)} sites; street reference "
          f"{t_ref:.2f} s; {len(bridges)} crossings")
    head = (f"{'measure':42s} {'build s':>8s} {'/street med':>11s} {'p90':>6s} {'p10':>6s} "
            f"{'p90/p10':>7s} {'/straight med':>13s} {'p90':>6s} {'same nearest':>12s} {'inf':>4s}")
    print(head)
    print("-" * len(head))
    for name, run in candidates.items():
        t = time.perf_counter()
        d = run()
        build = time.perf_counter() - t
        ok = np.isfinite(d) & np.isfinite(ref) & (ref > 0) & (straight > 0)
        r_street = d[ok] / ref[ok]
        r_line = d[ok] / straight[ok]
        agree = []
        for lv in np.unique(level):
            cols = np.flatnonzero(level == lv)
            agree.append(np.argmin(d[:, cols], 1) == np.argmin(ref[:, cols], 1))
        print(f"{name:42s} {build:8.2f} {np.median(r_street):11.3f} "
              f"{np.percentile(r_street, 90):6.3f} {np.percentile(r_street, 10):6.3f} "
              f"{np.percentile(r_street, 90) / np.percentile(r_street, 10):7.3f} "
              f"{np.median(r_line):13.3f} {np.percentile(r_line, 90):6.3f} "
              f"{np.mean(np.concatenate(agree)):12.1%} {int((~np.isfinite(d)).sum()):4d}")
    r = ref[np.isfinite(ref)] / straight[np.isfinite(ref)]
    print(f"{'(streets themselves)':42s} {t_ref:8.2f} {1:11.3f} {1:6.3f} {1:6.3f} {1:7.3f} "
          f"{np.median(r):13.3f} {np.percentile(r, 90):6.3f} {1:12.1%}")


def scale(folder: Path, n: int = 20_000, m: int = 50, seed: int = 0) -> None:
    """Time barrier_distances for n random points and m sites over the town's barriers."""
    gpkg = folder / "town.gpkg"
    units = gpd.read_file(gpkg, layer="units")
    lines = gpd.read_file(gpkg, layer="barriers").geometry.to_numpy()
    crossings = gpd.read_file(gpkg, layer="bridges").geometry.to_numpy()
    x0, y0, x1, y1 = units.total_bounds
    rng = np.random.default_rng(seed)
    xy = rng.uniform([x0, y0], [x1, y1], (3 * n, 2))
    xy = xy[shapely.contains_xy(shapely.union_all(units.geometry.to_numpy()), *xy.T)][:n + m]
    t = time.perf_counter()
    d = barrier_distances(xy[:n], xy[n:], lines, crossings)
    print(f"barrier-aware travel, {n:,} random points x {m} sites over the demo's barriers: "
          f"{time.perf_counter() - t:.2f} s ({int(np.isinf(d).sum())} pairs unreachable)")


if __name__ == "__main__":
    folder = Path(sys.argv[1]) if len(sys.argv) > 1 else Path("data/demo")
    main(folder)
    scale(folder)
