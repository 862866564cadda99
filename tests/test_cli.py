"""The `districting` command end to end on a copy of the demo town.

Runs the console entry point in-process (districting.cli.main) so the suite stays fast; the
README's demo command is exercised by test_demo_command.
"""

from __future__ import annotations

import io
from contextlib import redirect_stderr, redirect_stdout

import geopandas as gpd
import pandas as pd
import pytest

from districting import DRAFT_NOTICE
from districting.cli import main
from districting.demo import copy_demo
from districting.outputs.console import Progress
from districting.plan import Round


def run_cli(*argv: str) -> tuple[int, str, str]:
    out, err = io.StringIO(), io.StringIO()
    with redirect_stdout(out), redirect_stderr(err):
        code = main(list(argv))
    return code, out.getvalue(), err.getvalue()


@pytest.fixture(scope="module")
def project(tmp_path_factory):
    return copy_demo(tmp_path_factory.mktemp("cli") / "demo")


def test_check_demo_is_clean(project):
    code, out, _ = run_cli("check", str(project))
    assert code == 0
    assert "no problems found" in out
    assert "1,557 planning units" in out


def test_check_names_the_problem_and_fails(tmp_path):
    bad = copy_demo(tmp_path / "bad")
    text = bad.read_text()
    units_table = '[units]\nsource = "town.gpkg"'
    bad.write_text(text.replace(units_table, '[units]\nsource = "missing.gpkg"'))
    assert "missing.gpkg" in bad.read_text()
    code, out, err = run_cli("check", str(bad))
    assert code == 1
    assert "missing.gpkg" in out + err


def test_solve_save_list_packet(project, tmp_path):
    out_dir = tmp_path / "out"
    code, out, _ = run_cli("solve", str(project), "--level", "high", "--save", "high-a",
                           "--out", str(out_dir), "--time-limit", "60")
    assert code == 0, out
    assert "high: best possible plan" in out
    assert not any(word in out for word in ("optimal", "rounds", "cuts", "bound", "gap "))
    units = pd.read_csv(out_dir / "high-a" / "high-a_units.csv")  # a plain table
    assert set(units["Proposed school (site id)"]) <= {"H01", "H02"} and len(units) == 1557
    zones = gpd.read_file(out_dir / "high-a" / "high-a.gpkg", layer="zones")
    assert len(zones) == 2

    code, out, _ = run_cli("options", str(project))
    assert code == 0 and "high-a" in out and "best possible plan" in out and "optimal" not in out

    pdf = tmp_path / "packet.pdf"
    code, out, _ = run_cli("packet", str(project), "--options", "high-a", "--out", str(pdf))
    assert code == 0, out
    assert pdf.read_bytes().startswith(b"%PDF")
    assert len(list((tmp_path / "packet-pages").glob("*.png"))) >= 3

    code, out, _ = run_cli("options", str(project), "--rename", "high-a", "high-main")
    assert code == 0 and "high-main" in out
    code, out, _ = run_cli("options", str(project), "--delete", "high-main")
    assert code == 0 and "no saved options" in out


def test_unknown_option_is_named(project, tmp_path):
    code, out, err = run_cli("packet", str(project), "--options", "nope",
                             "--out", str(tmp_path / "p.pdf"))
    assert code == 2
    assert "nope" in err
    assert not (tmp_path / "p.pdf").exists()


def test_progress_is_quiet_off_a_terminal():
    stream = io.StringIO()  # not a TTY
    Progress("x", stream=stream)(Round(1, 10.0, 9.0, 0.1, 0, 0, 0.5))
    assert stream.getvalue() == ""


@pytest.mark.slow
def test_demo_command(tmp_path):
    """The README's main job: every level, two options each, exports and packets."""
    # a shorter limit than the README run: the job end to end, not the plans' quality
    code, out, _ = run_cli("demo", "--out", str(tmp_path), "--time-limit", "5")
    assert code == 0, out
    for level in ("elementary", "middle", "high"):
        for option in ("shortest-travel", "fewer-moves"):
            folder = tmp_path / f"{level}-{option}"
            assert (folder / f"{level}-{option}.gpkg").exists()
            assert (folder / f"{level}-{option}_zones.geojson").exists()
            assert (folder / f"{level}-{option}_zones_shp.zip").exists()
        assert (tmp_path / f"packet-{level}.pdf").exists()
    assert DRAFT_NOTICE in out


# ----------------------------------------------------------------------------- refusals
def _files(folder) -> dict:
    """Every file under ``folder`` with its bytes' hash (what a refused command must keep)."""
    import hashlib
    from pathlib import Path

    return {str(p.relative_to(folder)): hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(Path(folder).rglob("*")) if p.is_file()}


