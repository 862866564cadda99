"""A project with [streets]: travel along them by default, checked by hand on the test town
(4 x 3 grid of 1 km units; streets through the unit centres, so travel between centres is
the Manhattan distance), and the units and sites the checks must name."""

from __future__ import annotations

import importlib.util
import warnings
from pathlib import Path

import geopandas as gpd
import numpy as np
import pytest
import shapely

from districting.intake import load_project, validate_project
from districting.study import RunSettings, build_problem
from districting.travel.cache import CACHE_FOLDER

DATA = Path(__file__).parents[1] / "data"
_spec = importlib.util.spec_from_file_location("make_broken", DATA / "make_broken.py")
town = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(town)

CENTRES_X = town.X0 + 500 + 1000 * np.arange(town.COLS)
CENTRES_Y = town.Y0 + 500 + 1000 * np.arange(town.ROWS)


def street_grid(gap: tuple[float, float] | None = None) -> gpd.GeoDataFrame:
    """Streets through the unit centres; ``gap`` (x0, x1): no street crosses that strip."""
    lines = [shapely.LineString([(x, y) for y in CENTRES_Y]) for x in CENTRES_X]
    for y in CENTRES_Y:
        xs = list(CENTRES_X)
        if gap is None:
            lines.append(shapely.LineString([(x, y) for x in xs]))
        else:
            lines.append(shapely.LineString([(x, y) for x in xs if x < gap[0]]))
            lines.append(shapely.LineString([(x, y) for x in xs if x > gap[1]]))
    return gpd.GeoDataFrame(geometry=lines, crs=town.CRS)


def write(tmp_path, streets: gpd.GeoDataFrame, **streets_keys) -> Path:
    town.write_layer(streets, tmp_path / "streets.gpkg")
    toml = town.project_dict()
    toml["streets"] = {"source": "streets.gpkg", **streets_keys}
    return town.write_town(tmp_path, toml=toml)


def test_streets_are_the_default_travel_and_manhattan_on_the_grid(tmp_path):
    inputs = load_project(write(tmp_path, street_grid()))
    assert inputs.settings.solve.travel == "streets"
    pts = shapely.get_coordinates(inputs.units["point"].to_numpy())
    site_xy = shapely.get_coordinates(inputs.sites.geometry.to_numpy())
    manhattan = np.abs(pts[:, None, :] - site_xy[None, :, :]).sum(-1)  # worked by hand
    np.testing.assert_allclose(inputs.travel_metres("streets"), manhattan)
    assert list((tmp_path / CACHE_FOLDER).glob("travel-*.npz"))
    problem, _ = build_problem(inputs, RunSettings(level="elementary"))
    np.testing.assert_allclose(problem.distance, manhattan[:, :2])
    np.testing.assert_allclose(problem.cost, manhattan[:, :2])
    straight, _ = build_problem(inputs, RunSettings(level="elementary", travel="straight-line"))
    np.testing.assert_allclose(straight.distance, np.hypot(*(pts[:, None, :]
                                                             - site_xy[None, :2, :]).T).T)
    # max_distance applies along the chosen measure: U04 is 3 km east of E1 along the
    # street (and in a straight line), U08 is 3.16 km away in a straight line, 4 km by street
    limited, _ = build_problem(inputs, RunSettings(level="elementary", max_distance=3500))
    ids = inputs.units["unit_id"].tolist()
    assert not limited.forbidden[ids.index("U04"), 0] and limited.forbidden[ids.index("U08"), 0]


def test_river_without_crossing_names_the_units_it_strands(tmp_path):
    """No street crosses x = 2 km: the east half reaches the elementary school E2 but no
    middle school (M1 stands in the west), so those units are named with the fix."""
    _, report = validate_project(write(tmp_path, street_grid(gap=(town.X0 + 1600,
                                                                  town.X0 + 2400))))
    east = {"U03", "U04", "U07", "U08", "U11", "U12"}
    stranded = [it for it in report.errors if "no street path" in it.what]
    assert len(stranded) == 1 and "middle school" in stranded[0].what
    assert set(stranded[0].ids) == east and "shared vertex" in stranded[0].fix
    pieces = [it for it in report.warnings if "not joined to the main network" in it.what]
    assert len(pieces) == 1 and set(pieces[0].ids) == east | {"E2"}


def test_units_and_sites_far_from_streets_are_named(tmp_path):
    one_street = gpd.GeoDataFrame(geometry=[shapely.LineString(
        [(x, CENTRES_Y[0]) for x in CENTRES_X])], crs=town.CRS)
    inputs, report = validate_project(write(tmp_path, one_street, max_access=600.0))
    far = [it for it in report.warnings if "from the nearest street" in it.what]
    assert [set(it.ids) for it in far] == [{f"U{k:02d}" for k in range(5, 13)}, {"E2", "M1"}]
    assert "1,000 m" in far[0].what or "2,000 m" in far[0].what
    # the access leg is counted: U05 (1 km north of U01's street) to E1 in U01
    ids = inputs.units["unit_id"].tolist()
    assert inputs.travel_metres("streets")[ids.index("U05"), 0] == pytest.approx(1000.0)


