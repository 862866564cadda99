"""The Sweep tab in headless Chromium: the chart of a real sweep of the invented grid town
(tests/sweep_town.py) is on the page, and a tap on a point (the chart's selection, set the
way the tap tool sets it) opens that option on the server: the message line names it."""

from __future__ import annotations

import pytest
from browser_support import chromium_page, deep_text, running_server, shot, source_columns, wait_for
from sweep_town import write_sweep_town

from districting.intake import load_project
from districting.sweep.cluster import open_client
from districting.sweep.grid import settings_grid
from districting.sweep.runner import plan_jobs, run_sweep
from districting.sweep.table import default_folder, write_table

pytestmark = pytest.mark.browser


def test_a_tap_on_the_sweep_chart_opens_the_option(tmp_path):
    project = write_sweep_town(tmp_path / "town")
    inputs = load_project(project)
    grid = settings_grid(inputs, "elementary", stability_weights=[0, 3000])
    todo, done = plan_jobs(inputs, "elementary", grid, "Sweep", time_limit=20)
    with open_client(workers=1, processes=False) as client:
        report = run_sweep(client, inputs, todo, done, say=lambda _line: None)
    write_table(report.results, inputs, "elementary", default_folder(inputs), "straight line")
    names = [r.name for r in report.results]

    with running_server(project, tmp_path) as url, chromium_page() as page:
        errors: list[str] = []
        page.on("pageerror", lambda e: errors.append(str(e)))
        page.goto(url)
        page.wait_for_selector(".result-tabs", timeout=60_000)
        page.click(".result-tabs .bk-tab:has-text('Sweep')")
        data = wait_for(lambda: source_columns(page, "sweep-source", ("option",)), 30,
                        what="the sweep chart's points")
        assert data["option"] == names
        shot(page, "sweep-tab")
        page.evaluate("""(k) => {
          for (const doc of window.Bokeh.documents) {
            const m = doc.get_model_by_name('sweep-source');
            if (m) { m.selected.indices = [k]; return true; }
          }
          return false;
        }""", 1)
        wait_for(lambda: names[1] in deep_text(page, ".message"), 30,
                 what="the message naming the opened option")
        assert not errors
