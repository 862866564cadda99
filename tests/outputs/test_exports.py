"""Exports of one option: GeoPackage, GeoJSON (RFC 7946), zipped Shapefile and CSVs."""

from __future__ import annotations

import csv
import io
import json
import re
import sqlite3
import zipfile

import geopandas as gpd
import numpy as np
import pandas as pd
import pyogrio
import pytest
import shapely
from exports_town import make_town, nearest_assignment, no_plan_outcome

from districting import DRAFT_NOTICE
from districting.names import slug
from districting.outputs.exports import SHAPEFILE_FIELDS, export_all, read_export_csv
from districting.outputs.sheets import for_people, school_sheet
from districting.outputs.store import stored_school_colours
from districting.outputs.tables import school_table, unit_table
from districting.study import RunSettings, outcome_from_assignment


@pytest.fixture(scope="module")
def exported(tmp_path_factory):
    folder = tmp_path_factory.mktemp("town")
    town = make_town(folder, statuses=["open", "open", "closing", "open"])
    open_mask = np.array([True, True, False, True])
    a = nearest_assignment(town, open_mask)
    outcome = outcome_from_assignment(town, RunSettings(level="elementary"), a,
                                      {"status": "optimal", "bound": 1.0, "gap": 0.0},
                                      name="Option Ä: close Quillmere")
    return outcome, export_all(outcome, folder / "exports")


def test_files_and_names(exported):
    outcome, paths = exported
    assert set(paths) == {"gpkg", "geojson", "shapefile", "units_csv", "schools_csv",
                          "feeders_csv", "units_about", "schools_about", "feeders_about"}
    assert all(p.exists() and p.stat().st_size > 0 for p in paths.values())
    assert paths["gpkg"].name == "option-a-close-quillmere.gpkg"
    assert not list(paths["gpkg"].parent.glob(".tmp-*"))  # atomic writes leave nothing
    assert slug("  ") == "option" and slug("A/B: 1") == "a-b-1"


def test_geopackage_reads_back_the_same_plan(exported):
    outcome, paths = exported
    layers = {name for name, _ in pyogrio.list_layers(paths["gpkg"])}
    assert layers == {"zones", "units", "sites", "changed_areas", "about"}
    units = gpd.read_file(paths["gpkg"], layer="units")
    np.testing.assert_array_equal(units["unit_id"], outcome.unit_ids)
    np.testing.assert_array_equal(units["proposed"], outcome.site_id_of(outcome.assignment))
    np.testing.assert_array_equal(units["current"], outcome.site_id_of(outcome.current))
    np.testing.assert_array_equal(units["changed"].astype(bool),
                                  outcome.assignment != outcome.current)
    assert set(units["option"]) == {outcome.name}
    # the outcome's loads and moves, summed by hand (pandas) from the re-read file
    site_pos = {s: j for j, s in enumerate(outcome.site_ids)}
    demand = outcome.problem.demand
    for t in range(demand.shape[0]):
        by_site = pd.Series(demand[t]).groupby(units["proposed"].to_numpy()).sum()
        want = [by_site.get(s, 0.0) for s in outcome.site_ids]
        np.testing.assert_allclose(outcome.metrics.load[t], want)
    changed = units["changed"].astype(bool).to_numpy() & (outcome.current >= 0)
    assert outcome.metrics.students_moved == pytest.approx(demand[0][changed].sum())

    zones = gpd.read_file(paths["gpkg"], layer="zones")
    m = outcome.metrics
    used = [site_pos[s] for s in zones["site_id"]]
    assert list(zones["site_id"]) == [s for s, o in zip(outcome.site_ids, m.load[0] > 0,
                                                        strict=True) if o]
    years = sorted(outcome.problem.years)
    for t, y in enumerate(outcome.problem.years):
        np.testing.assert_allclose(zones[f"students_{y}"], m.load[t, used])
        np.testing.assert_allclose(zones[f"util_{y}"], m.utilization[t, used])
    assert [c for c in zones.columns if c.startswith("students_2")] == \
        [f"students_{y}" for y in years]
    np.testing.assert_allclose(zones["moved_in"], m.moved_in[used])
    np.testing.assert_allclose(zones["moved_out"], m.moved_out[used])
    assert (zones["n_parts"] == 1).all()
    # the zones cover exactly the units (shapely union, independent of the dissolve)
    unit_union = shapely.union_all(outcome.inputs.units.geometry.to_numpy())
    zone_union = shapely.union_all(zones.geometry.to_numpy())
    assert zone_union.area == pytest.approx(unit_union.area, rel=1e-9)
    assert zones.geometry.area.sum() == pytest.approx(unit_union.area, rel=1e-9)
    assert shapely.symmetric_difference(zone_union, unit_union).area < 1e-6 * unit_union.area

    changed = gpd.read_file(paths["gpkg"], layer="changed_areas")
    moved = outcome.assignment != outcome.current
    assert changed["n_units"].sum() == moved.sum()
    assert changed["students"].sum() == pytest.approx(m.students_moved)
    for r in changed.itertuples():
        sel = moved & (units["current"] == r.from_site).to_numpy() & \
            (units["proposed"] == r.to_site).to_numpy()
        assert r.n_units == sel.sum()
        assert r.students == pytest.approx(outcome.problem.demand[0, sel].sum())
    sites = gpd.read_file(paths["gpkg"], layer="sites")
    assert list(sites["status"]) == ["open", "open", "closing", "open"]
    assert list(sites["open"].astype(bool)) == [True, True, False, True]