@pytest.mark.parametrize("case", ["points", "empty", "no crs"])
def test_bad_street_layers_are_refused_with_a_fix(tmp_path, case):
    if case == "points":
        frame = gpd.GeoDataFrame(geometry=[shapely.LineString([(town.X0, town.Y0),
                                                               (town.X0 + 10, town.Y0)]),
                                           shapely.Point(town.X0, town.Y0)], crs=town.CRS)
        want = ("features 2", "must be lines")
    elif case == "empty":
        frame = gpd.GeoDataFrame(geometry=gpd.GeoSeries([], crs=town.CRS))
        want = ("[streets]", "no lines")
    else:
        frame = street_grid().set_crs(None, allow_override=True)
        want = ("[streets]", "no coordinate reference system")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)
        _, report = validate_project(write(tmp_path, frame))
    hits = [it for it in report.errors if it.where == want[0] and want[1] in it.what]
    assert hits and hits[0].fix and hits[0].file.name == "streets.gpkg"


def test_streets_travel_needs_a_streets_table(tmp_path):
    toml = town.project_dict()
    toml["solve"]["travel"] = "streets"
    _, report = validate_project(town.write_town(tmp_path, toml=toml))
    assert any("no [streets] table" in it.what for it in report.errors)
    toml["solve"]["travel"] = "straight-line"
    inputs = load_project(town.write_town(tmp_path, toml=toml))
    assert inputs.settings.solve.travel == "straight-line"


def test_runs_saved_before_travel_measures_reopen_in_straight_lines(tmp_path):
    """Options stored before runs named a measure were made with straight lines."""
    inputs = load_project(write(tmp_path, street_grid()))
    old = RunSettings(level="elementary").to_dict()
    del old["travel"]
    reopened = RunSettings.from_dict(old)
    assert reopened.travel == "straight-line"
    assert RunSettings.from_dict(RunSettings(level="elementary").to_dict()).travel is None
    problem, _ = build_problem(inputs, reopened)
    pts = shapely.get_coordinates(inputs.units["point"].to_numpy())
    e1 = shapely.get_coordinates(inputs.sites.geometry.to_numpy())[0]
    np.testing.assert_allclose(problem.distance[:, 0], np.hypot(*(pts - e1).T))


def test_check_writes_no_cache_and_loading_does(tmp_path, capsys):
    from districting.cli import check_command

    path = write(tmp_path, street_grid())
    assert check_command(path) == 0
    assert "Travel: along streets" in capsys.readouterr().out
    assert not (tmp_path / CACHE_FOLDER).exists()
    load_project(path)
    assert len(list((tmp_path / CACHE_FOLDER).glob("travel-*.npz"))) == 1


def test_barrier_aware_travel_on_inputs_goes_round_the_river(tmp_path):
    """Without streets the default is barrier-aware: a river along x = 2 km with one bridge;
    travel is never shorter than the straight line, and longer for pairs across the river
    away from the bridge (the triangle inequality through the bridge, by hand)."""
    pytest.importorskip("districting.travel.barriers")
    inputs = load_project(town.write_town(tmp_path, toml=town.river_toml(tmp_path)))
    x, y = town.RIVER_X, town.BRIDGE_Y
    assert inputs.settings.solve.travel == "barrier-aware"
    got = inputs.travel_metres("barrier-aware")
    pts = shapely.get_coordinates(inputs.units["point"].to_numpy())
    site_xy = shapely.get_coordinates(inputs.sites.geometry.to_numpy())
    straight = np.hypot(*(pts[:, None, :] - site_xy[None, :, :]).transpose(2, 0, 1))
    assert (got >= straight - 1e-6).all()
    ids = inputs.units["unit_id"].tolist()
    via_bridge = np.hypot(*(pts[ids.index("U04")] - (x, y))) + np.hypot(*(site_xy[0] - (x, y)))
    assert got[ids.index("U04"), 0] >= via_bridge - 1e-6  # U04 (east) to E1 (west)
    assert inputs.travel_metres("barrier-aware") is got  # once per load
    assert list((tmp_path / CACHE_FOLDER).glob("travel-*.npz"))


def test_verify_checks_the_longest_trip_along_the_runs_measure(tmp_path):
    """U04 -> E1 is 3 km by street and in a straight line, U08 -> E1 4 km by street but
    3.16 km straight (worked by hand): with a 3.5 km limit the checker names U08 only."""
    from districting.study import outcome_from_assignment
    from districting.verify import check_plan, facts_of_outcome

    inputs = load_project(write(tmp_path, street_grid()))
    ids = inputs.units["unit_id"].tolist()
    a = np.zeros(len(ids), np.int64)  # everyone to E1
    rs = RunSettings(level="elementary", max_distance=3500, min_utilization=0.0,
                     max_utilization=2.0)
    findings = check_plan(facts_of_outcome(outcome_from_assignment(inputs, rs, a)), a)
    far = {ids[f.unit] for f in findings if f.rule == "distance"}
    assert "U08" in far and "U04" not in far
    straight = rs.replace(travel="straight-line")
    findings = check_plan(facts_of_outcome(outcome_from_assignment(inputs, straight, a)), a)
    assert "U08" not in {ids[f.unit] for f in findings if f.rule == "distance"}
