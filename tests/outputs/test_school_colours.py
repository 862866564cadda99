"""One display colour per school: touching zones differ, the same school keeps its colour.

Outside sources: scipy.spatial.Delaunay (Qhull) for the Delaunay neighbours, shapely's
``touches`` on dissolved zones (geopandas) for which zones touch.
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pandas as pd
import pytest
import shapely
from exports_town import make_outcome, make_town, nearest_assignment
from scipy.spatial import Delaunay

from districting.outputs.colours import ZONE_PALETTE, school_colours, school_graph
from districting.outputs.store import load_school_colours, stored_school_colours
from districting.study import RunSettings, outcome_from_assignment


@pytest.fixture()
def town(tmp_path):
    # 14 schools: as many as the demo town's elementary level
    return make_town(tmp_path, nx=16, ny=12, n_sites=14, seed=3)


def touching_pairs(inputs, site_of_unit) -> set[tuple[str, str]]:
    """Zones (dissolved by geopandas) whose polygons touch, by shapely."""
    units = inputs.units[["geometry"]].assign(zone=site_of_unit)
    zones = units.dissolve("zone")
    ids = zones.index.tolist()
    geoms = zones.geometry.to_numpy()
    return {(a, b) for i, a in enumerate(ids) for j, b in enumerate(ids)
            if i < j and shapely.intersects(geoms[i], geoms[j])}


def test_graph_holds_touching_zones_and_delaunay_neighbours(town):
    g = school_graph(town, "elementary")
    ids = town.sites["site_id"].tolist()
    today = np.array(ids, dtype=object)[town.current["elementary"]]
    for a, b in touching_pairs(town, today):
        assert g.has_edge(a, b)
    xy = np.column_stack([town.sites.geometry.x, town.sites.geometry.y])
    tri = Delaunay(xy)  # Qhull, independent of GEOS
    for simplex in tri.simplices:
        for k in range(3):
            a, b = ids[simplex[k]], ids[simplex[(k + 1) % 3]]
            assert g.has_edge(a, b), (a, b)


def test_touching_zones_differ_today_and_in_options(town):
    colours = school_colours(town, "elementary")
    assert set(colours) == set(town.sites["site_id"])
    assert set(colours.values()) <= set(ZONE_PALETTE)
    ids = np.array(town.sites["site_id"].tolist(), dtype=object)
    for assignment in (town.current["elementary"], nearest_assignment(town)):
        for a, b in touching_pairs(town, ids[assignment]):
            assert colours[a] != colours[b], (a, b)
    # 14 schools spread over the palette: far more than the 3-4 fills DSATUR alone gives
    assert len(set(colours.values())) >= 8


def test_colours_follow_site_ids_not_row_order(town):
    before = school_colours(town, "elementary")
    order = np.random.default_rng(1).permutation(len(town.sites))
    sites = town.sites.iloc[order].reset_index(drop=True)
    new_row = np.argsort(order)  # old row -> new row
    current = {lv: np.where(c >= 0, new_row[c], -1) for lv, c in town.current.items()}
    shuffled = dataclasses.replace(town, sites=sites, current=current)
    assert school_colours(shuffled, "elementary") == before


def test_stored_colours_survive_reruns_and_a_new_school(town):
    first = stored_school_colours(town, "elementary")
    assert load_school_colours(town.settings.store, "elementary") == first
    # the same school, the same colour in two options made with different settings
    a = make_outcome(town, name="A")
    b = outcome_from_assignment(town, RunSettings(level="elementary", stability_weight=500.0),
                                nearest_assignment(town)[::-1].copy(), {"status": "optimal"},
                                name="B")
    assert stored_school_colours(a.inputs, a.level) == stored_school_colours(b.inputs, b.level)
    # a new school between E07 and E08: the old colours stay, the new one is unlike its
    # neighbours'
    x = (town.sites.geometry.x[6] + town.sites.geometry.x[7]) / 2
    y = town.sites.geometry.y[6] - 500
    extra = town.sites.iloc[[0]].assign(site_id="E99", name="Newfield Elementary",
                                        status="new", geometry=[shapely.Point(x, y)])
    grown = dataclasses.replace(town, sites=pd.concat([town.sites, extra], ignore_index=True))
    later = stored_school_colours(grown, "elementary")
    assert {s: later[s] for s in first} == first
    graph = school_graph(grown, "elementary")
    assert len(graph["E99"]) >= 2
    assert later["E99"] not in {later[v] for v in graph["E99"]}
    assert load_school_colours(town.settings.store, "elementary")["E99"] == later["E99"]
