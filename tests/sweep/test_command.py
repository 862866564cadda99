"""`districting sweep` end to end on the invented grid town (tests/sweep_town.py): options
saved, the chart, the table and its sidecar written, and the chart as the packet's last
page (`districting packet --sweep`)."""

from __future__ import annotations

import json

import pandas as pd
import pytest
from test_cli import run_cli

from districting.intake import load_project
from districting.outputs.packet import packet_figures
from districting.outputs.store import list_options, load_option
from districting.sweep.frontier import non_dominated
from districting.sweep.page import sweep_page_maker


@pytest.mark.slow  # a process cluster, a sweep and a packet: about 25 s on 2 busy cores
def test_sweep_saves_charts_and_feeds_the_packet(project, tmp_path):
    out = project.parent / "out"  # the default folder, where packet --sweep looks
    code, printed, err = run_cli("packet", str(project), "--options", "x", "--out",
                                 str(tmp_path / "early.pdf"), "--sweep")
    assert code == 2 and "no option named" in err  # nothing saved yet: told in words
    code, printed, err = run_cli(
        "sweep", str(project), "--level", "elementary", "--stability-weight", "0,3000",
        "--scenario", "E3 opens: E3=new", "--scenario", "E3 shut: E3=closed",
        "--workers", "1", "--time-limit", "20")
    assert code == 0, err
    assert "4 combinations of settings, 4 to solve" in printed
    assert "[4/4]" in printed and "Traceback" not in err
    inputs = load_project(project)
    table = pd.read_csv(out / "sweep-elementary.csv", keep_default_na=False, na_values=[""])
    assert sorted(table["Option"]) == sorted(o.name for o in list_options(inputs.settings.store))
    # the frontier column is the non-dominated filter of the two figures as written
    expected = non_dominated(table["Students moved"], table["Total travel (student-km)"])
    assert (table["On the frontier"] == "yes").tolist() == expected.tolist()
    about = json.loads((out / "sweep-elementary.about.json").read_text(encoding="utf-8"))
    assert "decision support" in about["notice"] and "local law" in about["notice"]
    assert set(about["columns"]) == set(table.columns)
    assert (out / "sweep-elementary.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert not list(out.glob(".tmp-*"))

    # the packet of one option ends with the sweep's chart, whose axis titles stay (the
    # map pages' are cleared)
    name = table["Option"][0]
    pages = packet_figures([load_option(inputs, name)],
                           extra_pages=[sweep_page_maker(inputs, "elementary")])
    assert pages[-1].axes[0].get_xlabel().startswith("Students moved")
    assert pages[-1].axes[0].get_ylabel() == "Mean travel (km)"
    code, printed, err = run_cli("packet", str(project), "--options", name, "--out",
                                 str(tmp_path / "with.pdf"), "--sweep")
    assert code == 0, err
    assert len(list((tmp_path / "with-pages").glob("*.png"))) == len(pages)
