"""[walking] and [groups] in a project file, and the group counts read beside the counts.

The grid town of tests/data/make_broken.py: 12 units, elementary and middle counts for
2026-2028. Group counts are written by hand into its units layer.
"""

from __future__ import annotations

import importlib.util
from pathlib import Path

import numpy as np

from districting.intake import load_project, validate_project

DATA = Path(__file__).parents[1] / "data"
_spec = importlib.util.spec_from_file_location("make_broken", DATA / "make_broken.py")
town = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(town)


def group_project(tmp_path, units=None, groups=None):
    if units is None:
        units = town.town_units()
        for level in town.LEVELS:
            for year in (town.CURRENT, *town.YEARS):
                units[f"meal_{level}_{year}"] = np.floor(units[f"{level}_{year}"] / 4)
    toml = town.project_dict()
    toml["groups"] = groups or {"columns": ["meal_{level}_{year}"], "band_points": 15}
    toml["walking"] = {"distance": {"elementary": 1200, "middle": 2000}, "keep_walkers": True,
                       "max_transported": {"middle": 100}}
    return town.write_town(tmp_path, units=units, toml=toml)


def test_walking_and_group_settings_and_counts_are_read(tmp_path):
    inputs = load_project(group_project(tmp_path))
    s = inputs.settings
    assert s.walking.distance == {"elementary": 1200.0, "middle": 2000.0}
    assert s.walking.keep_walkers and s.walking.max_transported == {"middle": 100.0}
    assert s.groups.names == ("meal",) and s.groups.band_points == 15.0
    g = inputs.groups["middle"]
    assert g.shape == (1, 3, 12)
    # U05 (k = 4): middle 2027 = 20 + 4 + 1 = 25 students, a quarter rounded down = 6
    assert g[0, 1, 4] == 6.0


def test_the_default_walking_distances_apply_to_the_projects_levels(tmp_path):
    toml = town.project_dict()
    inputs = load_project(town.write_town(tmp_path, toml=toml))
    # common practice from memory (1.6 / 2.4 km); the town has no high level
    assert inputs.settings.walking.distance == {"elementary": 1600.0, "middle": 2400.0}
    assert inputs.groups == {}


def test_a_group_template_without_year_is_the_plan_year_only(tmp_path):
    units = town.town_units()
    units["meal_elementary"] = 1.0
    units["meal_middle"] = 2.0
    inputs = load_project(group_project(tmp_path, units,
                                        {"columns": ["meal_{level}"]}))
    g = inputs.groups["elementary"]
    plan_row = inputs.year_row(inputs.settings.plan_year)
    assert (g[0, plan_row] == 1.0).all()
    assert np.isnan(np.delete(g[0], plan_row, axis=0)).all()


def _errors(path):
    _, report = validate_project(path)
    return report.errors


def test_an_unknown_group_column_names_file_column_and_fix(tmp_path):
    errors = _errors(group_project(tmp_path, groups={"columns": ["meals_{level}_{year}"]}))
    hit = [e for e in errors if "meals_elementary_2026" in e.where]
    assert hit and hit[0].file.name == "units.geojson"
    assert "meals_elementary_2026" in hit[0].what
    assert "[groups] columns" in hit[0].fix and "meal_elementary_2026" in hit[0].fix


def test_a_negative_group_count_names_the_unit_and_fix(tmp_path):
    units = town.town_units()
    for level in town.LEVELS:
        for year in (town.CURRENT, *town.YEARS):
            units[f"meal_{level}_{year}"] = 1.0
    units.loc[2, "meal_middle_2028"] = -3.0
    errors = _errors(group_project(tmp_path, units))
    hit = [e for e in errors if "meal_middle_2028" in e.where]
    assert len(hit) == 1 and "U03" in hit[0].where and "negative" in hit[0].what
    assert "0 or more" in hit[0].fix


def test_a_group_count_above_the_units_students_is_refused(tmp_path):
    units = town.town_units()
    for level in town.LEVELS:
        for year in (town.CURRENT, *town.YEARS):
            units[f"meal_{level}_{year}"] = 0.0
    units.loc[6, "meal_elementary_2027"] = 1000.0  # U07 has 40 + 18 + 2 = 60 students
    errors = _errors(group_project(tmp_path, units))
    hit = [e for e in errors if "meal_elementary_2027" in e.where]
    assert len(hit) == 1 and "U07" in hit[0].where
    assert "1000 of 60" in hit[0].what and "at most" in hit[0].fix


def test_bad_walking_and_group_settings_are_refused(tmp_path):
    toml = town.project_dict()
    toml["walking"] = {"distance": {"primary": 1000, "middle": 0}, "keep_walkers": "yes",
                       "max_transported": {"middle": 50}}
    toml["groups"] = {"columns": ["meal_{year}"], "band_points": 150}
    errors = _errors(town.write_town(tmp_path, toml=toml))
    texts = [f"{e.where}: {e.what} / {e.fix}" for e in errors]
    assert any("[walking] distance" in t and "'primary'" in t for t in texts), texts
    assert any("keep_walkers must be true or false" in t for t in texts), texts
    assert any("band_points = 150" in t for t in texts), texts
    assert any("middle has no walking distance" in t for t in texts), texts
    assert any("{level}" in t and "meal_{year}" in t for t in texts), texts


def test_build_problem_carries_the_walk_zone_keep_walkers_cap_and_band(tmp_path):
    from districting.study import RunSettings, build_problem

    inputs = load_project(group_project(tmp_path))
    el, _ = build_problem(inputs, RunSettings(level="elementary", travel="straight-line"))
    # E1 stands in U01's centre (500, 500); U02's centre is 1,000 m away: within 1,200 m,
    # so keeping walkers forbids U02 the far school E2 (U02 is 2,828 m from E2's unit)
    assert el.walk[1].tolist() == [True, False]
    assert el.forbidden[1].tolist() == [False, True]
    assert el.max_transported is None  # a cap is set for middle only
    assert el.group_band == 0.15 and el.group_names == ("meal",)
    free, _ = build_problem(inputs, RunSettings(level="elementary", travel="straight-line",
                                                keep_walkers=False))
    assert not free.forbidden.any()
    mid, _ = build_problem(inputs, RunSettings(level="middle", travel="straight-line"))
    assert mid.max_transported == 100.0 and mid.walk is not None
