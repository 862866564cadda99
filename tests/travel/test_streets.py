"""Travel along streets against outside references: networkx's Dijkstra, hand-worked grids,
the triangle inequality, and cases drawn by hand (same segment, split lines, a river)."""

from __future__ import annotations

import networkx as nx
import numpy as np
import pytest
import shapely
from hypothesis import given, settings
from hypothesis import strategies as st

from districting.travel import StreetNetwork, street_travel
from districting.travel.measures import straight_line, travel_matrix


def random_streets(seed: int, k: int = 6, jitter: float = 30.0) -> list:
    """A k x k perturbed grid of streets, each block side its own line, some removed."""
    rng = np.random.default_rng(seed)
    xy = np.stack(np.meshgrid(np.arange(k) * 100.0, np.arange(k) * 100.0), -1)
    xy = xy + rng.uniform(-jitter, jitter, xy.shape)
    lines = []
    for i in range(k):
        for j in range(k):
            for di, dj in ((1, 0), (0, 1)):
                if i + di < k and j + dj < k and rng.random() > 0.15:
                    mid = (xy[i, j] + xy[i + di, j + dj]) / 2 + rng.uniform(-10, 10, 2)
                    lines.append(shapely.LineString([xy[i, j], mid, xy[i + di, j + dj]]))
    return lines


def networkx_travel(lines, unit_xy, site_xy) -> np.ndarray:
    """The same measure built independently: networkx graph of the vertices, each point
    joined by its access leg to the nearest point of the nearest line (found by
    shapely's distance over all lines), which splits that line there."""
    g = nx.Graph()
    key = lambda p: (round(p[0], 2), round(p[1], 2))  # noqa: E731 (1 cm nodes)
    for line in lines:
        c = np.asarray(line.coords)
        for p, q in zip(c[:-1], c[1:], strict=True):
            w = float(np.hypot(*(np.array(key(q)) - np.array(key(p)))))
            if g.has_edge(key(p), key(q)):
                w = min(w, g.edges[key(p), key(q)]["weight"])
            g.add_edge(key(p), key(q), weight=w)
    points = [("u", i, p) for i, p in enumerate(unit_xy)] + [("s", j, p)
                                                             for j, p in enumerate(site_xy)]
    segs = [(u, v) for u, v in g.edges]
    seg_geoms = [shapely.LineString([u, v]) for u, v in segs]
    access, joins = {}, {}
    for kind, i, p in points:
        pt = shapely.Point(p)
        d = [s.distance(pt) for s in seg_geoms]
        s = int(np.argmin(d))
        u, v = segs[s]
        t = seg_geoms[s].project(pt)
        joins.setdefault((u, v), []).append((t, (kind, i)))
        access[(kind, i)] = d[s]
    for (u, v), pts in joins.items():
        w = g.edges[u, v]["weight"]
        g.remove_edge(u, v)
        chain = [(0.0, u)] + sorted(pts) + [(w, v)]
        for (t0, a), (t1, b) in zip(chain[:-1], chain[1:], strict=True):
            g.add_edge(a, b, weight=max(t1 - t0, 0.0))
    out = np.full((len(unit_xy), len(site_xy)), np.inf)
    for j in range(len(site_xy)):
        dist = nx.single_source_dijkstra_path_length(g, ("s", j))
        for i in range(len(unit_xy)):
            if ("u", i) in dist:
                out[i, j] = dist[("u", i)] + access[("u", i)] + access[("s", j)]
    return out


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_equals_networkx_on_random_streets(seed):
    """Outside reference: networkx single-source Dijkstra on the same streets and points."""
    lines = random_streets(seed)
    rng = np.random.default_rng(100 + seed)
    unit_xy = rng.uniform(-50, 550, (40, 2))
    site_xy = rng.uniform(-50, 550, (5, 2))
    got = street_travel(StreetNetwork.from_lines(lines), unit_xy, site_xy).metres
    want = networkx_travel(lines, unit_xy, site_xy)
    assert np.array_equal(np.isinf(got), np.isinf(want))
    assert np.allclose(got[np.isfinite(got)], want[np.isfinite(want)], atol=1e-6)


