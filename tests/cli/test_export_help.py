"""`districting export` writes what `solve --save` wrote; every verb and option has help.

The town is the invented 4 x 3 grid of tests/data/make_broken.py.
"""

from __future__ import annotations

import argparse
import zipfile
from pathlib import Path

import pyogrio
import pytest
from test_cli import run_cli

from districting.cli import build_parser

#: Words of the one record that may differ between two writes: when the files were written.
_WHEN = "exported"


def _text(data: bytes) -> list[str]:
    return [line for line in data.decode("utf-8").splitlines() if _WHEN not in line.lower()]


def _layers(path: Path) -> dict:
    out = {}
    for name, _geom in pyogrio.list_layers(path):
        frame = pyogrio.read_dataframe(path, layer=str(name))
        frame = frame.drop(columns=[c for c in frame.columns if c.lower() == _WHEN])
        keep = ~frame.astype(str).apply(lambda col: col.str.lower().str.contains(_WHEN)).any(axis=1)
        out[str(name)] = frame[keep].reset_index(drop=True)
    return out


def _same_file(a: Path, b: Path) -> None:
    if a.suffix == ".gpkg":
        la, lb = _layers(a), _layers(b)
        assert la.keys() == lb.keys(), a.name
        for name in la:
            assert la[name].equals(lb[name]), (a.name, name)
    elif a.suffix == ".zip":
        with zipfile.ZipFile(a) as za, zipfile.ZipFile(b) as zb:
            assert za.namelist() == zb.namelist()
            for member in za.namelist():
                da, db = za.read(member), zb.read(member)
                if member.endswith((".txt", ".cpg", ".prj")):
                    assert _text(da) == _text(db), (a.name, member)
                elif not member.endswith(".dbf"):  # a .dbf header holds the day written
                    assert da == db, (a.name, member)
    else:
        assert _text(a.read_bytes()) == _text(b.read_bytes()), a.name


def test_export_writes_what_solve_save_wrote(tmp_path, town):
    project = town.write_town(tmp_path / "town")
    code, out, err = run_cli("solve", str(project), "--level", "elementary", "--save",
                             "Option A", "--out", str(tmp_path / "solved"), "--time-limit", "30")
    assert code == 0, out + err
    code, out, err = run_cli("export", str(project.parent), "--option", "Option A", "--out",
                             str(tmp_path / "again"))
    assert code == 0, err
    solved, again = tmp_path / "solved" / "option-a", tmp_path / "again" / "option-a"
    names = sorted(p.name for p in solved.iterdir())
    assert names and names == sorted(p.name for p in again.iterdir())
    assert f"wrote {len(names)} files to {again}" in out
    for name in names:
        _same_file(solved / name, again / name)

    before = {p.name: p.stat().st_mtime_ns for p in again.iterdir()}
    code, _, err = run_cli("export", str(project), "--option", "Option A", "--out",
                           str(tmp_path / "again"))
    assert code == 2 and "already holds exports" in err and "--overwrite" in err
    assert before == {p.name: p.stat().st_mtime_ns for p in again.iterdir()}
    code, _, err = run_cli("export", str(project), "--option", "Option A", "--out",
                           str(tmp_path / "again"), "--overwrite")
    assert code == 0, err

    code, _, err = run_cli("export", str(project), "--option", "a/../up", "--out",
                           str(tmp_path / "x"))
    assert code == 2 and "'/' solidus" in err and not (tmp_path / "x").exists()
    code, _, err = run_cli("export", str(project), "--option", "Option B", "--out",
                           str(tmp_path / "y"))
    assert code != 0 and "Option B" in err


def _subparsers(parser: argparse.ArgumentParser) -> dict[str, argparse.ArgumentParser]:
    action = next(a for a in parser._actions if isinstance(a, argparse._SubParsersAction))
    return dict(action.choices)


def test_every_verb_and_option_says_what_it_does():
    parser = build_parser()
    assert "examples:" in parser.epilog and "districting lock" in parser.epilog
    verbs = _subparsers(parser)
    for verb in ("check", "solve", "options", "verify", "packet", "export", "lock", "unlock",
                 "forbid", "unforbid", "demo"):
        assert verb in verbs
    action = next(a for a in parser._actions if isinstance(a, argparse._SubParsersAction))
    helped = {c.dest for c in action._choices_actions if c.help}
    assert helped == set(verbs), set(verbs) - helped
    missing = [f"{verb} {a.option_strings or a.dest}"
               for verb, sub in verbs.items() for a in sub._actions
               if not isinstance(a, argparse._HelpAction)
               and (not a.help or a.help == argparse.SUPPRESS or len(a.help) < 15)]
    assert missing == []


@pytest.mark.parametrize("flag, words", [
    ("--max-util", "0.9 for 90%"), ("--max-distance", "metres"),
    ("--time-limit", "seconds"), ("--stability-weight", "metres"),
])
def test_units_are_named_in_the_help(flag, words):
    solve = _subparsers(build_parser())["solve"]
    action = next(a for a in solve._actions if flag in a.option_strings)
    assert words in action.help % {}


def test_solve_without_a_plan_prints_the_lead_then_the_causes(tmp_path, town):
    # Worked by hand: the town's 12 units hold 678 + 24 x (years after 2026) elementary
    # students; a floor of 90% of 500 seats at each of E1 and E2 needs 900: no plan.
    project = town.write_town(tmp_path / "town")
    code, out, err = run_cli("solve", str(project), "--level", "elementary", "--min-util",
                             "0.9", "--time-limit", "20")
    assert code == 1, out + err
    lines = out.splitlines()
    lead = next(k for k, line in enumerate(lines) if "plan meets every rule" in line)
    assert lines[lead].startswith("  No elementary plan meets every rule: ")
    assert "band in " in lines[lead]
    causes = lines[lead + 1:]
    assert causes and all(line.startswith("    - ") for line in causes), out
    assert all("short of its floor of 450" in line for line in causes), out
    assert "infeasible" not in out
