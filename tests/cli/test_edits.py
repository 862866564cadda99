"""`districting lock / unlock / forbid / unforbid`: the project file edited in place.

The town is the invented 4 x 3 grid of tests/data/make_broken.py (units U01..U12, elementary
schools E1 and E2, middle school M1), plus a closed elementary school E3. Expected files
are written out by hand in each test.
"""

from __future__ import annotations

from pathlib import Path

import geopandas as gpd
import pandas as pd
import pytest
from test_cli import run_cli

from districting.intake import load_project
from districting.locks import EditRefused, _write

#: Comments, a forbid and a table after it: everything an edit must leave as it was.
EXTRA = """
# Board decisions (hand-written: keep this comment)
[[forbids]]   # the ford floods in spring
level = "elementary"
unit = "U05"
site = "E2"

[adjacency]
contiguity = "rook"   # rook: shared edges only
"""


@pytest.fixture
def project(tmp_path, town) -> Path:
    sites = town.town_sites()
    closed = sites.iloc[[0]].assign(site_id="E3", name="Old Mill Elementary", status="closed")
    sites = gpd.GeoDataFrame(pd.concat([sites, closed], ignore_index=True), crs=sites.crs)
    path = town.write_town(tmp_path / "town", sites=sites)
    path.write_bytes(path.read_bytes() + EXTRA.encode())
    return path


def pairs(path: Path, kind: str = "locks") -> set[tuple[str, str, str]]:
    return {(lk.level, lk.unit, lk.site) for lk in getattr(load_project(path).settings, kind)}


def test_lock_appends_and_unlock_restores_the_file_byte_for_byte(project):
    before = project.read_bytes()
    code, out, err = run_cli("lock", str(project.parent), "--level", "elementary", "U02",
                             "U03", "--school", "E1")
    assert code == 0, err
    assert "unit U02 locked to E1 (elementary)" in out
    after = project.read_bytes()
    assert after == before + (b'\n[[locks]]\nlevel = "elementary"\nunit = "U02"\nsite = "E1"\n'
                              b'\n[[locks]]\nlevel = "elementary"\nunit = "U03"\nsite = "E1"\n')
    assert pairs(project) == {("elementary", "U02", "E1"), ("elementary", "U03", "E1")}
    assert pairs(project, "forbids") == {("elementary", "U05", "E2")}

    code, out, err = run_cli("unlock", str(project), "--level", "elementary", "U02", "U03")
    assert code == 0, err
    assert project.read_bytes() == before
    assert pairs(project) == set()


def test_unlock_cuts_one_entry_and_keeps_the_comments_around_it(project):
    text = project.read_text() + (
        '\n[[locks]]\nlevel = "elementary"\nunit = "U02"\nsite = "E1"\n'
        '\n# U03 stays with Larkspur until 2030\n[[locks]]\nlevel = "elementary"\n'
        'unit = "U03"\nsite = "E1"\n'
        '\n[[locks]]  # hearing of May\nlevel = "middle"\nunit = "U03"\nsite = "M1"\n'
        '\n# last line\n')
    project.write_text(text)
    code, _, err = run_cli("unlock", str(project), "--level", "middle", "U03")
    assert code == 0, err
    assert project.read_text() == text.replace(
        '\n[[locks]]  # hearing of May\nlevel = "middle"\nunit = "U03"\nsite = "M1"\n', "")
    assert pairs(project) == {("elementary", "U02", "E1"), ("elementary", "U03", "E1")}

    code, _, err = run_cli("unlock", str(project), "--level", "elementary", "U03")
    assert code == 0, err
    assert "# U03 stays with Larkspur until 2030" in project.read_text()  # a comment stays
    assert pairs(project) == {("elementary", "U02", "E1")}


def test_forbid_and_unforbid(project):
    code, out, err = run_cli("forbid", str(project), "--level", "elementary", "U07",
                             "--school", "E1")
    assert code == 0, err
    assert pairs(project, "forbids") == {("elementary", "U05", "E2"), ("elementary", "U07", "E1")}
    code, out, err = run_cli("unforbid", str(project), "--level", "elementary", "U05")
    assert code == 0, err
    assert "unit U05 no longer forbidden from E2" in out
    assert pairs(project, "forbids") == {("elementary", "U07", "E1")}
    assert "# the ford floods in spring" not in project.read_text()  # went with its entry
    assert "# Board decisions (hand-written: keep this comment)" in project.read_text()


def test_a_lock_already_there_writes_nothing(project):
    assert run_cli("lock", str(project), "--level", "elementary", "U02", "--school", "E1")[0] == 0
    before, mtime = project.read_bytes(), project.stat().st_mtime_ns
    code, out, _ = run_cli("lock", str(project), "--level", "elementary", "U02", "--school", "E1")
    assert code == 0 and "already locked to E1" in out and "nothing to change" in out
    assert project.read_bytes() == before and project.stat().st_mtime_ns == mtime


