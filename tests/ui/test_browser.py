"""The whole planner's job in a real browser: Debian's headless Chromium via Playwright.

``districting serve`` runs on a working copy of the demo town; the page is driven like a
planner would: select units (a click on the map, then typing ids), lock one to the
neighbouring school, rerun, find its school changed in the map's data and in the change
table, cut a capacity in the schools table, rerun, save an option, reload and find it all
restored, then download the GeoPackage and read it with geopandas. Requests off this
machine are refused, so the page must work offline. Screenshots go to test-artifacts/.
"""

from __future__ import annotations

import time
from pathlib import Path

import geopandas as gpd
import numpy as np
import pyogrio
import pytest
import shapely
from browser_support import (
    CHROMIUM,
    chromium_page,
    deep_text,
    running_server,
    shot,
    source_columns,
    wait_for,
)

pytestmark = pytest.mark.browser


@pytest.fixture(autouse=True)
def _chromium_is_installed():
    # a missing browser fails here rather than skipping: a skip would hide a regression
    assert Path(CHROMIUM).exists(), "needs Debian's chromium (bash dev.sh test installs it)"

LEVEL = "high"  # two schools: each rerun ends optimal in about a second


def lockable_pair(town: Path, proposed: list[str], unit_ids: list[str]) -> tuple[str, str]:
    """A unit with students on a zone border and the school across that border.

    Touching units from the polygons (STRtree over the whole array), keeping borders longer
    than 80 m that do not run along a barrier line, so the lock keeps both zones connected.
    """
    units = gpd.read_file(town, layer="units").set_index("unit_id").loc[unit_ids]
    bars = gpd.read_file(town, layer="barriers")
    geoms = units.geometry.to_numpy()
    i, j = shapely.STRtree(geoms).query(geoms, predicate="touches")
    keep = i < j
    i, j = i[keep], j[keep]
    prop = np.asarray(proposed)
    differ = prop[i] != prop[j]
    i, j = i[differ], j[differ]
    border = shapely.intersection(geoms[i], geoms[j])
    length = shapely.length(border)
    near = shapely.dwithin(border, shapely.union_all(bars.geometry.to_numpy()), 30.0)
    students = units[f"{LEVEL}_2027"].to_numpy()
    ok = (length > 80) & ~near & (students[i] > 0)
    assert ok.any(), "no lockable border unit in the demo plan"
    k = np.flatnonzero(ok)[np.argmax(length[ok])]
    return unit_ids[i[k]], prop[j[k]]


def runs_finished(page) -> int:
    return int(page.get_attribute(".run-status [data-runs]", "data-runs") or 0)


def rerun(page, timeout: float = 150.0) -> str:
    """Press Rerun and wait until that run has finished; returns the run status line.

    Waits on the page's count of finished runs, so a solve quicker than the poll is not
    missed."""
    before = runs_finished(page)
    page.click(".rerun-button button")
    wait_for(lambda: runs_finished(page) > before, timeout, what="the rerun to finish")
    return f"{deep_text(page, '.run-status')} {message(page)}"


def message(page) -> str:
    return deep_text(page, ".message") if page.is_visible(".message") else ""


def open_tab(page, title: str) -> None:
    page.click(f".result-tabs .bk-tab:has-text('{title}')")
    time.sleep(0.3)


def table_text(page, css: str) -> str:
    page.wait_for_selector(f".{css} .tabulator-row", timeout=20_000)
    return deep_text(page, f".{css} .tabulator-tableholder")


