"""The fuzz corpus of refused inputs: every one is told, none is half-done.

Three sets: broken settings (a mutation of the town's project file each), TOML syntax
errors, and every broken project of tests/data/broken/. Each goes through every command
that loads a project (`districting check`, `solve`, `options`, `packet`; `serve` and `demo`
load through the same `load_project`), and must end with a clear
message (the file, the table and key / row / unit, and the fix), exit 1, no traceback, and
nothing written or changed in the project folder (names, sizes and modification times
compared before and after).
"""

from __future__ import annotations

import importlib.util
import io
from contextlib import redirect_stderr, redirect_stdout
from pathlib import Path

import pytest

from districting.cli import main

DATA = Path(__file__).parents[1] / "data"
_spec = importlib.util.spec_from_file_location("make_broken", DATA / "make_broken.py")
town = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(town)


def _listing(folder: Path) -> list[tuple[str, int, int]]:
    return sorted((str(p.relative_to(folder)), p.stat().st_size, p.stat().st_mtime_ns)
                  for p in folder.rglob("*"))


def _run(*argv: str) -> tuple[int, str]:
    out, err = io.StringIO(), io.StringIO()
    with redirect_stdout(out), redirect_stderr(err):
        try:
            code = main(list(argv))
        except SystemExit as stop:  # the loader's refusal
            code = stop.code
    return code, out.getvalue() + err.getvalue()


def _refused(path: Path, *needles: str) -> str:
    """Every command that loads ``path`` refuses it, says ``needles``, writes nothing."""
    folder = path.parent
    before = _listing(folder)
    for command, *extra in (("check",), ("solve",), ("options",),
                            ("packet", "--options", "a", "--out", str(folder / "p.pdf"))):
        code, text = _run(command, str(path), *extra)
        assert code == 1, f"{command}: exit {code}\n{text}"
        assert "Traceback" not in text
        for needle in needles:
            assert needle in text, f"{command}: {needle!r} not in\n{text}"
        assert "fix:" in text
    assert _listing(folder) == before, "a refused project had files written or changed"
    return text


def _set(table: str, key: str, value):
    def change(t):
        t.setdefault(table, {})[key] = value
    return change


def _drop(table: str, key: str | None = None):
    def change(t):
        if key is None:
            del t[table]
        else:
            del t[table][key]
    return change


def _both(*changes):
    def change(t):
        for c in changes:
            c(t)
    return change


