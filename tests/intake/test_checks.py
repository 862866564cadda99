"""The corpus of broken projects (tests/data/broken/): every problem gives its own message.

Each case names the file the message must name, an id that must appear where it points
(unit, site, row, column or key) and the key phrase. The check must print the report, exit
1 on errors (0 on warnings only) and write nothing (folder listing compared before/after).
"""

from __future__ import annotations

import importlib.util
from pathlib import Path

import numpy as np
import pytest

from districting.cli import check_command
from districting.intake import Report, validate_project

DATA = Path(__file__).parents[1] / "data"
BROKEN = DATA / "broken"

_spec = importlib.util.spec_from_file_location("make_broken", DATA / "make_broken.py")
make_broken = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(make_broken)

E, W = "error", "warning"
# folder -> [(severity, file name, text in where/ids, key phrase in what), ...]
CASES = {
    "missing_file": [(E, "no_such_units.gpkg", "", "does not exist")],
    "unreadable_file": [(E, "units.gpkg", "", "cannot be opened as a GIS layer")],
    "missing_layer": [(E, "town.gpkg", "schools", "no layer 'schools' (layers: units, sites)")],
    "missing_column": [(E, "sites.geojson", "[sites]",
                        "'capacity' (capacity) not found (columns: site_id, name, level, status)")],
    "no_crs": [(E, "units.fgb", "[units]", "no coordinate reference system")],
    "geographic_crs": [(W, "units.geojson", "[units]", "reprojected to EPSG:32633")],
    "invalid_geometry": [(W, "units.geojson", "U06", "1 invalid geometry repaired")],
    "empty_geometry": [(E, "units.geojson", "U07", "empty or missing geometry")],
    "duplicate_id": [(E, "units.geojson", "U07", "appears more than once")],
    "missing_id": [(E, "units.geojson", "feature 8", "no id in column unit_id")],
    "negative_count": [(E, "units.geojson", "middle_2028", "negative (-4)"),
                       (E, "units.geojson", "U03", "student count is negative")],
    "nonnumeric_count": [(E, "units.geojson", "U04", "not a number ('about 40')"),
                         (E, "units.geojson", "elementary_2027", "not a number")],
    "missing_count": [(E, "units.geojson", "U05", "student count is missing"),
                      (E, "units.geojson", "elementary_2028", "student count is missing")],
    "overlap": [(E, "units.geojson", "U05 & U06 (30%)", "units overlap")],
    "site_outside": [(E, "sites.geojson", "E2", "outside every planning unit (by 2,000 m)")],
    "bad_capacity": [(E, "sites.geojson", "E2", "capacity is missing"),
                     (E, "sites.geojson", "E1", "zero or negative (0, -50)"),
                     (E, "sites.geojson", "M1", "zero or negative")],
    "unknown_status": [(E, "sites.geojson", "E2", "unknown status 'reopening'")],
    "site_other_level": [(W, "sites.geojson", "P1", "'preschool' is not one of the project's")],
    "zone_unknown_site": [(E, "units.geojson", "U03", "'E9', which is not in the sites layer")],
    "zone_wrong_level": [(E, "units.geojson", "U04", "'M1', which is a middle site")],
    "lock_unknown": [(E, "project.toml", "U99", "unit 'U99' is not in the units layer"),
                     (E, "project.toml", "entry 2", "E2 is an elementary site, not middle"),
                     (E, "project.toml", "E7", "site 'E7' is not in the sites layer")],
    "island": [(W, "units.geojson", "U13", "no neighbour in the adjacency graph (an island)"),
               (W, "units.geojson", "adjacency graph", "2 separate pieces (sizes 12, 1)"),
               (E, "units.geojson", "U13", "holds no elementary site"),
               (E, "units.geojson", "U13", "holds no middle site")],
    "bad_links": [(E, "links.csv", "row 3", "not a planning unit"),
                  (E, "links.csv", "row 4", "action must be add or remove")],
    "over_capacity": [(E, "sites.geojson", "elementary 2028",
                       "1,080 elementary students in 2028 but the elementary sites")],
    "year_no_column": [(E, "units.geojson", "elementary_2029", "for year 2029"),
                       (E, "units.geojson", "middle_2029", "for year 2029")],
    "counts_csv": [(E, "counts.csv", "U07", "has no row for the unit"),
                   (E, "counts.csv", "U03", "appears more than once"),
                   (W, "counts.csv", "U99", "not in the units layer are ignored")],
    "bad_toml": [(E, "project.toml", "line 3, column 21", "not valid TOML")],
    "toml_windows_path": [(E, "project.toml", "line 19", "Unescaped '\\' in a string")],
    "misspelt_setting": [(E, "project.toml", "[solve] max_utilisation",
                          "unknown key max_utilisation in [solve]")],
    "utilization_percent": [(E, "project.toml", "[solve] max_utilization",
                             "max_utilization = 90, which is out of range")],
    "empty_sites": [(E, "town.gpkg", "[sites]", "the sites layer has no features")],
    "empty_units": [(E, "town.gpkg", "[units]", "the units layer has no features")],
    "degrees_as_metres": [(E, "units.geojson", "[units]",
                           "look like longitude/latitude degrees")],
    "sites_degrees_as_metres": [(E, "sites.geojson", "[sites]",
                                 "look like longitude/latitude degrees")],
    "sites_other_crs": [(W, "sites.geojson", "[sites]",
                         "in EPSG:3857 (WGS 84 / Pseudo-Mercator) but the units are in "
                         "EPSG:32633")],
    "empty_barriers": [(W, "river.geojson", "[barriers]", "no features, so no adjacency is cut")],
    "unicode_twin_ids": [(E, "units.geojson", "\u00dc05",
                          "composed and once with decomposed accents")],
    "case_twin_ids": [(W, "units.geojson", "U05/u05", "differ only in upper/lower case")],
    "site_util_percent": [(E, "sites.geojson", "E2", "share of capacity from 0 to 2 (95)")],
    "bad_settings": [(E, "project.toml", "plan_year", "2035 is not one of the projected years"),
                     (E, "project.toml", "contiguity", "'hexagon' is not one of"),
                     (E, "project.toml", "min_utilization", "out of range (from 0 to 1)"),
                     (E, "project.toml", "[solve] gapp", "unknown key gapp")],
}
# problems that must not appear as consequences of another one
NOT_EXPECTED = {
    "bad_capacity": "students in",  # no capacity balance on top of the capacity errors
    "year_no_column": "minimum utilization",
    "unknown_status": "students in",
    "bad_settings": "the site's minimum utilization",
    "sites_degrees_as_metres": "outside every planning unit",  # a consequence
}


