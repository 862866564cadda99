"""Barrier-aware travel: hand-worked walls and gaps, the triangle inequality, the stretch
without barriers, and shortest paths checked with networkx on the same graph."""

from __future__ import annotations

import networkx as nx
import numpy as np
import pytest
import shapely

from districting.travel.barriers import ON_LINE, TOLERANCE, barrier_distances, barrier_graph

WALL = np.array([shapely.LineString([(0, -1000), (0, 1000)])])
NO_GEOMETRY = np.array([], dtype=object)
#: Proven bound on the Delaunay triangulation's path stretch (G. Xia, SIAM J. Computing
#: 42(4), 2013; cited from memory).
DELAUNAY_STRETCH = 1.998


def jittered(rng, n_side, half, jitter=0.3):
    """Points on an n_side x n_side grid over [-half, half]^2, moved by up to ``jitter``
    of a cell (no four on a circle, so the triangulation is unique)."""
    step = 2 * half / n_side
    g = (np.arange(n_side) + 0.5) * step - half
    xy = np.stack(np.meshgrid(g, g), -1).reshape(-1, 2)
    return xy + rng.uniform(-jitter, jitter, xy.shape) * step


def test_a_wall_with_one_gap_hand_worked():
    """Three points: the direct edge A-B meets the wall at (0, 0), 30 m from the crossing
    C = (0, 30), so it is removed; A-C and C-B meet the wall at C itself and stay. The path
    is A-C-B: 2 * sqrt(20^2 + 30^2) m, exact up to floating point."""
    d = barrier_distances(np.array([[-20.0, 0.0]]), np.array([[20.0, 0.0]]), WALL,
                          np.array([shapely.Point(0, 30)]))
    assert d[0, 0] == pytest.approx(2 * np.hypot(20, 30), rel=1e-12)


def test_dense_points_pass_through_the_gap():
    """Many points; the shortest path from (-45, -5) to (45, -5) must cross the wall
    within TOLERANCE of the crossing at (0, 30). Lower bound: the straight legs to the
    nearest allowed place, (0, 30 - TOLERANCE). Upper bound: the legs through the crossing
    itself times 1.15 (a jittered 5 m grid; measured 0.93 of it, as the path may cross a
    little below the crossing; the proven bound on the triangulation's stretch is 1.998)."""
    units = jittered(np.random.default_rng(3), 40, 100.0)
    units = units[np.abs(units[:, 0]) > 0.5]  # no unit point on the wall itself
    a, b = np.array([-45.0, -5.0]), np.array([45.0, -5.0])
    d = barrier_distances(np.vstack([units, a]), b[None], WALL,
                          np.array([shapely.Point(0, 30)]))[-1, 0]
    low = 2 * np.hypot(45, 35 - TOLERANCE)
    through = 2 * np.hypot(45, 35)
    assert low - 1e-9 <= d <= 1.15 * through, (low, d, through)


def test_a_bridge_drawn_as_a_line_opens_the_wall():
    units = np.array([[-20.0, 0.0], [-20.0, 200.0]])
    bridge = np.array([shapely.LineString([(-5, 30), (5, 30)])])
    d = barrier_distances(units, np.array([[20.0, 0.0]]), WALL, bridge)
    assert np.isfinite(d).all()
    assert d[0, 0] >= 2 * np.hypot(20, 30 - TOLERANCE) - 1e-9


def test_a_wall_without_a_crossing_leaves_the_far_side_unreachable():
    units = jittered(np.random.default_rng(4), 20, 100.0)
    units = units[np.abs(units[:, 0]) > 0.5]
    sites = np.array([[30.0, 10.0]])
    d = barrier_distances(units, sites, WALL, NO_GEOMETRY)[:, 0]
    near = units[:, 0] > 0
    assert np.isfinite(d[near]).all()
    assert np.isinf(d[~near]).all()
    # a polygon barrier (a lake) works by its outline: a site inside is unreachable
    lake = np.array([shapely.Point(0, 0).buffer(40.0)])
    d = barrier_distances(units, np.array([[0.0, 0.0]]), lake, NO_GEOMETRY)[:, 0]
    inside = np.hypot(*units.T) < 40.0
    assert np.isfinite(d[inside]).all() and np.isinf(d[~inside]).all()


def test_a_site_on_a_unit_point_is_one_node():
    """Equal coordinates are one node (the triangulation keeps only one of equal points)."""
    units = np.array([[0.0, 0.0], [100.0, 0.0], [50.0, 80.0], [50.0, -80.0]])
    d = barrier_distances(units, units[:2], NO_GEOMETRY, NO_GEOMETRY)
    np.testing.assert_allclose(d, np.hypot(*(units[:, None] - units[None, :2]).transpose(2, 0, 1)))


