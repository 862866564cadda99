"""Tests of districting.outputs.zones.

Outside sources: libpysal example data (libpysal.examples ``georgia``: Georgia counties in
UTM metres, shipped with the package, BSD-3; see its README.md in libpysal/examples),
networkx and shapely as independent libraries for the colouring checks.
"""

from __future__ import annotations

import itertools
from pathlib import Path

import geopandas as gpd
import numpy as np
import pytest
import shapely
from libpysal import examples
from scipy.sparse.csgraph import dijkstra
from shapely.geometry import box

from districting.intake.adjacency import Adjacency, default_tolerance
from districting.intake.checks import is_coverage
from districting.outputs.colours import ZONE_PALETTE, color_zones, zone_edges
from districting.outputs.zones import changed_areas, dissolve_zones


def grid(cols: int, rows: int, gap: float = 0.0, size: float = 100.0) -> gpd.GeoDataFrame:
    """Squares row-major from the bottom left, shrunk by ``gap / 2`` on every side."""
    h = gap / 2
    geoms = [box(c * size + h, r * size + h, (c + 1) * size - h, (r + 1) * size - h)
             for r in range(rows) for c in range(cols)]
    return gpd.GeoDataFrame({"unit_id": [f"u{k}" for k in range(len(geoms))]},
                            geometry=geoms, crs=3857)


