"""Tests of districting.intake.adjacency.

Outside sources: libpysal example data (libpysal.examples, shipped with the package, BSD-3:
sids2 - North Carolina SIDS counties; stl - St Louis region counties; columbus - Columbus
OH neighbourhoods; 10740 - Albuquerque NM census tracts; see each folder's README.md in
libpysal/examples), and networkx / scipy as independent libraries for components.
"""

from __future__ import annotations

import geopandas as gpd
import networkx as nx
import numpy as np
import pandas as pd
import pytest
from libpysal import examples
from shapely.geometry import LineString, Point, box

from districting.intake.adjacency import Adjacency, read_links


def read_gal(path) -> set[tuple[str, str]]:
    """Undirected id pairs of a GAL file: header line, then `id count` and `count` ids."""
    with open(path) as fh:
        tokens = fh.read().split("\n", 1)[1].split()
    pairs, k = set(), 0
    while k < len(tokens):
        unit, count = tokens[k], int(tokens[k + 1])
        for other in tokens[k + 2:k + 2 + count]:
            pairs.add(tuple(sorted((unit, other))))
        k += 2 + count
    return pairs


def id_pairs(adj: Adjacency) -> set[tuple[str, str]]:
    return {tuple(sorted((adj.ids[i], adj.ids[j]))) for i, j in adj.edges}


def example(shp: str) -> gpd.GeoDataFrame:
    return gpd.read_file(examples.get_path(shp))


# (shapefile, gal file, id column or None for 1-based row order, contiguity, edge count)
GAL_CASES = [
    ("sids2.shp", "sids2.gal", "FIPSNO", "rook", 231),
    ("stl_hom.shp", "stl.gal", None, "rook", 199),
    ("columbus.shp", "columbus.gal", None, "queen", 118),
]


@pytest.mark.parametrize("shp, gal, id_col, contiguity, count", GAL_CASES)
@pytest.mark.parametrize("tolerance", [0.0, None])
def test_matches_libpysal_gal_files(shp, gal, id_col, contiguity, count, tolerance):
    # Source: libpysal example data; the .gal files ship beside the shapefiles.
    df = example(shp)
    ids = (df[id_col].astype(int).astype(str) if id_col
           else [str(k + 1) for k in range(len(df))])
    adj = Adjacency.from_polygons(df.geometry, ids, contiguity=contiguity, tolerance=tolerance)
    expected = read_gal(examples.get_path(gal))
    assert len(expected) == count
    assert id_pairs(adj) == expected
    assert adj.n_edges == count


@pytest.mark.parametrize("shp, contiguity", [("sids2.shp", "rook"), ("stl_hom.shp", "rook"),
                                              ("columbus.shp", "queen"), ("10740.shp", "rook"),
                                              ("10740.shp", "queen")])
def test_components_agree_with_networkx(shp, contiguity):
    # Source: libpysal example data; networkx as an independent library.
    df = example(shp)
    adj = Adjacency.from_polygons(df.geometry, [f"u{k}" for k in range(len(df))],
                                  contiguity=contiguity)
    g = adj.to_networkx()
    assert g.number_of_nodes() == adj.n and g.number_of_edges() == adj.n_edges
    labels = adj.components()
    comps = list(nx.connected_components(g))
    assert adj.n_components == len(comps)
    for comp in comps:
        assert len({labels[k] for k in comp}) == 1
    assert len(set(labels.tolist())) == len(comps)
    assert sorted(adj.islands().tolist()) == sorted(k for k in g if g.degree(k) == 0)


def test_10740_has_one_island():
    # Source: libpysal example data (10740: one tract touches no other tract).
    df = example("10740.shp")
    adj = Adjacency.from_polygons(df.geometry, [str(k + 1) for k in range(len(df))])
    expected = read_gal(examples.get_path("10740_rook.gal"))
    assert id_pairs(adj) == expected
    assert len(adj.islands()) == 1
    island = int(adj.islands()[0])
    assert adj.degree[island] == 0 and len(adj.neighbors(island)) == 0
    assert adj.n_components == 2
    others = np.ones(adj.n, bool)
    others[island] = False
    sub = adj.subgraph_components(others)
    assert sub[island] == -1 and set(sub[others].tolist()) == {0}


# ---------------------------------------------------------------- hand-made polygons
def grid(cols: int, rows: int, size: float = 100.0):
    """Unit squares, row-major from the bottom left; ids g<col><row>."""
    geoms, ids = [], []
    for r in range(rows):
        for c in range(cols):
            geoms.append(box(c * size, r * size, (c + 1) * size, (r + 1) * size))
            ids.append(f"g{c}{r}")
    return gpd.GeoSeries(geoms, crs=3857), ids


def pair(adj: Adjacency, a: str, b: str) -> bool:
    i, j = sorted((adj.index(a), adj.index(b)))
    return bool(((adj.edges[:, 0] == i) & (adj.edges[:, 1] == j)).any())