def test_polygon_vertices_on_a_barrier_are_not_nodes():
    """Units drawn up to a wall have corners on it; those corners would be nodes without
    edges that displace the edges along the wall, so only the crossing stays on the line."""
    g = np.arange(-50.0, 50.0, 10.0)
    x, y = (a.ravel() for a in np.meshgrid(g, g))
    squares = shapely.box(x, y, x + 10, y + 10)
    units = shapely.get_coordinates(shapely.centroid(squares))
    points, edges, unit_node, _ = barrier_graph(
        units, np.array([[25.0, 5.0]]), WALL, np.array([shapely.Point(0, 30)]), squares)
    on_wall = np.abs(points[:, 0]) < ON_LINE
    assert points[on_wall].tolist() == [[0.0, 30.0]]
    assert len(points) > len(units) + 1  # the other corners are nodes
    d = barrier_distances(units, np.array([[25.0, 5.0]]), WALL,
                          np.array([shapely.Point(0, 30)]), squares)
    assert np.isfinite(d).all()


def test_a_site_on_the_wall_is_reached_from_both_sides():
    units = np.array([[-20.0, 0.0], [20.0, 0.0], [-20.0, 40.0], [20.0, 40.0]])
    d = barrier_distances(units, np.array([[0.0, 20.0]]), WALL, NO_GEOMETRY)[:, 0]
    np.testing.assert_allclose(d, np.hypot(20.0, 20.0))


def random_case(rng, n=400, m=8):
    units = rng.uniform(0, 1000, (n, 2))
    sites = rng.uniform(0, 1000, (m, 2))
    ends = rng.uniform(-200, 1200, (4, 2, 2))
    walls = shapely.linestrings(ends)
    where = rng.uniform(0.2, 0.8, 4)
    crossings = shapely.line_interpolate_point(walls, where, normalized=True)
    polygons = shapely.buffer(shapely.points(units), 3.0, quad_segs=2)
    return units, sites, walls, crossings, polygons


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_never_shorter_than_the_straight_line(seed):
    """The triangle inequality: a path is never shorter than the segment it joins."""
    units, sites, walls, crossings, polygons = random_case(np.random.default_rng(seed))
    straight = np.hypot(*(units[:, None] - sites[None]).transpose(2, 0, 1))
    for poly in (None, polygons):
        d = barrier_distances(units, sites, walls, crossings, poly)
        assert (d >= straight - 1e-9).all()
        assert np.isfinite(d).mean() > 0.5  # the walls do not cut everything off


def test_without_barriers_close_to_the_straight_line():
    """Uniform random points: every pair within the proven stretch bound, and measured
    here (seed 5) the median stretch is 1.06 and the largest 1.32."""
    rng = np.random.default_rng(5)
    units, sites = rng.uniform(0, 1000, (600, 2)), rng.uniform(0, 1000, (10, 2))
    d = barrier_distances(units, sites, NO_GEOMETRY, NO_GEOMETRY)
    ratio = d / np.hypot(*(units[:, None] - sites[None]).transpose(2, 0, 1))
    assert (ratio >= 1 - 1e-12).all() and (ratio < DELAUNAY_STRETCH).all()
    assert np.median(ratio) < 1.08 and ratio.max() < 1.5, (np.median(ratio), ratio.max())


@pytest.mark.parametrize("seed", [0, 1])
def test_shortest_paths_equal_networkx_on_the_same_graph(seed):
    units, sites, walls, crossings, polygons = random_case(np.random.default_rng(seed), 150, 4)
    points, edges, unit_node, site_node = barrier_graph(units, sites, walls, crossings,
                                                        polygons)
    graph = nx.Graph()
    graph.add_nodes_from(range(len(points)))
    length = np.hypot(*(points[edges[:, 0]] - points[edges[:, 1]]).T)
    graph.add_weighted_edges_from(zip(edges[:, 0], edges[:, 1], length, strict=True))
    d = barrier_distances(units, sites, walls, crossings, polygons)
    for s, node in enumerate(site_node):
        reach = nx.single_source_dijkstra_path_length(graph, int(node))
        want = np.array([reach.get(int(u), np.inf) for u in unit_node])
        np.testing.assert_allclose(d[:, s], want, rtol=1e-12)
    # and the graph has no edge crossing a wall away from a crossing (shapely, edge by edge)
    blocked = shapely.difference(shapely.union_all(walls),
                                 shapely.buffer(shapely.union_all(crossings), TOLERANCE))
    for i, j in edges:
        assert not shapely.LineString([points[i], points[j]]).intersects(blocked)
