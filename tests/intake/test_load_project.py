"""Clean projects load: the TOML schema, every source format, CSV counts, reprojection.

The town is the invented 4 x 3 grid of tests/data/make_broken.py (1 km units U01..U12,
E1 in U01, E2 in U12, M1 in U06), written to a temporary folder per test.
"""

from __future__ import annotations

import importlib.util
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import pytest
import shapely

from districting.cli import check_command
from districting.intake import (
    Inputs,
    ProjectError,
    SolveSettings,
    check_summary,
    load_project,
    validate_project,
)
from districting.intake.layers import ReadError, read_layer, read_table

DATA = Path(__file__).parents[1] / "data"
DEMO = Path(__file__).parents[2] / "data" / "demo" / "project.toml"
_spec = importlib.util.spec_from_file_location("make_broken", DATA / "make_broken.py")
town = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(town)


def _count_table(units: gpd.GeoDataFrame, order=None) -> np.ndarray:
    """Elementary counts (all years x units), in the order of the unit ids ``order``."""
    years = (town.CURRENT, *town.YEARS)
    if order is not None:  # FlatGeobuf, for one, stores features in its own spatial order
        units = units.set_index("unit_id").loc[list(order)].reset_index()
    return np.stack([units[f"elementary_{y}"].to_numpy(float) for y in years])


def test_clean_project_has_the_documented_shapes(tmp_path):
    inputs = load_project(town.write_town(tmp_path))
    assert isinstance(inputs, Inputs)
    assert len(inputs.report) == 0, inputs.report.format()
    s = inputs.settings
    assert s.all_years == (2026, 2027, 2028) and s.plan_year == 2027
    assert s.levels == ("elementary", "middle")
    assert s.store == tmp_path / "project.options.gpkg"

    units = inputs.units
    assert list(units.index) == list(range(12))
    assert {"unit_id", "geometry", "point"} <= set(units.columns)
    assert units["unit_id"].tolist() == [f"U{k:02d}" for k in range(1, 13)]
    assert shapely.within(units["point"].to_numpy(), units.geometry.to_numpy()).all()
    assert inputs.crs.to_epsg() == 32633
    for level in s.levels:
        assert inputs.counts[level].shape == (3, 12)
    np.testing.assert_array_equal(inputs.counts["elementary"], _count_table(town.town_units()))
    assert inputs.year_row(2028) == 2

    sites = inputs.sites
    assert sites["site_id"].tolist() == ["E1", "E2", "M1"]
    assert sites["unit_index"].tolist() == [0, 11, 5]
    assert np.isnan(sites["min_util"]).all() and np.isnan(sites["max_util"]).all()
    assert sites["capacity"].tolist() == [500.0, 500.0, 600.0]
    west = (np.arange(12) % 4) < 2
    np.testing.assert_array_equal(inputs.current["elementary"], np.where(west, 0, 1))
    np.testing.assert_array_equal(inputs.current["middle"], np.full(12, 2))
    # a 4 x 3 rook grid has 3 * 3 + 4 * 2 = 17 neighbour pairs
    assert inputs.adjacency.n_edges == 17 and inputs.adjacency.n_components == 1
    assert len(inputs.barriers) == 0 and inputs.travel is None


def test_lon_lat_input_is_reprojected_with_a_warning(tmp_path):
    path = town.write_town(tmp_path, units=town.town_units().to_crs(4326),
                           sites=town.town_sites().to_crs(4326))
    inputs = load_project(path)
    assert inputs.crs.is_projected and inputs.crs.to_epsg() == 32633
    (warning,) = inputs.report.warnings
    assert "EPSG:4326" in warning.what and "EPSG:32633" in warning.what
    area = inputs.units.geometry.area.to_numpy()
    np.testing.assert_allclose(area, 1e6, rtol=1e-3)  # back to 1 km squares
    assert inputs.sites["unit_index"].tolist() == [0, 11, 5]


def test_counts_join_from_a_csv_on_the_unit_id(tmp_path):
    units = town.town_units()
    counts = pd.DataFrame(units.drop(columns="geometry")).iloc[::-1]  # other row order
    counts = counts.rename(columns={"unit_id": "code"}).drop(columns=["zone_elementary"])
    counts.to_csv(tmp_path / "counts.csv", sep=";", index=False, encoding="utf-8-sig")
    toml = town.project_dict()
    toml["counts"] = {"source": "counts.csv", "id": "code"}
    keep = ["unit_id", "zone_elementary", "zone_middle", "geometry"]
    inputs = load_project(town.write_town(tmp_path, units=units[keep], toml=toml))
    np.testing.assert_array_equal(inputs.counts["elementary"], _count_table(units))
    assert inputs.counts["middle"][1, 11] == units["middle_2027"].iloc[11]


