"""Text from people and data files is shown as text in a real browser, never run as markup.

``districting serve`` runs on a copy of the demo town whose project name and one school's
name carry a script-bearing payload, and whose store holds an option with such a name (as
a store written before the name rule could: the rule now refuses ``<`` and ``>``, so it is
put there with plain SQL). The page is opened in Debian's headless Chromium; the payloads
would set ``window.__xss`` if any were read as HTML. The test picks the hostile option in
the compare chooser (where it used to run) and checks the flag stays unset while every
name shows literally.
"""

from __future__ import annotations

import sqlite3
from pathlib import Path

import geopandas as gpd
import pyogrio
import pytest
from browser_support import CHROMIUM, chromium_page, deep_text, running_server, shot, wait_for

pytestmark = [
    pytest.mark.browser,
    pytest.mark.skipif(not Path(CHROMIUM).exists(), reason="needs Debian's chromium "
                       "(bash dev.sh test installs it)"),
]

PAYLOAD = '<img src=x onerror="window.__xss=(window.__xss||0)+1">'
OPTION = f"Plan {PAYLOAD}"
SCHOOL = f"School {PAYLOAD}"
PROJECT = f"Town {PAYLOAD}"

# every element in the page (open shadow roots included) that the payload would create
FOUND_IMGS = """() => {
  let n = 0;
  const walk = (root) => {
    for (const el of root.querySelectorAll('*')) {
      if (el.tagName === 'IMG' && el.getAttribute('src') === 'x') n++;
      if (el.shadowRoot) walk(el.shadowRoot);
    }
  };
  walk(document);
  return n;
}"""


def hostile_project(folder: Path) -> Path:
    """The demo town with the payload in the project name, a school name and an option."""
    from districting.demo import copy_demo
    from districting.intake import load_project
    from districting.outputs.store import ASSIGNMENTS_TABLE, OPTIONS_TABLE, ZONES_LAYER, save_option
    from districting.study import RunSettings, build_problem, outcome_from_assignment, resolved

    project = copy_demo(folder)
    text = project.read_text()
    name_line = next(ln for ln in text.splitlines() if ln.startswith("name = "))
    project.write_text(text.replace(name_line, f"name = '{PROJECT}'", 1))
    town = project.parent / "town.gpkg"
    sites = gpd.read_file(town, layer="sites")
    first = sites.index[sites["level"] == "elementary"][0]
    sites.loc[first, "name"] = SCHOOL
    pyogrio.write_dataframe(sites, town, layer="sites", driver="GPKG")
    assert {"units", "sites"} <= {n for n, _ in pyogrio.list_layers(town)}

    inputs = load_project(project)
    assert inputs.settings.name == PROJECT
    rs = RunSettings(level="elementary")
    problem, _ = build_problem(inputs, resolved(inputs, rs))
    today = outcome_from_assignment(inputs, rs, problem.current, {"status": "feasible"},
                                    name="Plan today")
    save_option(inputs, today, "Plan today")
    con = sqlite3.connect(inputs.settings.store)  # an option named before the rule existed
    with con:
        con.execute(f"UPDATE {OPTIONS_TABLE} SET name = ? WHERE name = ?", (OPTION, "Plan today"))
        for table in (ASSIGNMENTS_TABLE, ZONES_LAYER):
            con.execute(f"UPDATE {table} SET option = ? WHERE option = ?", (OPTION, "Plan today"))
    con.close()
    return project