def grid_lines(k: int, step: float) -> list:
    """k horizontal and k vertical streets, each one line, cut into blocks by vertices."""
    ticks = np.arange(k) * step
    rows = [shapely.LineString([(x, y) for x in ticks]) for y in ticks]
    cols = [shapely.LineString([(x, y) for y in ticks]) for x in ticks]
    return rows + cols


def test_grid_is_manhattan_plus_access_legs():
    """Hand-worked: on a full street grid, travel between points beside the streets is the
    Manhattan distance between their joining points plus both access legs."""
    net = StreetNetwork.from_lines(grid_lines(5, 100.0))
    unit_xy = np.array([[30.0, 4.0], [100.0, 250.0], [395.0, 310.0], [212.0, 190.0]])
    site_xy = np.array([[0.0, 0.0], [300.0, 107.0], [250.0, 400.0]])
    # joining points, worked by hand: the nearest street of each point
    unit_join = np.array([[30.0, 0.0], [100.0, 250.0], [400.0, 310.0], [212.0, 200.0]])
    unit_leg = np.array([4.0, 0.0, 5.0, 10.0])
    site_join = np.array([[0.0, 0.0], [300.0, 107.0], [250.0, 400.0]])
    r = street_travel(net, unit_xy, site_xy)
    assert np.allclose(r.unit_access, unit_leg) and np.allclose(r.site_access, 0.0)
    manhattan = np.abs(unit_join[:, None, :] - site_join[None, :, :]).sum(-1)
    # (212, 200) to (250, 400): back along y=200 to x=200, up to y=400, along to x=250
    manhattan[3, 2] = 12 + 200 + 50
    # (30, 0) to (250, 400) and (100, 250) to (300, 107): any monotone staircase
    assert np.allclose(r.metres, manhattan + unit_leg[:, None])


def test_unit_and_site_on_one_segment():
    """Hand-worked: a unit and a site beside one long street segment travel along it only."""
    net = StreetNetwork.from_lines([shapely.LineString([(0, 0), (1000, 0)]),
                                    shapely.LineString([(1000, 0), (1000, 800)])])
    r = street_travel(net, np.array([[200.0, 30.0], [900.0, -20.0]]),
                      np.array([[600.0, -10.0]]))
    assert np.allclose(r.metres[:, 0], [400 + 30 + 10, 300 + 20 + 10])


def test_split_street_changes_nothing():
    """Splitting a line at one of its vertices (one line into two) changes no distance."""
    lines = random_streets(7)
    rng = np.random.default_rng(7)
    unit_xy, site_xy = rng.uniform(0, 500, (30, 2)), rng.uniform(0, 500, (4, 2))
    whole = street_travel(StreetNetwork.from_lines(lines), unit_xy, site_xy).metres
    split = []
    for line in lines:
        c = list(line.coords)
        split += [shapely.LineString(c[:2]), shapely.LineString(c[1:])]
    parts = street_travel(StreetNetwork.from_lines(split), unit_xy, site_xy).metres
    assert np.allclose(whole, parts)


def test_crossing_without_shared_vertex_is_an_overpass():
    """Two streets crossing with no shared vertex do not connect (an overpass)."""
    net = StreetNetwork.from_lines([shapely.LineString([(0, 50), (100, 50)]),
                                    shapely.LineString([(50, 0), (50, 100)])])
    assert net.n_pieces == 2
    r = street_travel(net, np.array([[0.0, 50.0]]), np.array([[50.0, 0.0]]))
    assert np.isinf(r.metres[0, 0])