@pytest.mark.parametrize("argv, words", [
    (("lock", "--level", "elementary", "U99", "--school", "E1"),
     ["unit 'U99' is not a planning unit"]),
    (("lock", "--level", "elementary", "u02", "--school", "E1"), ["did you mean U02?"]),
    (("lock", "--level", "elementary", "U02", "--school", "M1"),
     ["M1 (Corrow Middle) is a middle school, not elementary", "elementary schools: E1, E2"]),
    (("lock", "--level", "elementary", "U02", "--school", "E9"),
     ["school 'E9' is not in the sites layer"]),
    (("lock", "--level", "elementary", "U02", "--school", "E3"),
     ["E3 (Old Mill Elementary) is closed and takes no students"]),
    (("lock", "--level", "kindergarten", "U02", "--school", "E1"),
     ["level 'kindergarten' is not one of the project's levels"]),
    (("lock", "--level", "elementary", "U05", "--school", "E2"),
     ["unit U05 is forbidden from E2", "districting unforbid"]),
    (("unlock", "--level", "elementary", "U02"), ["unit U02 is not locked"]),
    (("unforbid", "--level", "elementary", "U05", "--school", "E1"),
     ["unit U05 is not forbidden from E1", "forbidden units there: U05"]),
])
def test_refused_edits_leave_the_file_as_it_was(project, argv, words):
    before, mtime = project.read_bytes(), project.stat().st_mtime_ns
    verb, *rest = argv
    code, _, err = run_cli(verb, str(project), *rest)
    assert code == 1
    assert "nothing was changed" in err
    for w in words:
        assert w in err
    assert project.read_bytes() == before and project.stat().st_mtime_ns == mtime
    assert not list(project.parent.glob(".tmp-*"))


def test_moving_a_locked_unit_says_how(project):
    assert run_cli("lock", str(project), "--level", "elementary", "U02", "--school", "E1")[0] == 0
    before = project.read_bytes()
    code, _, err = run_cli("lock", str(project), "--level", "elementary", "U02", "U03",
                           "--school", "E2")
    assert code == 1  # U03 alone would be fine: one refusal stops the whole edit
    assert "unit U02 is already locked to E1 (elementary)" in err
    assert f"districting unlock {project} --level elementary U02" in err
    code, _, err = run_cli("forbid", str(project), "--level", "elementary", "U02",
                           "--school", "E1")
    assert code == 1 and "unit U02 is locked to E1" in err
    assert project.read_bytes() == before


def test_an_edit_that_would_not_load_is_not_written(project):
    before, mtime = project.read_bytes(), project.stat().st_mtime_ns
    lines = project.read_text().splitlines(keepends=True)
    bad = lines + ['\n[[locks]]\nlevel = "elementary"\nunit = "U02"\nsite = "M1"\n']
    with pytest.raises(EditRefused, match="M1 is a middle site") as err:
        _write(project, "", bad)
    assert ".tmp-" not in str(err.value)  # the message names the project file
    assert project.read_bytes() == before and project.stat().st_mtime_ns == mtime
    assert not list(project.parent.glob(".tmp-*"))


def test_line_endings_and_byte_order_mark_are_kept(project):
    text = project.read_text().replace("\n", "\r\n")
    project.write_bytes(b"\xef\xbb\xbf" + text.encode())
    code, _, err = run_cli("lock", str(project), "--level", "elementary", "U02", "--school", "E1")
    assert code == 0, err
    assert project.read_bytes() == b"\xef\xbb\xbf" + (
        text + '\r\n[[locks]]\r\nlevel = "elementary"\r\nunit = "U02"\r\nsite = "E1"\r\n'
    ).encode()
    assert run_cli("unlock", str(project), "--level", "elementary", "U02")[0] == 0
    assert project.read_bytes() == b"\xef\xbb\xbf" + text.encode()


def test_check_finds_the_folders_project_file(project, tmp_path):
    code, out, _ = run_cli("check", str(project.parent))
    assert code == 0, out
    assert "12 planning units" in out
    other = tmp_path / "elsewhere"
    other.mkdir()
    (other / "town-2027.toml").write_text("")
    (other / "notes.toml").write_text("")
    code, out, err = run_cli("check", str(other))
    assert code == 1
    assert "holds no project.toml" in out + err
    assert "notes.toml, town-2027.toml" in out + err
    code, _, err = run_cli("lock", str(other), "--level", "elementary", "U02", "--school", "E1")
    assert code == 1 and "holds no project.toml" in err
    code, _, err = run_cli("serve", str(other))  # refused before any server starts
    assert code == 1 and "notes.toml, town-2027.toml" in err


def test_locks_written_as_an_inline_list_are_not_cut(project):
    project.write_text('locks = [{ level = "elementary", unit = "U02", site = "E1" }]\n'
                       + project.read_text())
    assert pairs(project) == {("elementary", "U02", "E1")}
    before, mtime = project.read_bytes(), project.stat().st_mtime_ns
    code, _, err = run_cli("unlock", str(project), "--level", "elementary", "U02")
    assert code == 1 and "write each as a [[locks]] table" in err
    assert project.read_bytes() == before and project.stat().st_mtime_ns == mtime
    code, _, err = run_cli("lock", str(project), "--level", "elementary", "U03", "--school", "E1")
    assert code == 1 and "the edited project would not load" in err  # TOML cannot add to it
    assert project.read_bytes() == before and project.stat().st_mtime_ns == mtime
