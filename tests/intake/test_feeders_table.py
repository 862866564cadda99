"""The [feeders] table against the project's levels: each refusal names the file, the key
and the fix."""

from __future__ import annotations

from pathlib import Path

import tomli_w

from districting.intake import Report, read_settings

BASE = {
    "project": {"current_year": 2026, "years": [2027], "levels": ["elementary", "middle",
                                                                  "high"]},
    "units": {"source": "units.geojson"},
    "sites": {"source": "sites.geojson"},
}


def _read(tmp: Path, feeders: dict):
    path = tmp / "project.toml"
    path.write_text(tomli_w.dumps({**BASE, "feeders": feeders}))
    report = Report(path)
    return read_settings(path, report), report


def test_a_valid_feeders_table_is_read(tmp_path):
    settings, report = _read(tmp_path, {"whole": ["middle"], "nested": ["Elementary"],
                                        "zones": {"elementary": "Plan E"}})
    assert not report.errors
    f = settings.feeders
    assert f.whole == ("middle",) and f.nested == ("elementary",)
    assert f.zones == {"elementary": "Plan E"}
    assert f.rule("middle") == "whole" and f.rule("high") == ""


def test_the_lowest_level_cannot_be_fed_whole(tmp_path):
    _settings, report = _read(tmp_path, {"whole": ["elementary"]})
    (item,) = report.errors
    text = str(item)
    assert "project.toml" in text and "[feeders] whole" in text
    assert "no level below it" in text and 'nested = ["elementary"]' in text


def test_the_highest_level_cannot_be_nested_and_unknown_levels_are_named(tmp_path):
    _settings, report = _read(tmp_path, {"nested": ["high"], "zones": {"midle": "X"}})
    texts = sorted(str(e) for e in report.errors)
    assert len(texts) == 2
    assert any("[feeders] nested" in t and "no level above it" in t for t in texts)
    assert any("[feeders] zones" in t and "did you mean middle" in t for t in texts)


def test_max_splits_belongs_to_a_level_fed_whole(tmp_path):
    settings, report = _read(tmp_path, {"whole": ["middle"], "max_splits": {"middle": 1}})
    assert not report.errors and settings.feeders.max_splits == {"middle": 1}
    _settings, report = _read(tmp_path, {"max_splits": {"high": 1}})
    (item,) = report.errors
    assert "[feeders] max_splits" in str(item) and "add 'high' to whole" in str(item)