def test_names_from_people_and_files_show_as_text(tmp_path):
    project = hostile_project(tmp_path / "demo")
    with running_server(project, tmp_path) as url, chromium_page() as page:
        page.goto(url)
        page.wait_for_selector(".rerun-button button", timeout=60_000)
        page.wait_for_function("() => window.Bokeh && Bokeh.documents.length && "
                               "Bokeh.documents[0].get_model_by_name('units-source')",
                               timeout=60_000)
        assert PROJECT in deep_text(page, ".app-header")

        page.click(".result-tabs .bk-tab:has-text('Schools')")
        wait_for(lambda: SCHOOL in deep_text(page, ".sites-table"), 20,
                 what="the school's name in the schools table")
        options = page.eval_on_selector_all(".target-school select option",
                                            "os => os.map(o => o.textContent)")
        assert any(SCHOOL in o for o in options)

        page.click(".result-tabs .bk-tab:has-text('Options')")
        wait_for(lambda: OPTION in deep_text(page, ".options-table"), 20,
                 what="the option's name in the options table")
        # the compare chooser: open it, pick the hostile option by its shown label
        page.click(".compare-choice .choices")
        page.wait_for_timeout(1000)  # an image error handler would have run by now
        assert page.evaluate("() => window.__xss") is None  # the chooser drew no markup
        assert page.evaluate(FOUND_IMGS) == 0
        item = page.locator(".compare-choice .choices__item--choice", has_text="Plan <img")
        wait_for(lambda: item.count(), 10, what="the option in the compare chooser")
        assert item.first.inner_text().strip() == OPTION
        item.first.click()
        page.click(".compare-choice .choices")
        page.locator(".compare-choice .choices__item--choice", has_text="today").first.click()
        wait_for(lambda: OPTION in deep_text(page, ".compare-table"), 30,
                 what="the option's name as a column of the comparison")
        assert OPTION in deep_text(page, ".compare-choice")  # the chosen item, literally
        page.click(".result-tabs .bk-tab:has-text('Project')")
        wait_for(lambda: PROJECT in deep_text(page, ".result-tabs"), 10,
                 what="the project's name in the Project tab")
        page.wait_for_timeout(1000)  # an image error handler would have run by now
        shot(page, "trust-hostile-names")
        assert page.evaluate("() => window.__xss") is None
        assert page.evaluate(FOUND_IMGS) == 0


def _ready(page, url: str) -> None:
    page.goto(url)
    page.wait_for_selector(".rerun-button button", timeout=60_000)
    page.wait_for_function("() => window.Bokeh && Bokeh.documents.length && "
                           "Bokeh.documents[0].get_model_by_name('units-source')",
                           timeout=60_000)


def _set_time_limit(page, seconds: int) -> None:
    box = page.locator(".setting-time-limit input")
    box.fill(str(seconds))
    box.press("Enter")


def _problem(page) -> str:
    return deep_text(page, ".store-problem") if page.is_visible(".store-problem") else ""


def test_two_pages_on_one_project_never_overwrite_each_other(tmp_path):
    from districting.demo import copy_demo
    from districting.outputs.store import state_record

    project = copy_demo(tmp_path / "demo")
    store = project.parent / "options.gpkg"

    def saved(key: str = "workbench"):
        data = state_record(store, key)[0] if store.exists() else None
        return None if data is None else data["runs"]["elementary"].get("time_limit")

    with running_server(project, tmp_path) as url, chromium_page() as a:
        b = a.context.new_page()  # a second session, as a colleague's browser would open
        _ready(a, url)
        _ready(b, url)
        assert not _problem(a) and not _problem(b)
        _set_time_limit(a, 45)
        wait_for(lambda: saved() == 45, 20, what="page A's edit in the store")
        _set_time_limit(b, 30)  # B started before A's edit: refused, and B is told
        wait_for(lambda: "Another session saved" in _problem(b), 20, what="B's conflict note")
        assert b.is_visible(".reload-record button") and b.is_visible(".keep-draft button")
        shot(b, "trust-conflict")
        assert saved() == 45  # A's work is kept
        b.click(".reload-record button")
        wait_for(lambda: not _problem(b), 20, what="the note to go after the reload")
        assert b.locator(".setting-time-limit input").input_value() == "45"
        _set_time_limit(b, 30)
        wait_for(lambda: saved() == 30, 20, what="B's edit after the reload")
        _set_time_limit(a, 50)  # now A is behind: A is told, and keeps its edit as a draft
        wait_for(lambda: "Another session saved" in _problem(a), 20, what="A's conflict note")
        a.fill(".draft-name input", "Anna east side")
        a.press(".draft-name input", "Enter")
        a.click(".keep-draft button")
        wait_for(lambda: saved("workbench:Anna east side") == 50, 20, what="A's draft")
        wait_for(lambda: not _problem(a), 10, what="A's note to go")
        assert "Anna east side" in deep_text(a, ".message")
        assert saved() == 30  # B's work is kept too
        shot(a, "trust-two-pages")