# name -> (change to the town's project dict, [texts the message must hold])
SETTINGS = {
    "misspelt_key": (_set("solve", "max_utilisation", 0.9),
                     ["[solve] max_utilisation", "did you mean max_utilization?"]),
    "key_in_capitals": (_set("solve", "Max_Utilization", 0.9), ["did you mean max_utilization?"]),
    "key_run_together": (_set("solve", "timelimit", 30), ["did you mean time_limit?"]),
    "key_in_wrong_table": (_set("project", "time_limit", 30),
                           ["time_limit is a key of [solve]: move it there"]),
    "misspelt_table": (lambda t: t.update(solver={"gap": 0.01}),
                       ["unknown table [solver]", "did you mean [solve]?"]),
    "singular_locks": (lambda t: t.update(lock=[{"level": "elementary", "unit": "U01",
                                                 "site": "E1"}]), ["did you mean [[locks]]?"]),
    "misspelt_source": (lambda t: t["sites"].update(sorce=t["sites"].pop("source")),
                        ["did you mean source?", "[sites] source: source is not given"]),
    "utilization_as_percent": (_set("solve", "max_utilization", 90),
                               ["write max_utilization = 0.9 for 90%"]),
    "utilization_zero": (_set("solve", "max_utilization", 0), ["above 0 and at most 2"]),
    "utilization_negative": (_set("solve", "max_utilization", -1.0), ["out of range"]),
    "min_util_as_percent": (_set("solve", "min_utilization", 60),
                            ["write min_utilization = 0.6 for 60%"]),
    "min_above_max": (_both(_set("solve", "min_utilization", 0.9),
                            _set("solve", "max_utilization", 0.8)),
                      ["min_utilization 0.9 is above max_utilization 0.8"]),
    "gap_one": (_set("solve", "gap", 1), ["gap = 1, which is out of range (at least 0 and "
                                          "below 1)"]),
    "gap_negative": (_set("solve", "gap", -0.1), ["[solve] gap"]),
    "time_limit_negative": (_set("solve", "time_limit", -5), ["time_limit = -5", "at least 0"]),
    "time_limit_text": (_set("solve", "time_limit", "60"),
                        ["time_limit must be a number, not '60'", "time_limit = 60.0"]),
    "utilization_bool": (_set("solve", "max_utilization", True),
                         ["max_utilization must be a number"]),
    "utilization_nan": (_set("solve", "max_utilization", float("nan")),
                        ["max_utilization must be a number"]),
    "utilization_inf": (_set("solve", "max_utilization", float("inf")),
                        ["max_utilization must be a number"]),
    "stability_negative": (_set("solve", "stability_weight", -100), ["stability_weight"]),
    "max_moved_negative": (_set("solve", "max_moved", -1), ["max_moved = -1"]),
    "distance_negative": (_set("solve", "max_distance", {"middle": -5}),
                          ["max_distance holds -5", "at least 0"]),
    "distance_unknown_level": (_set("solve", "max_distance", {"midle": 4000}),
                               ["level 'midle' is not one of", "did you mean middle?"]),
    "distance_not_a_table": (_set("solve", "max_distance", 4000),
                             ["max_distance must be a table of level = number"]),
    "open_count_fraction": (_set("solve", "open_count", {"elementary": 1.5}),
                            ["a table of level = whole number"]),
    "open_count_zero": (_set("solve", "open_count", {"elementary": 0}), ["at least 1"]),
    "contiguity_unknown": (_set("adjacency", "contiguity", "hexagon"),
                           ["'hexagon' is not one of \"rook\" or \"queen\""]),
    "contiguity_typo": (_set("adjacency", "contiguity", "rok"), ['write contiguity = "rook"']),
    "year_as_text": (_set("project", "current_year", "2026"),
                     ["current_year must be a whole number"]),
    "year_in_short": (_set("project", "current_year", 26), ["write the year in full"]),
    "years_in_short": (_set("project", "years", [27, 28]), ["write the year in full"]),
    "years_empty": (_set("project", "years", []), ["years must be a list of years"]),
    "years_twice": (_set("project", "years", [2027, 2027]), ["a year is listed twice"]),
    "years_before_current": (_set("project", "years", [2025, 2027]),
                             ["projected years must come after current_year 2026"]),
    "plan_year_elsewhere": (_set("project", "plan_year", 2035),
                            ["plan_year 2035 is not one of the projected years"]),
    "level_twice": (_set("project", "levels", ["elementary", "elementary"]),
                    ["a level is named twice"]),
    "levels_not_a_list": (_set("project", "levels", "elementary"),
                          ["levels must be a list of names"]),
    "counts_template": (_set("units", "counts", "{level}"), ["must contain {year}"]),
    "one_point_column": (_set("units", "point_x", "px"), ["give both point columns or neither"]),
    "source_empty": (_set("units", "source", ""), ["[units] source: source is empty"]),
    "table_as_value": (lambda t: t.update(units="units.geojson"),
                       ["units must be a table, not a single value"]),
    "sites_missing": (_drop("sites"), ["the [sites] table is missing"]),
    "current_year_missing": (_drop("project", "current_year"),
                             ["current_year is not given", "current_year = 2027"]),
    "locks_as_table": (lambda t: t.update(locks={"level": "elementary", "unit": "U01",
                                                 "site": "E1"}),
                       ["locks must be an array of tables"]),
    "lock_without_site": (lambda t: t.update(locks=[{"level": "elementary", "unit": "U01"}]),
                          ["[[locks]] entry 1 site: site is not given"]),
    "lock_extra_key": (lambda t: t.update(locks=[{"level": "elementary", "unit": "U01",
                                                  "site": "E1", "school": "E1"}]),
                       ["unknown key school in [[locks]] entry 1"]),
    "zone_columns_numbers": (_set("zones", "columns", {"elementary": 5}),
                             ["a table of level = column name"]),
    "solver_number": (_set("solve", "solver", 3), ["solver must be text"]),
    "id_column_list": (_set("sites", "id", ["a"]), ["[sites] id", "id must be text"]),
    "solve_as_value": (lambda t: t.update(solve=5), ["solve must be a table"]),
    "utilization_as_table": (_set("solve", "max_utilization", {"x": 1}),
                             ["max_utilization must be a number"]),
}


