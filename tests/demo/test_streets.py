"""The demo town's streets, read straight from the GeoPackage (not through a project loader).

Independent checks: the network is rebuilt here as a networkx graph (a junction is a shared
vertex) and tested with ``networkx.is_connected``; crossings of the barrier lines and the
walk from each unit to a street are measured with plain shapely calls on the layers.
"""

from __future__ import annotations

import hashlib

import geopandas as gpd
import networkx as nx
import numpy as np
import pandas as pd
import pytest
import shapely

from districting import demo
from districting.demo.groups import GROUPS

#: Fingerprints of the committed layers taken before the streets were added (commit
#: 9fa941b on main): the streets draw from a random stream of their own, so the rest of
#: the town must stay exactly as it was.
BEFORE_STREETS = {
    "units": "b4cbf170f65c3c23",
    "sites": "6a269c24546b1386",
    "barriers": "119c95e7ae5e7eae",
    "bridges": "79a0b2d386031a59",
}
NEAR_BRIDGE = 5.0  # metres: a street may meet a barrier line only this close to a crossing
WALK_P95, WALK_MAX = 200.0, 400.0  # metres from a unit's centroid to a walkable street


def fingerprint(frame: gpd.GeoDataFrame) -> str:
    """Attributes as CSV plus the coordinates on the 1 cm grid, hashed. The invented group
    counts, added later from a random stream of their own (districting.demo.groups), are
    left out: everything that was there before must stay as it was."""
    h = hashlib.sha256()
    groups = [c for c in frame.columns if c.startswith(tuple(GROUPS))]
    h.update(frame.drop(columns=["geometry", *groups]).to_csv(index=False).encode())
    geoms = frame.geometry.to_numpy()
    h.update(np.round(shapely.get_coordinates(geoms) * 100).astype(np.int64).tobytes())
    h.update(shapely.get_num_coordinates(geoms).astype(np.int64).tobytes())
    return h.hexdigest()[:16]


def read_layers(path):
    return {layer: gpd.read_file(path, layer=layer) for layer in (*BEFORE_STREETS, "streets")}


@pytest.fixture(scope="module")
def committed():
    return read_layers(demo.demo_folder() / "town.gpkg")


@pytest.fixture(scope="module")
def small():
    """Another seed and size: the promises hold beyond the committed town."""
    town = demo.generate(seed=11, n_units=500)
    return {layer: getattr(town, layer) for layer in (*BEFORE_STREETS, "streets")}


@pytest.fixture(params=["committed", "small"])
def town(request):
    return request.getfixturevalue(request.param)


def street_graph(streets: gpd.GeoDataFrame) -> nx.Graph:
    """The plain vertex graph: consecutive vertices of a line are an edge, and a vertex
    shared by two lines (coordinates to the 1 cm grid) is one node."""
    xy, line = shapely.get_coordinates(streets.geometry.to_numpy(), return_index=True)
    key = [tuple(p) for p in np.round(xy * 100).astype(np.int64)]
    same = line[1:] == line[:-1]
    graph = nx.Graph()
    graph.add_nodes_from(key)
    graph.add_edges_from((key[k], key[k + 1]) for k in np.flatnonzero(same))
    return graph


def test_the_rest_of_the_town_is_unchanged_by_the_streets(committed):
    for layer, digest in BEFORE_STREETS.items():
        assert fingerprint(committed[layer]) == digest, f"{layer} changed"


def test_the_layer_has_its_columns(committed):
    streets = committed["streets"]
    assert list(streets.columns) == ["name", "kind", "walkable", "geometry"]
    assert set(streets.geom_type) == {"LineString"}
    assert set(streets["kind"]) == {"arterial", "collector", "local"}
    assert streets["walkable"].dtype == bool and (~streets["walkable"]).any()
    assert streets.crs == committed["units"].crs
    assert streets["name"].str.len().min() > 3


def test_streets_form_one_network_on_foot_and_on_wheels(town):
    streets = town["streets"]
    assert nx.is_connected(street_graph(streets))
    assert nx.is_connected(street_graph(streets[streets["walkable"]]))


def test_streets_join_only_at_shared_vertices(town):
    """Two lines that touch meet at a vertex of both (a junction), never mid-segment."""
    geoms = town["streets"].geometry.to_numpy()
    i, j = shapely.STRtree(geoms).query(geoms, predicate="intersects")
    i, j = i[i < j], j[i < j]
    meet = shapely.intersection(geoms[i], geoms[j])
    assert set(shapely.get_type_id(meet)) <= {0, 4}, "two streets overlap along a stretch"
    pts, k = shapely.get_parts(meet, return_index=True)
    vertices = shapely.multipoints(shapely.get_coordinates(geoms, return_index=True)[0],
                                   indices=shapely.get_coordinates(geoms, return_index=True)[1])
    for side in (i, j):
        off = shapely.distance(pts, vertices[side[k]])
        assert (off < 0.005).all(), f"{int((off >= 0.005).sum())} joins off a vertex"


def test_streets_cross_barriers_only_at_the_crossings(town):
    streets, barriers, bridges = town["streets"], town["barriers"], town["bridges"]
    lines = shapely.union_all(barriers.geometry.to_numpy())
    meet = shapely.intersection(streets.geometry.to_numpy(), lines)
    pts = shapely.get_parts(meet[~shapely.is_empty(meet)])
    assert set(shapely.get_type_id(pts)) == {0}, "a street runs along a barrier"
    crossing = bridges.geometry.to_numpy()
    gap = shapely.distance(pts[:, None], crossing[None]).min(axis=1)
    assert (gap <= NEAR_BRIDGE).all(), f"{int((gap > NEAR_BRIDGE).sum())} crossings off a bridge"
    # and a street passes over every crossing
    over = shapely.distance(crossing[:, None], pts[None]).min(axis=1)
    assert (over <= NEAR_BRIDGE).all(), list(bridges["name"][over > NEAR_BRIDGE])


def test_every_unit_is_a_short_walk_from_a_street(town):
    streets, units = town["streets"], town["units"]
    walk = shapely.union_all(streets.geometry[streets["walkable"]].to_numpy())
    dist = shapely.distance(shapely.centroid(units.geometry.to_numpy()), walk)
    assert np.percentile(dist, 95) < WALK_P95 and dist.max() < WALK_MAX, (
        np.percentile(dist, 95), dist.max())


def test_the_nearest_street_of_every_unit_and_site_is_on_its_side(town):
    """Travel joins a point to its nearest street: that leg must not cross a barrier."""
    streets = town["streets"]
    walk = streets.geometry[streets["walkable"]].to_numpy()
    lines = shapely.union_all(town["barriers"].geometry.to_numpy())
    for layer in ("units", "sites"):
        pts = shapely.centroid(town[layer].geometry.to_numpy())
        for geoms in (streets.geometry.to_numpy(), walk):
            near = geoms[shapely.STRtree(geoms).query_nearest(pts, all_matches=False)[1]]
            leg = shapely.shortest_line(pts, near)
            across = shapely.intersects(leg, lines)
            assert not across.any(), f"{layer}: {int(across.sum())} legs cross a barrier"


def test_same_seed_same_streets(small):
    again = demo.generate(seed=11, n_units=500).streets
    pd.testing.assert_frame_equal(pd.DataFrame(again.drop(columns="geometry")),
                                  pd.DataFrame(small["streets"].drop(columns="geometry")))
    assert shapely.equals_exact(again.geometry.to_numpy(),
                                small["streets"].geometry.to_numpy(), 0).all()