@pytest.mark.parametrize("fmt", ["gpkg", "fgb", "zip", "geojson"])
def test_source_formats_read_alike(tmp_path, fmt):
    """GeoPackage (two layers, one file), FlatGeobuf, zipped Shapefile, GeoJSON."""
    units, sites = town.town_units(), town.town_sites()
    toml = town.project_dict()
    if fmt == "gpkg":
        town.write_layer(units, tmp_path / "town.gpkg", layer="units")
        town.write_layer(sites, tmp_path / "town.gpkg", layer="sites")
        toml = town.project_dict("town.gpkg", "town.gpkg", "units", "sites")
        town.write_toml(toml, tmp_path / "project.toml")
        path = tmp_path / "project.toml"
    else:
        if fmt == "zip":  # Shapefile names stop at 10 characters: counts come from a CSV
            pd.DataFrame(units.drop(columns="geometry")).to_csv(tmp_path / "c.csv", index=False)
            units = units[["unit_id", "zone_elementary", "geometry"]].rename(
                columns={"zone_elementary": "zone_el"})
            toml["counts"] = {"source": "c.csv"}
            toml["zones"]["columns"] = {"elementary": "zone_el"}
        name = f"units.{fmt}"
        toml["units"]["source"] = toml["zones"]["source"] = name
        path = town.write_town(tmp_path, units=units, toml=toml, units_file=name)
    inputs = load_project(path)
    assert not inputs.report.has_errors
    ids = inputs.units["unit_id"].tolist()
    assert sorted(ids) == [f"U{k:02d}" for k in range(1, 13)]
    np.testing.assert_array_equal(inputs.counts["elementary"],
                                  _count_table(town.town_units(), ids))
    np.testing.assert_allclose(inputs.units.geometry.area, 1e6)
    zone = dict(zip(ids, inputs.current["elementary"].tolist(), strict=True))
    assert [zone[u] for u in ("U01", "U02", "U03", "U04")] == [0, 0, 1, 1]
    assert inputs.sites["unit_index"].map(ids.__getitem__).tolist() == ["U01", "U12", "U06"]
    assert inputs.adjacency.n_edges == 17


def test_settings_parse_every_table(tmp_path):
    toml = town.project_dict()
    toml["project"].update(plan_year=2028, store="saved/options.gpkg")
    toml["solve"] = {"max_utilization": 1.1, "min_utilization": 0.2, "stability_weight": 50,
                     "gap": 0.01, "time_limit": 0, "solver": "HiGHS", "max_moved": 0,
                     "max_distance": {"middle": 4000}, "open_count": {}}
    toml["locks"] = [{"level": "elementary", "unit": "U02", "site": "E1"}]
    toml["forbids"] = [{"level": "elementary", "unit": "U03", "site": "E1"}]
    toml["adjacency"] = {"contiguity": "queen"}
    inputs = load_project(town.write_town(tmp_path, toml=toml))
    s = inputs.settings
    assert s.plan_year == 2028 and s.store == tmp_path / "saved" / "options.gpkg"
    assert s.solve == SolveSettings(max_utilization=1.1, min_utilization=0.2,
                                    stability_weight=50.0, max_distance={"middle": 4000.0},
                                    max_moved=None, open_count={}, gap=0.01, time_limit=None,
                                    solver="highs", travel_matrix=None)
    assert [(lk.unit, lk.site) for lk in s.locks] == [("U02", "E1")]
    assert [(lk.unit, lk.site) for lk in s.forbids] == [("U03", "E1")]
    # queen adds the diagonal pairs: 2 per grid cell corner, (4-1) * (3-1) corners
    assert s.contiguity == "queen" and inputs.adjacency.n_edges == 17 + 12


def test_population_points_barriers_and_bridges(tmp_path):
    units = town.town_units()
    c = shapely.centroid(units.geometry.to_numpy())
    units["px"] = shapely.get_x(c) + 200
    units["py"] = shapely.get_y(c) - 100
    toml = town.river_toml(tmp_path)  # a river between the west and east halves
    toml["units"].update(point_x="px", point_y="py")
    inputs = load_project(town.write_town(tmp_path, units=units, toml=toml))
    np.testing.assert_allclose(shapely.get_x(inputs.units["point"].to_numpy()),
                               units["px"].to_numpy())
    # the river cuts the 3 pairs across x; the bridge keeps the middle one (U06-U07)
    assert inputs.adjacency.n_edges == 17 - 2
    assert len(inputs.barriers) == 1 and len(inputs.bridges) == 1
    ids = inputs.units["unit_id"].tolist()
    assert ids.index("U07") in inputs.adjacency.neighbors(ids.index("U06"))
    assert ids.index("U03") not in inputs.adjacency.neighbors(ids.index("U02"))


