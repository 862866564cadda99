"""`districting solve --feeding / --given` and [feeders] on the invented 4 x 3 grid town
of tests/data/make_broken.py (elementary E1 west half, E2 east half; one middle school):
the summary counts split feeders; bad input names the flag or the file and key, and the fix.
"""

from __future__ import annotations

from test_cli import run_cli


def test_whole_feeding_solve_says_how_many_feeders_split(tmp_path, town):
    project = town.write_town(tmp_path / "town")
    code, out, err = run_cli("solve", str(project), "--level", "middle", "--feeding", "whole",
                             "--out", str(tmp_path / "out"))
    assert code == 0, err
    # one middle school: both elementary zones feed it whole
    assert "feeders elementary -> middle: 0 of 2 elementary schools split " \
           "(elementary: today's zones)" in out
    assert (tmp_path / "out" / "middle-latest" / "middle-latest_feeders.csv").exists()


def test_a_given_option_that_is_not_saved_is_named_with_the_fix(tmp_path, town):
    project = town.write_town(tmp_path / "town")
    code, _out, err = run_cli("solve", str(project), "--level", "middle", "--feeding",
                              "whole", "--given", "Plan Z", "--out", str(tmp_path / "out"))
    assert code == 2
    assert "--given 'Plan Z'" in err and "no option named 'Plan Z'" in err and "fix:" in err
    assert not (tmp_path / "out").exists()  # refused before any solve or write


def test_the_lowest_level_has_nothing_to_feed_it(tmp_path, town):
    project = town.write_town(tmp_path / "town")
    code, _out, err = run_cli("solve", str(project), "--level", "elementary", "--feeding",
                              "whole", "--out", str(tmp_path / "out"))
    assert code == 2
    assert "--feeding whole: elementary has no level below it" in err
    assert "--feeding nested" in err


def test_a_feeders_zones_option_missing_from_the_store_names_the_file_and_key(tmp_path, town):
    folder = tmp_path / "town"
    data = town.project_dict()
    data["feeders"] = {"zones": {"elementary": "Plan Z"}}
    project = town.write_town(folder, toml=data)
    code, _out, err = run_cli("solve", str(project), "--level", "middle",
                              "--out", str(tmp_path / "out"))
    assert code == 2
    assert "project.toml: [feeders] zones, elementary = 'Plan Z'" in err
    assert "remove it to use today's elementary zones" in err


def test_the_middle_level_is_solved_against_a_saved_elementary_option(tmp_path, town):
    project = town.write_town(tmp_path / "town")
    out = str(tmp_path / "out")
    code, _o, err = run_cli("solve", str(project), "--level", "elementary", "--save",
                            "Elem A", "--out", out)
    assert code == 0, err
    code, text, err = run_cli("solve", str(project), "--level", "middle", "--feeding", "whole",
                              "--given", "Elem A", "--save", "Middle A", "--out", out)
    assert code == 0, err
    assert "(elementary: option 'Elem A')" in text
    # a middle option is no elementary zones: named with the fix
    code, _o, err = run_cli("solve", str(project), "--level", "middle", "--feeding", "whole",
                            "--given", "Middle A", "--out", str(tmp_path / "out2"))
    assert code == 2 and "is a middle option" in err and "name a saved elementary" in err
    # the saved option keeps the zones it was solved against: verify checks the rule
    code, text, err = run_cli("verify", str(project), "--option", "Middle A")
    assert code == 0, err
    assert "every lower zone goes whole to one school" in text


def test_a_split_limit_needs_whole_feeding(tmp_path, town):
    project = town.write_town(tmp_path / "town")
    code, _out, err = run_cli("solve", str(project), "--level", "middle", "--max-splits", "1",
                              "--out", str(tmp_path / "out"))
    assert code == 2 and "--max-splits 1" in err and "add --feeding whole" in err
    code, out, err = run_cli("solve", str(project), "--level", "middle", "--feeding", "whole",
                             "--max-splits", "1", "--out", str(tmp_path / "out"))
    assert code == 0, err
    assert "feeders elementary -> middle: 0 of 2" in out