def test_rook_and_queen_on_grid():
    geoms, ids = grid(3, 2)
    rook = Adjacency.from_polygons(geoms, ids)
    queen = Adjacency.from_polygons(geoms, ids, contiguity="queen")
    assert rook.n_edges == 7  # 2 rows x 2 + 3 columns x 1
    assert queen.n_edges == 7 + 4  # plus two diagonals per inner corner
    assert not pair(rook, "g00", "g11") and pair(queen, "g00", "g11")
    e = rook.edges
    assert e.dtype == np.int64 and (e[:, 0] < e[:, 1]).all()
    assert np.array_equal(e, np.unique(e, axis=0))
    assert rook.neighbors(rook.index("g10")).tolist() == sorted(
        rook.index(u) for u in ("g00", "g20", "g11"))
    assert rook.degree.tolist() == [2, 3, 2, 2, 3, 2]


def test_barrier_cuts_and_bridge_keeps():
    geoms, ids = grid(3, 2)
    river = LineString([(100, -10), (100, 210)])  # along the g0*/g1* borders
    cut = Adjacency.from_polygons(geoms, ids, barriers=[river])
    assert not pair(cut, "g00", "g10") and not pair(cut, "g01", "g11")
    assert pair(cut, "g10", "g20") and pair(cut, "g00", "g01")
    assert {tuple(sorted((cut.ids[i], cut.ids[j]))) for i, j in cut.cut_edges} == {
        ("g00", "g10"), ("g01", "g11")}
    assert cut.n_edges == 5

    bridged = Adjacency.from_polygons(geoms, ids, barriers=[river], bridges=[Point(100, 50)])
    assert pair(bridged, "g00", "g10") and not pair(bridged, "g01", "g11")
    assert len(bridged.bridged_edges) == 1 and len(bridged.cut_edges) == 1
    # a bridge drawn as a short line across the river works the same way
    span = LineString([(95, 150), (105, 150)])
    kept = Adjacency.from_polygons(geoms, ids, barriers=gpd.GeoSeries([river]), bridges=[span])
    assert pair(kept, "g01", "g11") and not pair(kept, "g00", "g10")


def test_barrier_rule_half_border_and_crossing():
    geoms, ids = grid(2, 1)  # g00 | g10, border x=100, 0..100
    short = LineString([(100, 0), (100, 40)])  # 40 % of the border
    long = LineString([(100, 0), (100, 60)])  # 60 % of the border
    assert pair(Adjacency.from_polygons(geoms, ids, barriers=[short]), "g00", "g10")
    assert not pair(Adjacency.from_polygons(geoms, ids, barriers=[long]), "g00", "g10")
    crossing = LineString([(0, 50), (200, 50)])  # runs across the border, through both
    assert pair(Adjacency.from_polygons(geoms, ids, barriers=[crossing]), "g00", "g10")
    # a barrier that misses the border by more than barrier_tolerance does not cut ...
    near = LineString([(102, 0), (102, 100)])
    assert pair(Adjacency.from_polygons(geoms, ids, barriers=[near], tolerance=0.01),
                "g00", "g10")
    # ... but does with a looser barrier_tolerance (a line digitised beside the border)
    assert not pair(Adjacency.from_polygons(geoms, ids, barriers=[near], tolerance=0.01,
                                            barrier_tolerance=3.0), "g00", "g10")


def test_queen_corner_cut_by_barrier_through_corner():
    geoms, ids = grid(2, 2)
    diagonal = LineString([(0, 200), (200, 0)])  # through the centre corner (100, 100)
    queen = Adjacency.from_polygons(geoms, ids, contiguity="queen", barriers=[diagonal])
    # both corner contacts lie on the line: cut
    assert not pair(queen, "g00", "g11") and not pair(queen, "g10", "g01")
    # the shared edges only meet the line at an end point: kept
    assert all(pair(queen, a, b) for a, b in
               [("g00", "g10"), ("g00", "g01"), ("g10", "g11"), ("g01", "g11")])
    away = LineString([(0, 150), (50, 200)])  # crosses g01 only, far from any border
    assert Adjacency.from_polygons(geoms, ids, contiguity="queen", barriers=[away]).n_edges == 6


def test_gap_repair_and_t_junction():
    # two squares 0.01 apart: joined with a tolerance above the gap, not with 0
    geoms = gpd.GeoSeries([box(0, 0, 100, 100), box(100.01, 0, 200, 100)])
    assert Adjacency.from_polygons(geoms, ["a", "b"], tolerance=0).n_edges == 0
    assert Adjacency.from_polygons(geoms, ["a", "b"], tolerance=0.05).n_edges == 1
    # a long unit above two short ones: shared edges without shared vertex pairs
    t = gpd.GeoSeries([box(0, 0, 200, 100), box(0, -100, 100, 0), box(100, -100, 200, 0)])
    exact = Adjacency.from_polygons(t, ["top", "left", "right"], tolerance=0)
    fuzzy = Adjacency.from_polygons(t, ["top", "left", "right"])
    assert not pair(exact, "top", "left")  # libpysal's vertex rule misses the T-junction
    assert pair(fuzzy, "top", "left") and pair(fuzzy, "top", "right")
    assert pair(fuzzy, "left", "right") and fuzzy.n_edges == 3
    # a corner contact is not a rook neighbour even with gap repair
    corner = gpd.GeoSeries([box(0, 0, 100, 100), box(100, 100, 200, 200)])
    assert Adjacency.from_polygons(corner, ["a", "b"], tolerance=0.5).n_edges == 0
    assert Adjacency.from_polygons(corner, ["a", "b"], contiguity="queen").n_edges == 1