def test_travel_matrix_fills_pairs_and_names_bad_rows(tmp_path):
    rows = ["unit_id,site_id,cost"] + [f"U{u:02d},{s},{100 * u}" for u in range(1, 13)
                                       for s in ("E1", "M1")]
    (tmp_path / "travel.csv").write_text("\n".join(rows) + "\n")
    toml = town.project_dict()
    toml["solve"]["travel_matrix"] = "travel.csv"
    inputs = load_project(town.write_town(tmp_path, toml=toml))
    assert inputs.travel.shape == (12, 3)
    assert inputs.travel[4, 0] == 500 and np.isinf(inputs.travel[:, 1]).all()

    (tmp_path / "travel.csv").write_text("\n".join(rows + ["U99,E1,5", "U01,E2,-1"]) + "\n")
    _, report = validate_project(tmp_path / "project.toml")
    texts = [(it.where, it.what) for it in report.errors]
    assert ("row 26", "unit_id is not a planning unit") in texts
    assert ("row 27", "cost is missing, not a number or negative") in texts


def test_open_count_and_shared_unit_checks(tmp_path):
    sites = town.town_sites()
    extra = sites.iloc[[0, 0]].copy()
    extra["site_id"] = ["E3", "E4"]
    extra["status"] = ["candidate", "open"]  # E4 open in U01 beside E1
    sites = gpd.GeoDataFrame(pd.concat([sites, extra], ignore_index=True), crs=town.CRS)
    toml = town.project_dict()
    toml["solve"]["open_count"] = {"elementary": 5}
    _, report = validate_project(town.write_town(tmp_path, sites=sites, toml=toml))
    whats = [it.what for it in report.errors]
    assert any("open_count for elementary is 5, but 3 sites are open" in w for w in whats)
    assert any("stand in the same planning unit (U01)" in w for w in whats)
    shared = next(it for it in report.errors if "same planning unit" in it.what)
    assert set(shared.ids) == {"E1", "E4"}


def test_load_project_raises_with_the_report(tmp_path):
    units = town.town_units()
    units.loc[3, "elementary_2027"] = -1.0
    with pytest.raises(ProjectError) as err:
        load_project(town.write_town(tmp_path, units=units))
    assert err.value.report.has_errors
    assert "U04" in str(err.value) and "elementary_2027" in str(err.value)
    with pytest.raises(ProjectError, match="does not exist"):
        load_project(tmp_path / "nothing.toml")


def test_summary_shows_students_sites_capacity_and_graph(tmp_path):
    inputs = load_project(town.write_town(tmp_path))
    text = check_summary(inputs)
    total = _count_table(town.town_units()).sum(axis=1)
    assert "12 planning units, 12.0 km2" in text and "all joined into one town; none alone" in text
    assert "".join(f"{v:>9,.0f}" for v in total) in text
    assert "2 sites (2 open); capacity open 1,000" in text
    assert f"{100 * total[1] / 1000:>8.0f}%" in text
    assert len(text.splitlines()) < 40


def test_readers_name_the_problem(tmp_path):
    units = town.town_units()
    town.write_layer(units, tmp_path / "t.gpkg", layer="a")
    town.write_layer(units, tmp_path / "t.gpkg", layer="b")
    with pytest.raises(ReadError) as err:
        read_layer(tmp_path / "t.gpkg")
    assert err.value.kind == "layer" and "several layers (a, b)" in str(err.value)
    assert len(read_layer(tmp_path / "t.gpkg", "b")) == 12
    with pytest.raises(ReadError, match="does not exist"):
        read_layer(tmp_path / "none.fgb")
    (tmp_path / "t.csv").write_bytes("\ufeffid;n\n007;3\n008;\n".encode())
    table = read_table(tmp_path / "t.csv")
    assert table.columns.tolist() == ["id", "n"]
    assert table["id"].tolist() == ["007", "008"] and table["n"].tolist() == ["3", ""]
    (tmp_path / "e.csv").write_text("")
    with pytest.raises(ReadError, match="empty"):
        read_table(tmp_path / "e.csv")


def test_demo_project_checks_clean(capsys):
    folder = DEMO.parent
    before = sorted((p.name, p.stat().st_mtime_ns) for p in folder.iterdir())
    assert check_command(DEMO) == 0
    out = capsys.readouterr().out
    assert "no problems found" in out and "planning units" in out
    assert sorted((p.name, p.stat().st_mtime_ns) for p in folder.iterdir()) == before