def test_river_without_bridge_makes_far_side_unreachable():
    """Streets on both sides of a river, a bridge across it: finite; without it: inf,
    and the far side's units are on another piece."""
    west = [shapely.LineString([(0, y), (400, y)]) for y in (0, 100, 200)]
    west += [shapely.LineString([(0, 0), (0, 100), (0, 200)])]
    east = [shapely.LineString([(600, y), (1000, y)]) for y in (0, 100, 200)]
    east += [shapely.LineString([(1000, 0), (1000, 100), (1000, 200)])]
    bridge = [shapely.LineString([(400, 100), (600, 100)])]
    unit_xy = np.array([[100.0, 10.0], [900.0, 190.0]])
    site_xy = np.array([[50.0, 100.0]])
    joined = street_travel(StreetNetwork.from_lines(west + east + bridge), unit_xy, site_xy)
    assert np.isfinite(joined.metres).all()
    cut = street_travel(StreetNetwork.from_lines(west + east), unit_xy, site_xy)
    assert np.isfinite(cut.metres[0, 0]) and np.isinf(cut.metres[1, 0])
    assert cut.unit_piece[1] != cut.site_piece[0] == cut.unit_piece[0]


@settings(max_examples=25, deadline=None)
@given(seed=st.integers(0, 10_000), n=st.integers(1, 30), m=st.integers(1, 5))
def test_streets_never_shorter_than_straight_line(seed, n, m):
    """The triangle inequality (a physical check): no path beats the straight line."""
    rng = np.random.default_rng(seed)
    lines = random_streets(seed, k=int(rng.integers(2, 6)))
    unit_xy, site_xy = rng.uniform(-100, 600, (n, 2)), rng.uniform(-100, 600, (m, 2))
    got = street_travel(StreetNetwork.from_lines(lines), unit_xy, site_xy).metres
    assert (got >= straight_line(unit_xy, site_xy) - 1e-6).all()


def test_measures_by_name():
    lines = grid_lines(3, 100.0)
    u, s = np.array([[10.0, 10.0]]), np.array([[200.0, 200.0]])
    assert travel_matrix("streets", u, s, streets=StreetNetwork.from_lines(lines))[0, 0] == (
        pytest.approx(10 + 190 + 200))
    assert travel_matrix("straight-line", u, s)[0, 0] == pytest.approx(190 * 2 ** 0.5)
    with pytest.raises(ValueError, match="street network"):
        travel_matrix("streets", u, s)
    with pytest.raises(ValueError, match="one of streets"):
        travel_matrix("walking", u, s)


def test_barrier_aware_goes_around_a_barrier():
    """With barriers, the barrier-aware measure is no shorter than the straight line and
    a barrier with no crossing leaves the far side unreachable."""
    pytest.importorskip("districting.travel.barriers")
    u, s = np.array([[0.0, 0.0]]), np.array([[100.0, 0.0]])
    wall = np.array([shapely.LineString([(50, -1000), (50, 1000)])], dtype=object)
    got = travel_matrix("barrier-aware", u, s, barriers=wall, crossings=np.array([]))
    assert np.isinf(got[0, 0])


def test_ring_road_without_junction_and_a_dead_end():
    """Hand-worked: a closed square ring (no junction on it) and a dead-end spur: the
    shorter way round, and the spur travelled out and back along itself."""
    ring = shapely.LineString([(0, 0), (100, 0), (100, 100), (0, 100), (0, 0)])
    apart = shapely.LineString([(300, 0), (400, 0), (400, 50)])  # a dead end, apart
    net = StreetNetwork.from_lines([ring, apart])
    r = street_travel(net, np.array([[10.0, -5.0], [390.0, 10.0]]),
                      np.array([[0.0, 90.0], [410.0, 40.0]]))
    assert r.metres[0, 0] == pytest.approx(5 + 10 + 90)
    assert r.metres[1, 1] == pytest.approx(10 + 10 + 40 + 10)
    assert np.isinf(r.metres[0, 1]) and np.isinf(r.metres[1, 0])


def test_points_are_refused_and_empty_lines_skipped():
    with pytest.raises(ValueError, match="feature 2 is a Point"):
        StreetNetwork.from_lines([shapely.LineString([(0, 0), (1, 1)]), shapely.Point(0, 0)])
    net = StreetNetwork.from_lines([shapely.LineString(), None,
                                    shapely.LineString([(0, 0), (3, 4)])])
    assert net.n_nodes == 2 and net.seg_length.tolist() == [5.0]