def test_geopackage_carries_the_notice(exported):
    outcome, paths = exported
    about = pyogrio.read_dataframe(paths["gpkg"], layer="about")
    record = dict(zip(about["key"], about["value"], strict=True))
    assert record["notice"] == DRAFT_NOTICE
    assert record["option"] == outcome.name and record["level"] == "elementary"
    assert record["plan_year"] == "2027" and record["exported"][:4].isdigit()
    con = sqlite3.connect(paths["gpkg"])
    rows = dict(con.execute("SELECT table_name, description FROM gpkg_contents").fetchall())
    con.close()
    for layer in ("zones", "units", "sites", "changed_areas"):
        assert DRAFT_NOTICE in rows[layer] and outcome.name in rows[layer]


def test_geojson_is_rfc7946_wgs84(exported):
    outcome, paths = exported
    doc = json.loads(paths["geojson"].read_text(encoding="utf-8"))
    assert doc["type"] == "FeatureCollection"
    assert "crs" not in doc  # RFC 7946 section 4: no crs member; lon/lat WGS 84
    assert DRAFT_NOTICE in doc["description"] and outcome.name in doc["description"]
    assert {f["properties"]["option"] for f in doc["features"]} == {outcome.name}
    xy = np.array([c for f in doc["features"] for ring in f["geometry"]["coordinates"]
                   for c in ring])
    lon, lat = xy[:, 0], xy[:, 1]
    # the grid town lies near 500 km E, 4400 km N in UTM zone 17N; pyproj (an independent
    # library) maps the unit corners to the same longitude / latitude range (about 81 W, 39.7 N)
    from pyproj import Transformer
    corners = shapely.get_coordinates(outcome.inputs.units.geometry.to_numpy())
    lon_ref, lat_ref = Transformer.from_crs("EPSG:32617", "EPSG:4326", always_xy=True
                                            ).transform(corners[:, 0], corners[:, 1])
    assert lon.min() == pytest.approx(lon_ref.min(), abs=1e-6)
    assert lat.min() == pytest.approx(lat_ref.min(), abs=1e-6)
    assert lon.max() == pytest.approx(lon_ref.max(), abs=1e-6)
    assert lat.max() == pytest.approx(lat_ref.max(), abs=1e-6)
    back = gpd.read_file(paths["geojson"])
    assert back.crs.to_epsg() == 4326
    zones = gpd.read_file(paths["gpkg"], layer="zones")
    np.testing.assert_array_equal(back["site_id"], zones["site_id"])
    area_back = back.to_crs(outcome.inputs.crs).geometry.area.to_numpy()
    np.testing.assert_allclose(area_back, zones.geometry.area.to_numpy(), rtol=1e-4)
    # RFC 7946 section 3.1.6: exterior rings counterclockwise (positive signed area)
    for f in doc["features"]:
        ring = np.array(f["geometry"]["coordinates"][0])
        signed = 0.5 * np.sum(ring[:-1, 0] * ring[1:, 1] - ring[1:, 0] * ring[:-1, 1])
        assert signed > 0


def test_shapefile_zip(exported, tmp_path):
    outcome, paths = exported
    with zipfile.ZipFile(paths["shapefile"]) as zf:
        names = set(zf.namelist())
        readme = zf.read("README.txt").decode("utf-8")
        assert zf.read("option-a-close-quillmere_zones.cpg").decode().strip().upper() in (
            "UTF-8", "UTF8")
        zf.extractall(tmp_path)
    assert {f"option-a-close-quillmere_zones.{e}" for e in ("shp", "shx", "dbf", "prj",
                                                            "cpg")} <= names
    assert DRAFT_NOTICE in readme and outcome.name in readme and "st_2027" in readme
    shp = gpd.read_file(f"zip://{paths['shapefile']}")
    assert all(len(c) <= 10 for c in shp.columns)
    assert shp.crs.equals(outcome.inputs.crs)
    zones = gpd.read_file(paths["gpkg"], layer="zones")
    np.testing.assert_array_equal(shp["site_id"], zones["site_id"])
    np.testing.assert_allclose(shp["st_2028"], zones["students_2028"])
    np.testing.assert_allclose(shp["ut_2029"], zones["util_2029"])
    assert list(shp["name"]) == list(zones["name"])
    assert set(SHAPEFILE_FIELDS.values()) >= {"moved_in", "moved_out", "n_parts"}
    assert shp["option"].iloc[0] == outcome.name  # UTF-8 text survives (Ä)


