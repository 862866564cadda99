"""`districting solve --from-option NAME`: rerun a saved option after a lock, charged for
every student moved away from it, with the moves counted against it in `--json`.

The town is the invented 4 x 3 grid of tests/data/make_broken.py (units U01..U12 in rows
of four from the south-west, elementary schools E1 in U01 and E2 in U12). The counts are
done again in the test from the units CSVs the commands write: students whose proposed
school differs between the option and the rerun, and between today and the rerun.
"""

from __future__ import annotations

import json

import pandas as pd
import pytest
from test_cli import run_cli

PROPOSED = "Proposed school (site id)"
TODAY = "Today's school (site id)"


def units_csv(out, name: str) -> pd.DataFrame:
    return pd.read_csv(out / name / f"{name}_units.csv").set_index("Unit id")


def students(frame: pd.DataFrame) -> pd.Series:
    return frame[next(c for c in frame.columns if c.startswith("Students "))]


@pytest.fixture
def saved(tmp_path, town):
    project = town.write_town(tmp_path / "town")
    out = tmp_path / "out"
    code, _, err = run_cli("solve", str(project), "--level", "elementary", "--save", "A",
                           "--out", str(out))
    assert code == 0, err
    return project, out


@pytest.mark.parametrize("weight", [None, "0"])
def test_rerun_counts_moves_against_the_option_and_today(saved, weight):
    project, out = saved
    option = units_csv(out, "a")
    # U06 is in E1's zone of the option (the rows of the grid split it, see the docstring)
    assert option.loc["U06", PROPOSED] == "E1"
    assert run_cli("lock", str(project), "--level", "elementary", "U06", "--school",
                   "E2")[0] == 0
    extra = () if weight is None else ("--keep-weight", weight)
    code, stdout, err = run_cli("solve", str(project), "--from-option", "A", "--json",
                                "--save", "B", "--out", str(out), *extra)
    assert code == 0, err
    (record,) = [json.loads(line) for line in stdout.splitlines()]
    assert record["level"] == "elementary"  # the option's level, without --level
    rerun = units_csv(out, "b")
    assert rerun.loc["U06", PROPOSED] == "E2"
    d = students(rerun)
    against_option = d[rerun[PROPOSED] != option[PROPOSED]].sum()
    against_today = d[rerun[PROPOSED] != rerun[TODAY]].sum()
    assert against_option >= d["U06"] > 0  # the lock moves U06 at least
    assert record["students_moved_vs_option"] == against_option
    assert record["students_moved_vs_today"] == against_today
    charge = "not charged: a free rerun" if weight == "0" else "each charged 3,000 m"
    assert f'against "A": {against_option:,} students change school ({charge})' in err
    assert "price of the edit: objective" in err


def test_keep_weight_needs_an_option_and_a_level_that_matches(saved):
    project, out = saved
    code, _, err = run_cli("solve", str(project), "--keep-weight", "100", "--out", str(out))
    assert code != 0 and "--from-option" in err
    code, _, err = run_cli("solve", str(project), "--from-option", "A", "--level", "middle",
                           "--out", str(out))
    assert code != 0 and "--level elementary" in err