def halves_with_enclave(cols: int = 6, rows: int = 4) -> np.ndarray:
    """Left half A, right half B, unit (col 1, row 1) is zone C inside A."""
    zone = np.array(["A"] * (cols * rows), dtype=object)
    for r in range(rows):
        for c in range(cols // 2, cols):
            zone[r * cols + c] = "B"
    zone[1 * cols + 1] = "C"
    return zone


def assert_disjoint(zones: gpd.GeoDataFrame, max_overlap: float) -> None:
    geoms = zones.geometry.to_numpy()
    for a, b in itertools.combinations(range(len(geoms)), 2):
        assert shapely.intersection(geoms[a], geoms[b]).area <= max_overlap


def test_exact_grid_dissolves_to_one_polygon_per_zone_with_enclave():
    units = grid(6, 4)
    zones = dissolve_zones(units, halves_with_enclave())
    assert zones["site_id"].tolist() == ["A", "B", "C"]
    assert zones["n_units"].tolist() == [11, 12, 1]
    assert zones["n_parts"].tolist() == [1, 1, 1]
    assert all(zones.geom_type == "Polygon") and zones.attrs["warnings"] == []
    a, b, c = zones.geometry
    assert shapely.get_num_interior_rings(a) == 1  # the enclave C survives as a hole ...
    assert shapely.get_num_interior_rings(b) == 0
    assert a.interiors[0].equals(c.exterior)  # ... exactly the shape of zone C
    assert np.allclose(zones["area"], [110_000, 120_000, 10_000])
    assert shapely.union_all(zones.geometry.values).area == pytest.approx(240_000, rel=1e-12)
    assert_disjoint(zones, 1e-6)


def test_gaps_between_units_leave_no_holes_or_cracks():
    gap, tol = 0.05, 0.1
    units = grid(6, 4, gap=gap)
    zones = dissolve_zones(units, halves_with_enclave(), tolerance=tol)
    assert zones["n_parts"].tolist() == [1, 1, 1]
    a, b, c = zones.geometry
    assert shapely.get_num_interior_rings(b) == 0  # every crack inside B is closed
    assert shapely.get_num_interior_rings(a) == 1  # only the enclave is left as a hole
    assert shapely.get_num_interior_rings(c) == 0
    union = shapely.union_all(zones.geometry.values)
    # no crack between zones: the union is one polygon without holes
    assert union.geom_type == "Polygon" and shapely.get_num_interior_rings(union) == 0
    # the zones cover the units plus only the gaps between them (inner gaps of width
    # `gap`: 5 lines 400 long, 3 lines 600 long)
    unit_area = shapely.union_all(units.geometry.values).area
    gaps_area = (5 * 400 + 3 * 600) * gap
    assert unit_area <= union.area <= unit_area + gaps_area + 1e-6
    assert shapely.covers(union.buffer(1e-9), shapely.union_all(units.geometry.values))
    assert_disjoint(zones, 400 * tol * 1e-3)
    # with a tolerance below the gap width, the cracks stay (the rule depends on tolerance)
    loose = dissolve_zones(units, halves_with_enclave(), tolerance=0.01)
    assert loose["n_parts"].max() > 1 and loose.attrs["warnings"]


def test_cracks_are_split_between_the_zones_along_them():
    # nine 2x2 blocks of gapped units: the cracks between zones form one connected net
    gap, tol = 0.04, 0.05
    units = grid(6, 6, gap=gap)
    zone_of = np.array([f"Z{(c // 2) + 3 * (r // 2)}" for r in range(6) for c in range(6)],
                       dtype=object)
    zones = dissolve_zones(units, zone_of, tolerance=tol)
    assert zones["n_parts"].tolist() == [1] * 9
    assert shapely.get_num_interior_rings(zones.geometry.values).tolist() == [0] * 9
    union = shapely.union_all(zones.geometry.values)
    assert union.geom_type == "Polygon" and shapely.get_num_interior_rings(union) == 0
    for sid, geom in zip(zones["site_id"], zones.geometry, strict=True):
        own = shapely.union_all(units.geometry.values[zone_of == sid])
        assert shapely.covers(shapely.buffer(geom, 1e-9), own)  # keeps all its units ...
        assert shapely.covers(shapely.buffer(own, 2 * tol), geom)  # ... and grows by < 2 tol
    assert_disjoint(zones, 1e-6)


def test_real_hole_and_small_hole():
    # a ring of 8 units around a missing centre (a lake, not a unit): the hole survives;
    # shrink the missing centre to a pin-hole gap and it is filled
    units = grid(3, 3).drop(index=4).reset_index(drop=True)
    zones = dissolve_zones(units, ["A"] * 8)
    assert shapely.get_num_interior_rings(zones.geometry[0]) == 1
    pin = gpd.GeoDataFrame(geometry=[box(100, 100, 200, 200).difference(box(149, 149, 151, 151))],
                           crs=3857)
    patched = dissolve_zones(gpd.GeoDataFrame(geometry=list(units.geometry) + list(pin.geometry),
                                              crs=3857), ["A"] * 9, tolerance=0.1)
    assert shapely.get_num_interior_rings(patched.geometry[0]) == 0  # 4 m2 < sliver area
    assert patched.geometry[0].area == pytest.approx(90_000, rel=1e-9)


def test_split_zone_is_reported():
    units = grid(3, 1)
    zones = dissolve_zones(units, ["A", "B", "A"], counts=[10, 20, 5])
    assert zones.set_index("site_id")["n_parts"].to_dict() == {"A": 2, "B": 1}
    assert zones.set_index("site_id")["students"].to_dict() == {"A": 15.0, "B": 20.0}
    assert any("zone A has 2 separate parts" in w for w in zones.attrs["warnings"])
    partial = dissolve_zones(units, ["A", "", "A"])
    assert "1 unit(s) have no zone" in partial.attrs["warnings"][0]
    with pytest.raises(ValueError, match="one per unit"):
        dissolve_zones(units, ["A", "B"])
    with pytest.raises(ValueError, match="not in site_ids: B"):
        dissolve_zones(units, ["A", "B", "A"], site_ids=["A"])


def seeded_zones(adj: Adjacency, seeds: list[int]) -> np.ndarray:
    """Contiguous zones: each unit joins its nearest seed in hops (shortest-path trees)."""
    _, _, sources = dijkstra(adj.to_csr(), indices=seeds, unweighted=True, min_only=True,
                             return_predecessors=True)
    return sources


def georgia():
    # libpysal example data: Georgia counties (G_utm.shp, metres)
    path = examples.get_path("G_utm.shp")
    df = gpd.read_file(path)
    return df


def test_georgia_counties_grouped():
    # Source: libpysal example data (georgia). Zones are grown from 8 seed counties.
    df = georgia()
    adj = Adjacency.from_polygons(df.geometry, [str(k) for k in range(len(df))])
    assert adj.n_components == 1
    sources = seeded_zones(adj, [0, 20, 40, 60, 80, 100, 120, 140])
    zone_of = np.array([f"Z{s:03d}" for s in sources], dtype=object)
    zones = dissolve_zones(df, zone_of, counts=np.ones(len(df)))
    assert len(zones) == 8 and zones["n_units"].sum() == len(df)
    # zones are contiguous in the unit graph; a zone has more than one part only where a
    # county itself is a MultiPolygon (coastal islands): compare with shapely's plain union
    raw_parts = [shapely.get_num_geometries(shapely.union_all(df.geometry.values[zone_of == s]))
                 for s in zones["site_id"]]
    assert zones["n_parts"].tolist() == raw_parts
    assert len(zones.attrs["warnings"]) == sum(p > 1 for p in raw_parts)
    unit_area = shapely.union_all(df.geometry.values).area
    union_area = shapely.union_all(zones.geometry.values).area
    # closing may only fill gaps and inlets narrower than twice the tolerance: at most
    # `tol` of extra width per metre of unit outline
    tol = default_tolerance(df.geometry.values)
    assert 0 <= union_area - unit_area <= tol * df.geometry.length.sum()
    assert union_area - unit_area <= 1e-5 * unit_area
    assert zones["area"].sum() == pytest.approx(union_area, rel=1e-9)  # no overlaps
    assert_disjoint(zones, unit_area * 1e-7)

    colors = color_zones(zones)
    touching = {(a, b) for a, b in itertools.combinations(zones["site_id"], 2)
                if zones.set_index("site_id").geometry[a].intersects(
                    zones.set_index("site_id").geometry[b])}  # shapely, independent
    assert touching, "the seeded zones of a state touch each other"
    assert all(colors[a] != colors[b] for a, b in touching)
    # the unit graph gives the same zone graph as the geometry (no barriers here)
    assert zone_edges(adj, zone_of) <= {tuple(sorted(p)) for p in touching}
    assert max(colors.values()) < len(ZONE_PALETTE)


def test_changed_areas():
    units = grid(6, 4, gap=0.05)
    today = np.array(["A"] * 24, dtype=object)
    option = halves_with_enclave()
    counts = np.arange(24, dtype=float)
    moved = changed_areas(units, today, option, counts=counts, tolerance=0.1)
    assert moved[["from_site", "to_site"]].values.tolist() == [["A", "B"], ["A", "C"]]
    b_units = [r * 6 + c for r in range(4) for c in (3, 4, 5)]
    assert moved["students"].tolist() == [counts[b_units].sum(), counts[7]]
    assert moved["n_units"].tolist() == [12, 1]
    assert shapely.get_num_geometries(moved.geometry[0]) == 1  # the gaps are closed
    assert moved.geometry[0].area == pytest.approx(3 * 100 * 400, abs=400 * 0.05 * 3)
    same = changed_areas(units, option, option)
    assert len(same) == 0 and list(same.columns)[:3] == ["from_site", "to_site", "n_units"]
    # a unit with no school today that gets one counts as changed
    new = changed_areas(units, [""] + ["A"] * 23, ["A"] * 24)
    assert new[["from_site", "to_site", "n_units"]].values.tolist() == [["", "A", 1]]


def test_coverage_union_gives_the_same_zones_on_the_demo():
    """shapely.coverage_union_all (units that form a coverage) and the general union_all
    dissolve the demo town's zones of today into the very same polygons."""
    from districting.intake import load_project

    inputs = load_project(Path(__file__).parents[2] / "data" / "demo" / "project.toml")
    assert inputs.units_coverage  # the generator's units share their borders exactly
    units = inputs.units[["unit_id", "geometry"]]
    site_ids = np.array([*inputs.sites["site_id"], ""], dtype=object)
    for level in inputs.settings.levels:
        cur = inputs.current[level]
        ids = site_ids[np.where(cur >= 0, cur, len(site_ids) - 1)]
        fast = dissolve_zones(units, ids, coverage=True)
        general = dissolve_zones(units, ids, coverage=False)
        assert fast.drop(columns="geometry").equals(general.drop(columns="geometry"))
        assert shapely.equals_exact(fast.geometry.to_numpy(), general.geometry.to_numpy(),
                                    0).all()


def test_units_that_overlap_or_do_not_share_vertices_are_not_a_coverage():
    assert is_coverage(grid(3, 2).geometry)
    assert is_coverage(grid(3, 2, gap=1.0).geometry)  # apart: no shared border to match
    # a shared border with a vertex on one side only (GEOS CoverageValidator's rule)
    split = shapely.Polygon([(10, 0), (20, 0), (20, 10), (10, 10), (10, 5)])
    assert not is_coverage([box(0, 0, 10, 10), split])
    assert not is_coverage([box(0, 0, 10, 10), box(5, 0, 15, 10)])  # overlap
    assert not is_coverage([])


def test_gapped_units_dissolve_alike_either_way():
    units = grid(4, 3, gap=1.0)
    zone = np.array(["A", "A", "B", "B"] * 3, dtype=object)
    fast = dissolve_zones(units, zone, coverage=True)
    general = dissolve_zones(units, zone, coverage=False)
    assert shapely.equals_exact(fast.geometry.to_numpy(), general.geometry.to_numpy(), 0).all()