@pytest.mark.parametrize("case", sorted(SETTINGS))
def test_bad_setting_is_refused_before_anything_is_written(case, tmp_path):
    change, needles = SETTINGS[case]
    toml = town.project_dict()
    change(toml)
    path = town.write_town(tmp_path, toml=toml)
    _refused(path, "project.toml", *needles)


# name -> (edit of the town's TOML text, line named, text of the fix)
SYNTAX = {
    "unterminated_string": (lambda s: s.replace('invented test data)"', "invented test data)"),
                            "line 2", "close the text with the same quote"),
    "unquoted_text": (lambda s: s + 'solver = highs\n', "line", 'solver = "highs"'),
    "unquoted_number_word": (lambda s: s.replace("max_utilization = 1.0", "max_utilization = "
                                                 "full"), "line", "max_utilization takes a "
                             "number, e.g. max_utilization = 1.0"),
    "decimal_comma": (lambda s: s.replace("min_utilization = 0.3", "min_utilization = 0,3"),
                      "line", "decimals with a dot"),
    "capital_true": (lambda s: s.replace('name = "name"', "name = True"), "line",
                     "true or false in lower case"),
    "key_twice": (lambda s: s + "max_utilization = 0.9\n", "line", "a key is written twice"),
    "table_twice": (lambda s: s + "\n[solve]\ngap = 0.01\n", "line", "a table is written twice"),
    "missing_equals": (lambda s: s + "gap 0.01\n", "line", "key = value"),
    "unclosed_list": (lambda s: s.replace("2028,\n]", "2028,\n"), "line 8",
                      "the list opened on line 4 is not closed: end it with ]"),
    "unclosed_header": (lambda s: s.replace("[solve]", "[solve"), "line",
                        "close the table header"),
    "unclosed_inline": (lambda s: s + "max_distance = { middle = 4000\n", "line",
                        "close the { } on the same line"),
    "windows_path": (lambda s: s.replace('"sites.geojson"', r'"C:\data\sites.geojson"'),
                     "line", "forward slashes"),
    "two_values": (lambda s: s.replace("current_year = 2026", "current_year = 2026 2027"),
                   "line 3, column 21", "current_year takes one value"),
    "years_without_brackets": (lambda s: s + "plan_year = 2027 2028\n", "line",
                               "plan_year takes one value"),
}


@pytest.mark.parametrize("case", sorted(SYNTAX))
def test_toml_syntax_error_names_the_line_and_a_fitting_fix(case, tmp_path):
    edit, line, fix = SYNTAX[case]
    path = town.write_town(tmp_path)
    text = path.read_text()
    broken = edit(text)
    assert broken != text
    path.write_text(broken)
    out = _refused(path, "project.toml", "not valid TOML", line, fix)
    assert "correct the syntax at the line and column named" not in out  # not the generic


def test_a_file_that_is_not_utf8_is_named(tmp_path):
    path = town.write_town(tmp_path)
    path.write_bytes(path.read_bytes().replace(b"Grid Town", "Gr\u00fcn Town".encode("latin-1")))
    _refused(path, "project.toml", "not UTF-8", "save the file as UTF-8")


