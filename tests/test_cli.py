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
from districting.cli import Progress, main
from districting.demo import copy_demo
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
    assert "1557 planning units" in out


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
    assert "high: optimal" in out
    units = pd.read_csv(out_dir / "high-a" / "high-a_units.csv", comment="#")
    assert set(units["proposed"]) <= {"H01", "H02"} and len(units) == 1557
    zones = gpd.read_file(out_dir / "high-a" / "high-a.gpkg", layer="zones")
    assert len(zones) == 2

    code, out, _ = run_cli("options", str(project))
    assert code == 0 and "high-a" in out and "optimal" in out

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
    code, out, _ = run_cli("demo", "--out", str(tmp_path))
    assert code == 0, out
    for level in ("elementary", "middle", "high"):
        for option in ("shortest-travel", "fewer-moves"):
            folder = tmp_path / f"{level}-{option}"
            assert (folder / f"{level}-{option}.gpkg").exists()
            assert (folder / f"{level}-{option}_zones.geojson").exists()
            assert (folder / f"{level}-{option}_zones_shp.zip").exists()
        assert (tmp_path / f"packet-{level}.pdf").exists()
    assert DRAFT_NOTICE in out