def test_planner_job_in_the_browser(tmp_path):
    from districting.demo import copy_demo

    project = copy_demo(tmp_path / "demo")
    town = project.parent / "town.gpkg"
    with running_server(project, tmp_path) as url, chromium_page() as page:
        errors: list[str] = []
        page.on("pageerror", lambda e: errors.append(str(e)))
        page.goto(url)
        page.wait_for_selector(".rerun-button button", timeout=60_000)
        page.wait_for_function("() => window.Bokeh && Bokeh.documents.length && "
                               "Bokeh.documents[0].get_model_by_name('units-source')",
                               timeout=60_000)
        shot(page, "01-opened")
        data = source_columns(page, "units-source", ("unit_id", "proposed", "current"))
        unit_ids = data["unit_id"]
        assert len(unit_ids) > 1000 and data["proposed"] == data["current"]  # today's zones

        # The level to plan (the page opens on the first level of the project).
        page.select_option(".setting-level select", label=LEVEL)
        wait_for(lambda: set(source_columns(page, "units-source", ("current",))["current"])
                 <= {"H01", "H02"}, 30, what="the high-school zones on the map")

        # A click on the map selects the unit under the pointer.
        canvas = page.locator(".zone-map .bk-Canvas").first
        box = canvas.bounding_box()
        page.mouse.click(box["x"] + box["width"] * 0.5, box["y"] + box["height"] * 0.55)
        clicked = wait_for(lambda: page.input_value(".selected-units input"), 15,
                           what="a unit selected by the click")
        assert clicked in unit_ids

        # Settings: a time limit for the run, typed like a planner would.
        page.fill(".setting-time-limit input", "40")
        page.press(".setting-time-limit input", "Enter")
        status = rerun(page)
        assert "Done in" in status, status
        shot(page, "02-first-run")
        first = source_columns(page, "units-source", ("proposed",))["proposed"]

        # Lock a border unit to the school across the border, then rerun.
        unit, target = lockable_pair(town, first, unit_ids)
        assert first[unit_ids.index(unit)] != target
        page.fill(".selected-units input", unit)
        page.press(".selected-units input", "Enter")
        wait_for(lambda: "1 unit(s)" in deep_text(page, ".selection-info"), 15,
                 what="the typed unit to be selected")
        page.select_option(".target-school select", value=_option_value(page, target))
        page.click(".lock-button button")
        wait_for(lambda: f"Locked unit {unit} to" in message(page), 15, what="the lock message")
        wait_for(lambda: source_columns(page, "locked-source", ("unit_id",))["unit_id"]
                 == [unit], 15, what="the locked unit hatched on the map")
        shot(page, "03-locked")
        status = rerun(page)
        # the map's columns arrive after the run's count: wait for them
        wait_for(lambda: source_columns(page, "units-source", ("proposed",))["proposed"]
                 [unit_ids.index(unit)] == target, 20,
                 what=f"the locked unit in its school on the map after the rerun ({status})")
        open_tab(page, "Changes")
        page.click(".reference-choice button:has-text('previous result')")
        wait_for(lambda: unit in table_text(page, "changes-table"), 15,
                 what="the locked unit in the change table")
        row = page.locator(".changes-table .tabulator-row", has_text=unit).inner_text()
        assert target in row
        shot(page, "04-changes")

        # Cap the busiest school below its students, rerun, and see it inside the band.
        open_tab(page, "Schools")
        table_text(page, "sites-table")
        site, cap = _cut_busiest(page)
        wait_for(lambda: f"{site} changed" in message(page), 15, what="the capacity message")
        status = rerun(page)
        assert "Done in" in status, status
        row = _site_row(page, site)
        assert float(row["capacity"].replace(",", "")) == cap
        assert float(row["Utilization 2027 (%)"].replace(",", "")) <= 100.0 + 1e-6
        shot(page, "05-capped")

        # Save an option.
        open_tab(page, "Options")
        page.fill(".option-name input", "Hearing option A")
        page.press(".option-name input", "Enter")
        page.click(".save-option button")
        wait_for(lambda: "Saved option" in message(page), 20, what="the save message")
        assert "Hearing option A" in table_text(page, "options-table")
        saved = source_columns(page, "units-source", ("proposed",))["proposed"]

        # Reload: a new session restores the option, the lock and the capacity.
        page.reload()
        page.wait_for_selector(".rerun-button button", timeout=60_000)
        page.wait_for_function("() => window.Bokeh && Bokeh.documents.length && "
                               "Bokeh.documents[0].get_model_by_name('units-source')",
                               timeout=60_000)
        restored = source_columns(page, "units-source", ("proposed", "locked"))
        assert restored["proposed"] == saved
        assert target in restored["locked"][unit_ids.index(unit)]
        assert float(_site_row(page, site)["capacity"].replace(",", "")) == cap
        open_tab(page, "Options")
        assert "Hearing option A" in table_text(page, "options-table")
        open_tab(page, "Locks")
        assert unit in table_text(page, "locks-table")
        shot(page, "06-restored")

        # Download the GeoPackage and read it.
        open_tab(page, "Downloads")
        with page.expect_download(timeout=60_000) as dl:
            page.click(".download-gpkg button")
        path = tmp_path / "download.gpkg"
        dl.value.save_as(path)
        layers = {name for name, _ in pyogrio.list_layers(path)}
        assert {"zones", "units"} <= layers
        units = gpd.read_file(path, layer="units").set_index("unit_id")
        assert units.loc[unit, "proposed"] == target
        assert units["proposed"].reindex(unit_ids).tolist() == saved
        shot(page, "07-downloads")
        # Works offline: every step above ran with requests off this machine refused. The
        # one stylesheet Panel 1.9 still asks a CDN for is its loading-spinner CSS (known
        # gap, left open in the notes); anything else leaving the machine fails the test.
        spinner = "/dist/css/loading.css"
        outside = [u for u in page.outside_requests if spinner not in u]
        assert not outside, outside
        assert not errors, errors


def _option_value(page, site: str) -> str:
    """The <option> value of a school in the lock selector (its label ends '(site)')."""
    values = page.eval_on_selector_all(
        ".target-school select option", "os => os.map(o => [o.value, o.textContent])")
    for value, label in values:
        if label.endswith(f"({site})"):
            return value
    raise AssertionError(f"{site} is not in the school list: {values}")


def _site_row(page, site: str) -> dict[str, str]:
    open_tab(page, "Schools")
    table_text(page, "sites-table")
    row = page.locator(".sites-table .tabulator-row", has_text=site).first
    cells = row.locator(".tabulator-cell")
    fields = cells.evaluate_all("cs => cs.map(c => [c.getAttribute('tabulator-field'), "
                                "c.textContent])")
    return dict(fields)


def _cut_busiest(page) -> tuple[str, float]:
    """Type a capacity 10% below the plan-year students of the fullest school."""
    rows = page.locator(".sites-table .tabulator-row")
    best = None
    for k in range(rows.count()):
        fields = dict(rows.nth(k).locator(".tabulator-cell").evaluate_all(
            "cs => cs.map(c => [c.getAttribute('tabulator-field'), c.textContent])"))
        if fields.get("status") not in ("open", "new"):
            continue
        use = float(fields["Utilization 2027 (%)"].replace(",", "") or 0)
        if best is None or use > best[0]:
            best = (use, k, fields)
    _use, k, fields = best
    cap = float(round(float(fields["Students 2027"].replace(",", "")) * 0.9))
    cell = rows.nth(k).locator(".tabulator-cell[tabulator-field='capacity']")
    cell.click()
    editor = cell.locator("input")
    editor.fill(str(int(cap)))
    editor.press("Enter")
    return fields["site_id"], cap
