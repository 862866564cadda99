"""`districting solve --json`: one JSON object per level on stdout, nothing else there.

The town is the invented 4 x 3 grid of tests/data/make_broken.py (levels elementary and
middle). The students moved are counted again from the units CSV the same command writes
(today's site id against the proposed one), and the gap from the objective and bound.
"""

from __future__ import annotations

import json

import pandas as pd
from test_cli import run_cli


def test_json_lines_per_level_and_messages_on_stderr(tmp_path, town):
    project = town.write_town(tmp_path / "town")
    out_dir = tmp_path / "out"
    code, out, err = run_cli("solve", str(project), "--json", "--out", str(out_dir))
    assert code == 0, err
    records = [json.loads(line) for line in out.splitlines()]  # nothing else on stdout
    assert [r["level"] for r in records] == ["elementary", "middle"]
    assert "wrote 9 files" in err and "mean travel" in err
    for r in records:
        assert r["status"] == "optimal"
        assert r["bound"] <= r["objective"] + 1e-6
        assert abs(r["gap"] - (r["objective"] - r["bound"]) / r["objective"]) < 1e-9
        assert 0 <= r["seconds"] < 600
        assert r["students_moved_vs_option"] is None  # the command starts from today
        units = pd.read_csv(out_dir / f"{r['level']}-latest" / f"{r['level']}-latest_units.csv")
        changed = units["Today's school (site id)"] != units["Proposed school (site id)"]
        students = next(c for c in units.columns if c.startswith("Students "))
        assert r["students_moved_vs_today"] == units.loc[changed, students].sum()
    assert sum(r["students_moved_vs_today"] for r in records) > 0  # the check has teeth


def test_json_when_no_plan_exists_has_nulls_and_fails(tmp_path, town):
    project = town.write_town(tmp_path / "town")
    code, out, err = run_cli("solve", str(project), "--json", "--level", "elementary",
                             "--max-util", "0.6", "--out", str(tmp_path / "out"))
    assert code == 1
    (record,) = [json.loads(line) for line in out.splitlines()]
    assert record["status"] == "infeasible"
    assert record["objective"] is None and record["students_moved_vs_today"] is None
    assert err.strip()
