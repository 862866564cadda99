"""The Sweep tab on the invented grid town (tests/ui_town.py): it reads the table a real
sweep wrote, plots one point per option with a plan and its frontier, and a click on a
point (the chart's selection) opens that saved option through the session."""

from __future__ import annotations

import pytest
from ui_town import LEVEL, new_store

from districting.sweep.cluster import open_client
from districting.sweep.grid import settings_grid
from districting.sweep.runner import plan_jobs, run_sweep
from districting.sweep.table import default_folder, write_table
from ui.session import Session
from ui.views.sweep import SweepChart


@pytest.fixture()
def swept(inputs):
    grid = settings_grid(inputs, LEVEL, stability_weights=[0, 300])
    todo, done = plan_jobs(inputs, LEVEL, grid, "Sweep", time_limit=20)
    with open_client(workers=1, processes=False) as client:
        report = run_sweep(client, inputs, todo, done, say=lambda _line: None)
    write_table(report.results, inputs, LEVEL, default_folder(inputs), "along streets")
    return report


def test_no_sweep_yet_says_how_to_make_one(inputs):
    view = SweepChart(Session(new_store(inputs)))
    assert "No sweep of the middle level yet" in view.note.object
    assert view.source.data["option"] == []


def test_a_click_on_a_point_opens_that_option(inputs, swept):
    session = Session(new_store(inputs))
    view = SweepChart(session)
    names = [r.name for r in swept.results]
    assert view.source.data["option"] == names
    assert view.source.data["moved"] == [round(r.students_moved) for r in swept.results]
    assert len(view.front.data["moved"]) >= 1
    pick = names.index(next(n for n in names if "300" in n))
    view.source.selected.indices = [pick]  # what a tap on the point sends
    assert session.store.outcome.name == names[pick]
    assert session.store.effective.stability_weight == 300