def test_links_add_and_remove(tmp_path):
    geoms, ids = grid(3, 1)
    links = pd.DataFrame({"unit_a": ["g00", "g10"], "unit_b": ["g20", "g20"],
                          "action": ["add", "Remove"]})
    adj = Adjacency.from_polygons(geoms, ids, links=links)
    assert pair(adj, "g00", "g20") and not pair(adj, "g10", "g20") and pair(adj, "g00", "g10")
    # a link re-adds a pair a barrier cut, and it leaves the cut list
    river = LineString([(100, 0), (100, 100)])
    readd = pd.DataFrame({"unit_a": ["g10"], "unit_b": ["g00"], "action": ["add"]})
    adj2 = Adjacency.from_polygons(geoms, ids, barriers=[river], links=readd)
    assert pair(adj2, "g00", "g10") and len(adj2.cut_edges) == 0
    # from a CSV file
    path = tmp_path / "links.csv"
    path.write_text("unit_a,unit_b,action\ng00,g20,add\ng99,g00,add\n")
    with pytest.raises(ValueError, match=r"links.csv row 2 .*'g99'"):
        Adjacency.from_polygons(geoms, ids, links=read_links(path))
    bad = pd.DataFrame({"unit_a": ["g00"], "unit_b": ["g10"], "action": ["join"]})
    with pytest.raises(ValueError, match="row 1.*add' or 'remove"):
        Adjacency.from_polygons(geoms, ids, links=bad)
    with pytest.raises(ValueError, match="lacks column"):
        path.write_text("a,b\n1,2\n")
        read_links(path)


def test_from_edges_and_immutability():
    adj = Adjacency.from_edges(["a", "b", "c", "d"], [(1, 0), (0, 1), (2, 1)])
    assert adj.edges.tolist() == [[0, 1], [1, 2]]
    assert adj.n == 4 and adj.ids == ("a", "b", "c", "d")
    assert adj.components().tolist() == [0, 0, 0, 1] and adj.n_components == 2
    assert adj.islands().tolist() == [3]
    same = Adjacency.from_edges(["a", "b", "c", "d"], [("b", "c"), ("a", "b")])
    assert np.array_equal(same.edges, adj.edges)
    with pytest.raises(ValueError):
        adj.edges[0, 0] = 3
    with pytest.raises(AttributeError):
        adj.ids = ("x",)
    csr = adj.to_csr()
    assert (csr != csr.T).nnz == 0 and csr.sum() == 4
    with pytest.raises(ValueError, match="indices 0..3"):
        Adjacency.from_edges(["a", "b", "c", "d"], [(0, 4)])
    with pytest.raises(ValueError, match="unknown unit"):
        Adjacency.from_edges(["a", "b"], [("a", "z")])
    with pytest.raises(ValueError, match="more than once"):
        Adjacency.from_edges(["a", "a"], [])


def test_subgraph_components_agree_with_networkx():
    # networkx as an independent library, on random masks of the sids2 counties
    df = example("sids2.shp")
    adj = Adjacency.from_polygons(df.geometry, [str(k) for k in range(len(df))])
    g = adj.to_networkx()
    rng = np.random.default_rng(7)
    for _ in range(20):
        mask = rng.random(adj.n) < 0.5
        labels = adj.subgraph_components(mask)
        assert (labels[~mask] == -1).all()
        comps = list(nx.connected_components(g.subgraph(np.flatnonzero(mask).tolist())))
        assert len(set(labels[mask].tolist())) == len(comps)
        for comp in comps:
            assert len({labels[k] for k in comp}) == 1


def test_bad_polygons_are_named():
    with pytest.raises(ValueError, match="u2 have no geometry"):
        Adjacency.from_polygons([box(0, 0, 1, 1), None], ["u1", "u2"])
    with pytest.raises(ValueError, match="u1 are not polygons"):
        Adjacency.from_polygons([Point(0, 0), box(0, 0, 1, 1)], ["u1", "u2"])
    with pytest.raises(ValueError, match="rook' or 'queen"):
        Adjacency.from_polygons([box(0, 0, 1, 1)], ["u1"], contiguity="bishop")
    with pytest.raises(ValueError, match="1 unit ids but 2"):
        Adjacency.from_polygons([box(0, 0, 1, 1), box(1, 0, 2, 1)], ["u1"])
