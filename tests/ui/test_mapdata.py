"""The map's data (ui/mapdata.py): paths that hold every coordinate of the shapes, and the
project's slow parts (the barrier layer on disk, today's dissolved zones) done once.

Reference for the paths: shapely's own rings of each geometry (``get_exterior_ring`` /
``get_interior_ring``), taken one geometry at a time, independently of the ragged-array
route the module uses.
"""

from __future__ import annotations

import dataclasses

import geopandas as gpd
import numpy as np
import pytest
import shapely
from ui_town import CELL, CRS, LEVEL

import districting.outputs.reference
import districting.outputs.zones
from districting.intake import Source
from ui.mapdata import MapData, line_paths, polygon_paths


def rings_of(geom) -> list[np.ndarray]:
    """Every ring of a (multi)polygon, exterior first per part, as coordinate arrays."""
    out = []
    for part in shapely.get_parts(geom):
        out.append(shapely.get_coordinates(shapely.get_exterior_ring(part)))
        out += [shapely.get_coordinates(shapely.get_interior_ring(part, k))
                for k in range(shapely.get_num_interior_rings(part))]
    return out


def count_calls(monkeypatch, module, name: str) -> list:
    """Record each call of ``module.name`` (the real function still runs)."""
    calls = []
    real = getattr(module, name)

    def counted(*args, **kwargs):
        calls.append(args)
        return real(*args, **kwargs)

    monkeypatch.setattr(module, name, counted)
    return calls


def test_polygon_paths_hold_every_ring_of_every_unit():
    square = shapely.box(0, 0, 100, 100)
    holed = shapely.Polygon([(200, 0), (400, 0), (400, 200), (200, 200)],
                            [[(250, 50), (300, 50), (300, 100), (250, 100)]])
    two = shapely.MultiPolygon([shapely.box(500, 0, 550, 50), holed.buffer(0)
                                .difference(shapely.box(0, 0, 1, 1))])
    for geoms in ([square, holed], [square, two, holed]):
        xs, ys = polygon_paths(geoms)
        assert len(xs) == len(geoms)
        for g, gx, gy in zip(geoms, xs, ys, strict=True):
            rings = rings_of(g)
            flat_x = [ring for part in gx for ring in part]
            flat_y = [ring for part in gy for ring in part]
            assert len(gx) == len(shapely.get_parts(g))  # one entry per polygon part
            assert len(flat_x) == len(rings)
            for ref, rx, ry in zip(rings, flat_x, flat_y, strict=True):
                assert np.allclose(ref, np.column_stack([rx, ry]))
    with pytest.raises(ValueError, match="must be polygons"):
        polygon_paths([shapely.Point(0, 0)])


def test_line_paths_give_one_path_per_line_or_ring():
    lines = [shapely.LineString([(0, 0), (5, 5)]),
             shapely.MultiLineString([[(0, 1), (2, 1)], [(3, 3), (4, 4), (5, 3)]])]
    xs, ys = line_paths(lines)
    assert xs == [[0, 5], [0, 2], [3, 4, 5]] and ys == [[0, 5], [1, 1], [3, 4, 3]]
    holed = shapely.box(0, 0, 10, 10).difference(shapely.box(2, 2, 4, 4))
    xs, _ = line_paths([holed, shapely.box(20, 0, 30, 10)])
    assert len(xs) == 3  # the outer ring, the hole, the second square
    assert line_paths([]) == ([], [])


@pytest.fixture
def barred(inputs, tmp_path):
    """The grid town with three barrier lines whose kinds are only in the layer on disk."""
    x0, y0 = 400_000.0, 5_000_000.0
    lines = [shapely.LineString([(x0 + CELL * 3, y0), (x0 + CELL * 3, y0 + CELL * 10)]),
             shapely.LineString([(x0, y0 + CELL * 5), (x0 + CELL * 14, y0 + CELL * 5)]),
             shapely.LineString([(x0 + CELL * 9, y0), (x0 + CELL * 9, y0 + CELL * 4)])]
    layer = tmp_path / "barriers.gpkg"
    gpd.GeoDataFrame({"kind": [" River", "rail", "fence"]}, geometry=lines,
                     crs=CRS).to_file(layer)
    settings = dataclasses.replace(inputs.settings, sources={"barriers": Source(path=layer)})
    return dataclasses.replace(inputs, settings=settings,
                               barriers=gpd.GeoSeries(lines, crs=CRS))