def test_csvs_are_plain_tables(exported):
    outcome, paths = exported
    for kind in ("units_csv", "schools_csv"):
        text = paths[kind].read_text(encoding="utf-8")
        assert not text.startswith("#") and "\n#" not in text  # no comment lines
        rows = list(csv.reader(io.StringIO(text)))  # the standard library's reader
        assert len({len(r) for r in rows}) == 1  # a rectangle: header on line 1
        assert not any(re.search(r"\d\.\d{3,}", cell) for r in rows for cell in r)
        assert "nan" not in text.lower()
    units = pd.read_csv(paths["units_csv"])  # pandas, no options: a spreadsheet's view
    assert list(units.columns) == ["Unit id", "Today's school (site id)",
                                   "Proposed school (site id)", "Proposed school",
                                   "Changes school", "Students 2027",
                                   "Travel to the proposed school (km)"]
    assert units["Students 2027"].dtype.kind == "i"
    assert units["Travel to the proposed school (km)"].dtype.kind == "f"
    np.testing.assert_array_equal(units["Proposed school (site id)"],
                                  outcome.site_id_of(outcome.assignment))
    np.testing.assert_array_equal(units["Students 2027"], np.round(outcome.problem.demand[0]))
    expected = unit_table(outcome)
    np.testing.assert_allclose(units["Travel to the proposed school (km)"],
                               expected["distance_m"] / 1000, atol=0.005)
    assert list(units["Changes school"]) == ["yes" if c else "no" for c in expected["changed"]]

    schools = pd.read_csv(paths["schools_csv"])
    m = outcome.metrics
    for k, y in enumerate(outcome.problem.years):
        assert schools[f"Students {y}"].dtype.kind == "i"
        np.testing.assert_array_equal(schools[f"Students {y}"], np.round(m.load[k]))
        np.testing.assert_allclose(schools[f"Utilization {y} (%)"], 100 * m.utilization[k],
                                   atol=0.05)
    # the closing school has no students: an empty cell, and the note says why
    closing = schools["Status in 2027"] == "closing"
    assert schools.loc[closing, "Mean travel (km)"].isna().all()
    schools_read, record = read_export_csv(paths["schools_csv"])
    assert "empty when the school has no students" in record["columns"]["Mean travel (km)"]
    assert set(record["columns"]) == set(schools_read.columns)
    assert record["notice"] == DRAFT_NOTICE and record["option"] == outcome.name
    assert record["level"] == "elementary" and record["status"] == "best possible plan"
    assert record["travel measure"] == {"straight-line": "in a straight line",
                                        "barrier-aware": "around barriers, crossing only at "
                                        "bridges"}[outcome.settings.travel]
    assert list(schools["Outside the band in some year"]) == \
        ["yes" if b else "no" for b in m.out_of_band]
    assert schools["Colour"].str.fullmatch(r"#[0-9A-F]{6}").all()
    # the same table for people: text, a dash where there is no number, never "nan"
    people = for_people(school_sheet(outcome)[0])
    assert list(people.loc[closing, "Mean travel (km)"]) == ["\u2013"]
    assert not people.map(lambda v: "nan" in v.lower()).any().any()
    assert people["Students 2027"].str.fullmatch(r"\d{1,3}(,\d{3})*").all()
    assert list(people.index) == list(range(len(people)))


def test_zone_features_carry_their_school_colour(exported):
    outcome, paths = exported
    colours = stored_school_colours(outcome.inputs, outcome.level)
    zones = gpd.read_file(paths["gpkg"], layer="zones")
    assert list(zones["colour"]) == [colours[s] for s in zones["site_id"]]
    doc = json.loads(paths["geojson"].read_text(encoding="utf-8"))
    assert [f["properties"]["colour"] for f in doc["features"]] == list(zones["colour"])
    shp = gpd.read_file(f"zip://{paths['shapefile']}")
    assert list(shp["colour"]) == list(zones["colour"])


def test_school_table_flags_match_the_band(exported):
    outcome, _ = exported
    t = school_table(outcome)
    p = outcome.problem
    years = sorted(p.years)
    flags = t[[f"flag_{y}" for y in years]].to_numpy()
    assert ((flags != "").any(axis=1) == outcome.metrics.out_of_band).all()
    for y in years:
        over = t[f"students_{y}"] > t["max_util"] * t["capacity"] + 1e-6
        assert ((t[f"flag_{y}"] == "over") == over).all()
    closing = t["status"] == "closing"
    assert (t.loc[closing, "students_2027"] == 0).all()
    assert (t.loc[closing, "students_now"] > 0).all()  # today's zone of the closing school
    now = outcome.inputs.counts["elementary"][0]
    assert t["students_now"].sum() == pytest.approx(now.sum())


def test_no_plan_is_refused(tmp_path):
    broken = no_plan_outcome(make_town(tmp_path))
    with pytest.raises(ValueError, match="no valid plan: No plan: too few seats") as err:
        export_all(broken, tmp_path / "out")
    lines = str(err.value).splitlines()  # the lead line, then one cause per line
    assert lines[1:3] == ["  - Alder: 40 students over", "  - Birch: 12 students over"]
    assert not (tmp_path / "out").exists() or not list((tmp_path / "out").iterdir())