def _listing(folder: Path) -> list[tuple[str, int, int]]:
    return sorted((str(p.relative_to(folder)), p.stat().st_size, p.stat().st_mtime_ns)
                  for p in folder.rglob("*"))


def _matches(item, severity, file, where, phrase) -> bool:
    place = " ".join([item.where, *item.ids])
    return (item.severity == severity and item.file is not None and item.file.name == file
            and where in place and phrase in item.what)


def test_every_problem_has_a_case():
    assert sorted(CASES) == sorted(make_broken.CASES.keys() - {"island_linked"})
    assert sorted(p.name for p in BROKEN.iterdir()) == sorted(make_broken.CASES)


@pytest.mark.parametrize("case", sorted(CASES))
def test_broken_case(case, capsys):
    folder = BROKEN / case
    inputs, report = validate_project(folder / "project.toml")
    for severity, file, where, phrase in CASES[case]:
        assert any(_matches(it, severity, file, where, phrase) for it in report), (
            f"{case}: no {severity} on {file} at {where!r} saying {phrase!r}\n"
            + report.format())
    if case in NOT_EXPECTED:
        assert not any(NOT_EXPECTED[case] in it.what for it in report), report.format()
    errors = any(sev == E for sev, *_ in CASES[case])
    assert report.has_errors == errors
    assert (inputs is None) == errors
    for it in report:  # every item says how to fix it
        assert it.fix

    before = _listing(folder)
    code = check_command(folder / "project.toml")
    out = capsys.readouterr().out
    assert _listing(folder) == before  # the check writes nothing
    assert code == (1 if errors else 0)
    first = CASES[case][0]
    assert first[3] in out and first[1] in out
    if errors:
        assert out.index("ERRORS") < out.find("WARNINGS") or "WARNINGS" not in out


def test_linked_island_is_clean(capsys):
    folder = BROKEN / "island_linked"
    inputs, report = validate_project(folder / "project.toml")
    assert len(report) == 0, report.format()
    adj = inputs.adjacency
    assert adj.n_components == 1
    u13, u01 = adj.index("U13"), adj.index("U01")
    assert u01 in adj.neighbors(u13)
    assert check_command(folder / "project.toml") == 0
    assert "no problems found" in capsys.readouterr().out


def test_corpus_matches_its_generator(tmp_path):
    """The committed corpus is what tests/data/make_broken.py writes (project files)."""
    for name, build in make_broken.CASES.items():
        folder = tmp_path / name
        folder.mkdir()
        build(folder)
        assert sorted(p.name for p in folder.iterdir()) == sorted(
            p.name for p in (BROKEN / name).iterdir()), name
        assert (folder / "project.toml").read_text() == (
            BROKEN / name / "project.toml").read_text(), name


def test_report_groups_errors_first():
    r = Report("p.toml")
    r.warning("b.gpkg", "unit U2", "second", "fix it")
    r.error("a.gpkg", "unit U1", "first", "fix that")
    r.error("b.gpkg", "row 3", "third", "fix this")
    text = r.format()
    assert text.splitlines()[0] == "p.toml: 2 errors, 1 warning"
    assert text.index("first") < text.index("third") < text.index("second")
    assert text.index("ERRORS") < text.index("WARNINGS")
    assert [it.what for it in r.errors] == ["first", "third"]
    with pytest.raises(ValueError):
        r.add("fatal", None, "", "bad severity")


def test_overlap_share_is_measured_not_flagged_on_touching_units():
    """Touching squares are not overlaps; a 0.5% sliver is tolerated, 5% is not."""
    import shapely

    from districting.intake.checks import check_overlaps

    squares = np.array([shapely.box(0, 0, 1, 1), shapely.box(1, 0, 2, 1),
                        shapely.box(1.995, 0, 3, 1), shapely.box(2.95, 0, 4, 1)])
    r = Report()
    pairs = check_overlaps(r, "u.gpkg", squares, ["A", "B", "C", "D"])
    assert pairs.tolist() == [[2, 3]]
    assert "C & D (5%)" in r.items[0].where