def _save_today(project, level: str, name: str) -> None:
    """Save today's zones of ``level`` as an option (a real plan: the district's own)."""
    from districting.intake import load_project
    from districting.outputs.store import save_option
    from districting.study import RunSettings, build_problem, outcome_from_assignment, resolved

    inputs = load_project(project)
    rs = RunSettings(level=level)
    problem, _ = build_problem(inputs, resolved(inputs, rs))
    out = outcome_from_assignment(inputs, rs, problem.current, {"status": "feasible"},
                                  name=name)
    save_option(inputs, out, name)


@pytest.mark.parametrize("name", [
    "town/../..",  # on main this overwrote the project's own town.gpkg after the solve
    "../../escape", "sub/dir", "..", ".hidden", "   ", "two\nlines", "x" * 300,
    "<img src=x onerror=alert(1)>", "tab\there", "back\\slash",
])
def test_bad_option_names_are_refused_before_the_solve(tmp_path, name):
    project = copy_demo(tmp_path / "demo")
    before = _files(tmp_path)
    code, out, err = run_cli("solve", str(project), "--level", "high", "--save", name)
    assert code == 2
    assert "name" in err and "letters and digits" in err  # the message states the rule
    assert "Traceback" not in err and "high:" not in out  # no solve ran
    assert _files(tmp_path) == before  # nothing written or changed anywhere


def test_a_taken_option_name_is_refused_before_any_export(tmp_path):
    project = copy_demo(tmp_path / "demo")
    _save_today(project, "high", "Plan A")
    before = _files(tmp_path)
    code, out, err = run_cli("solve", str(project), "--level", "high", "--save", "Plan A",
                             "--out", str(tmp_path / "out"))
    assert code == 2
    assert "'Plan A' exists" in err and "--overwrite" in err
    assert "high:" not in out  # refused before the solve
    assert _files(tmp_path) == before and not (tmp_path / "out").exists()


def test_exports_of_another_name_are_not_overwritten(tmp_path):
    project = copy_demo(tmp_path / "demo")
    folder = tmp_path / "out" / "plan-b"  # what "Plan B" exports to
    folder.mkdir(parents=True)
    (folder / "note.txt").write_text("made by hand")
    code, out, err = run_cli("solve", str(project), "--level", "high", "--save", "Plan  B",
                             "--out", str(tmp_path / "out"))
    assert code == 2 and "already holds exports" in err and "high:" not in out
    assert [p.name for p in folder.iterdir()] == ["note.txt"]


def test_one_save_name_for_several_levels_is_refused(tmp_path):
    project = copy_demo(tmp_path / "demo")
    code, out, err = run_cli("solve", str(project), "--save", "Plan C")
    assert code == 2 and "--level" in err and "elementary" in err
    assert out == ""


def test_rename_obeys_the_name_rule(tmp_path):
    project = copy_demo(tmp_path / "demo")
    _save_today(project, "high", "Plan A")
    store = project.parent / "options.gpkg"
    before = store.read_bytes()
    code, _, err = run_cli("options", str(project), "--rename", "Plan A", "Plan/B")
    assert code == 2 and "'/'" in err and "letters and digits" in err
    assert store.read_bytes() == before


def test_damaged_store_is_named_and_can_be_set_aside(tmp_path):
    project = copy_demo(tmp_path / "demo")
    _save_today(project, "high", "Plan A")
    store = project.parent / "options.gpkg"
    data = store.read_bytes()
    store.write_bytes(data[: len(data) // 3])  # a copy cut short, as a full disk leaves it
    others = {k: v for k, v in _files(tmp_path).items() if not k.endswith("options.gpkg")}

    code, out, err = run_cli("solve", str(project), "--level", "high", "--save", "Plan B")
    assert code == 2 and "high:" not in out and "Traceback" not in err
    assert str(store) in err and "damaged" in err and "--repair" in err
    code, out, err = run_cli("options", str(project))
    assert code == 2 and str(store) in err and "--repair" in err

    code, out, err = run_cli("options", str(project), "--repair")
    assert code == 0, err
    aside = list(store.parent.glob("options.damaged-*.gpkg"))
    assert len(aside) == 1 and aside[0].read_bytes() == data[: len(data) // 3]
    assert "no saved options" in out  # the new store is empty and readable
    now = _files(tmp_path)
    assert {k: v for k, v in now.items() if k in others} == others  # the rest untouched
    code, out, _ = run_cli("options", str(project), "--repair")
    assert code == 0 and "nothing to repair" in out