def test_barrier_layer_is_read_once_and_grouped_by_kind(barred, monkeypatch):
    reads = count_calls(monkeypatch, districting.outputs.reference.pyogrio, "read_dataframe")
    data = MapData.of(barred)
    assert MapData.of(barred) is data  # every session's map shares it
    assert len(reads) == 1
    assert set(data.barriers) == {"river", "rail", "barrier"}  # "fence" is no known kind
    assert data.barriers["river"][0] == [[400_600.0, 400_600.0]]
    assert data.barriers["rail"][1] == [[5_001_000.0, 5_001_000.0]]
    assert data.barriers["barrier"][0] == [[401_800.0, 401_800.0]]
    assert "highway" not in data.barriers
    assert data.streets is None  # the grid town has no streets


def test_todays_outlines_are_dissolved_once_per_level(inputs, monkeypatch):
    calls = count_calls(monkeypatch, districting.outputs.zones, "dissolve_zones")
    data = MapData.of(inputs)
    xs, ys = data.today(LEVEL)
    assert data.today(LEVEL) == (xs, ys) and len(calls) == 1
    # today's zones of the grid town are four vertical bands, each one rectangle
    col = np.arange(14)
    band = np.minimum(col * 4 // 14, 3)
    spans = {(400_000.0 + CELL * col[band == b].min(), 400_000.0 + CELL * (col[band == b].max()
                                                                           + 1))
             for b in range(4)}
    assert len(xs) == 4
    assert {(min(path), max(path)) for path in xs} == spans
    assert {min(p) for p in ys} == {5_000_000.0} and {max(p) for p in ys} == {5_002_000.0}


def test_each_school_keeps_one_colour_and_touching_zones_differ(inputs):
    data = MapData.of(inputs)
    site_ids = inputs.sites["site_id"].astype(str).tolist()
    colours = data.school_colors(LEVEL)
    assert set(colours) == set(site_ids)
    for a, b in zip(site_ids[:-1], site_ids[1:], strict=True):  # bands k and k+1 touch
        assert colours[a] != colours[b]
    assert data.school_colors(LEVEL) == colours  # the same on every map, every call


def test_a_school_without_a_zone_today_still_gets_a_colour(inputs):
    current = dict(inputs.current)
    current[LEVEL] = np.where(inputs.current[LEVEL] == 3, 2, inputs.current[LEVEL])
    colours = MapData(dataclasses.replace(inputs, current=current)).school_colors(LEVEL)
    assert set(colours) == {"M1", "M2", "M3", "M4"}  # M4 has no zone today
    assert colours["M4"] not in {colours["M1"], colours["M2"], colours["M3"]}


def test_workbench_colours_are_the_projects_stored_colours(inputs):
    """The workbench takes its colours from the options store, as the exports and the
    packet do: a colour stored before (by an export, say) is the one the map shows."""
    from districting.outputs.store import load_school_colours, save_school_colours

    store = inputs.settings.store
    save_school_colours(store, LEVEL, {"M2": "#123456"})  # chosen earlier, elsewhere
    colours = MapData(inputs).school_colors(LEVEL)
    assert colours["M2"] == "#123456"
    assert load_school_colours(store, LEVEL) == colours  # the others are kept too


def test_a_damaged_store_only_means_colours_are_not_kept(inputs):
    store = inputs.settings.store
    store.write_bytes(b"not a GeoPackage")
    with pytest.warns(UserWarning, match="not kept"):
        colours = MapData(inputs).school_colors(LEVEL)
    assert set(colours) == {"M1", "M2", "M3", "M4"}
    assert store.read_bytes() == b"not a GeoPackage"
