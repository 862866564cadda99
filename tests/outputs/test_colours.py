"""Tests of districting.outputs.colours.

Outside sources: networkx as an independent library for the colouring checks.
"""

from __future__ import annotations

import networkx as nx
import numpy as np
import pytest
import shapely

from districting.outputs.colours import ZONE_PALETTE, color_zones, grey_value, zone_color


def test_colour_from_edges_is_proper_on_random_planar_graphs():
    # networkx as an independent library: Delaunay-like planar graphs from a triangulation
    rng = np.random.default_rng(3)
    for _ in range(5):
        pts = shapely.MultiPoint(rng.random((40, 2)) * 1000)
        tri = shapely.get_parts(shapely.delaunay_triangles(pts, only_edges=True))
        coords = [tuple(map(tuple, np.round(shapely.get_coordinates(e), 6))) for e in tri]
        edges = [(f"{a}", f"{b}") for a, b in coords]
        colors = color_zones(edges)
        g = nx.Graph(edges)
        assert set(colors) == set(g.nodes)
        assert all(colors[a] != colors[b] for a, b in g.edges)
    lone = color_zones([("a", "b")], nodes=["c"])
    assert set(lone) == {"a", "b", "c"} and lone["a"] != lone["b"]


def test_palette_is_distinct_in_grey():
    assert 8 <= len(ZONE_PALETTE) <= 10 and len(set(ZONE_PALETTE)) == len(ZONE_PALETTE)
    greys = sorted(grey_value(c) for c in ZONE_PALETTE)
    assert min(np.diff(greys)) >= 15  # of 255: tell-apart in print (our margin)
    assert grey_value("#FFFFFF") == pytest.approx(255) and grey_value("#000000") == 0
    # consecutive colours (most used together by DSATUR) differ strongly in grey
    steps = [abs(grey_value(a) - grey_value(b)) for a, b in zip(ZONE_PALETTE, ZONE_PALETTE[1:],
                                                                  strict=False)]
    assert min(steps) >= 35
    assert zone_color(len(ZONE_PALETTE)) == ZONE_PALETTE[0]