_BROKEN = sorted(p.name for p in (DATA / "broken").iterdir()
                 if (p / "project.toml").is_file())
_ERRORS = [c for c in _BROKEN if c not in {"geographic_crs", "invalid_geometry", "island_linked",
                                            "site_other_level", "sites_other_crs",
                                            "empty_barriers", "case_twin_ids"}]


@pytest.mark.parametrize("case", _ERRORS)
def test_broken_project_is_refused_by_solve_too(case, tmp_path):
    """Every broken project of the corpus: check and solve refuse, write nothing."""
    import shutil

    folder = tmp_path / case
    shutil.copytree(DATA / "broken" / case, folder)
    _refused(folder / "project.toml", "fix:")


def test_the_corpus_is_large():
    assert len(SETTINGS) + len(SYNTAX) + 1 + len(_ERRORS) >= 50


@pytest.mark.parametrize("argv,phrase", [
    (["--max-util", "90"], "--max-util 0.9 for 90%"),
    (["--min-util", "-0.2"], "--min-util -0.2"),
    (["--gap", "1.5"], "below 1"),
    (["--time-limit", "-1"], "--time-limit -1"),
    (["--max-distance", "-100"], "0 or more"),
])
def test_command_line_settings_obey_the_schema(argv, phrase, tmp_path):
    """`solve --max-util 90` is refused like max_utilization = 90 in the file."""
    path = town.write_town(tmp_path)
    before = _listing(tmp_path)
    code, text = _run("solve", str(path), *argv)
    assert code == 2 and phrase in text and "Traceback" not in text, text
    assert _listing(tmp_path) == before


def test_a_lock_in_the_wrong_case_names_the_id_meant(tmp_path):
    toml = town.project_dict()
    toml["locks"] = [{"level": "elementary", "unit": "u02", "site": "e1"}]
    path = town.write_town(tmp_path, toml=toml)
    _refused(path, "unit 'u02' is not in the units layer", "did you mean U02?",
             "did you mean E1?")


def test_ids_typed_composed_match_data_stored_decomposed(tmp_path):
    """A lock typed as 'Ü05' (one character) finds the unit stored as 'U' + combining mark."""
    from districting.intake import load_project

    units = town.town_units()
    units.loc[4, "unit_id"] = "U\u030805"
    toml = town.project_dict()
    toml["locks"] = [{"level": "elementary", "unit": "\u00dc05", "site": "E1"}]
    inputs = load_project(town.write_town(tmp_path, units=units, toml=toml))
    assert not inputs.report.has_errors
    assert inputs.units["unit_id"][4] == "\u00dc05"
    assert inputs.settings.locks[0].unit == "\u00dc05"


def test_a_distance_in_kilometres_is_warned(tmp_path):
    from districting.intake import validate_project

    toml = town.project_dict()
    toml["solve"]["max_distance"] = {"middle": 4}
    _inputs, report = validate_project(town.write_town(tmp_path, toml=toml))
    (item,) = [it for it in report.warnings if "max_distance" in it.where]
    assert "4 m" in item.what and "write 4000 for 4 km" in item.fix


def test_barriers_in_degrees_under_a_metre_label_are_refused(tmp_path):
    import geopandas as gpd
    import shapely

    x = town.X0 + 2000
    river = gpd.GeoDataFrame(geometry=[shapely.LineString([(x, town.Y0 - 10),
                                                           (x, town.Y0 + 3010)])], crs=town.CRS)
    town.write_layer(river.to_crs(4326).set_crs(town.CRS, allow_override=True),
                     tmp_path / "river.geojson")
    toml = town.project_dict()
    toml["barriers"] = {"source": "river.geojson"}
    path = town.write_town(tmp_path, toml=toml)
    _refused(path, "river.geojson", "[barriers]: the barriers coordinates",
             "look like longitude/latitude degrees", "assign EPSG:4326")
