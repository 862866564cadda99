"""The maps at true shape in a real browser (Debian's headless Chromium via Playwright).

``districting serve`` runs on a copy of the demo town. Metres per pixel are read from the
page itself (the plot's x and y ranges over its inner width and height, as BokehJS laid
them out) and must agree within 3% across and up: at two window sizes, after a zoom
followed by a resize, on the compare maps, and on the printable page, which must also
print to a PDF. Each map's scale bar and north arrow are found in the page.
"""

from __future__ import annotations

from pathlib import Path

import pytest
from browser_support import CHROMIUM, chromium_page, deep_text, running_server, shot, wait_for

from districting import DRAFT_NOTICE
from districting.outputs.symbols import TODAY_LINE

pytestmark = pytest.mark.browser

# metres per pixel of a named plot, as the page has them; and its scale bar and arrow
SCALE = """(name) => {
  const val = (v) => (v !== null && typeof v === 'object' && 'value' in v) ? v.value : v;
  for (const doc of window.Bokeh.documents) {
    const p = doc.get_model_by_name(name);
    if (!p) continue;
    const bar = doc.get_model_by_name(name + '-scale-bar');
    const arrow = doc.get_model_by_name(name + '-north-arrow');
    return {x: (p.x_range.end - p.x_range.start) / p.inner_width,
            y: (p.y_range.end - p.y_range.start) / p.inner_height,
            w: p.inner_width, h: p.inner_height,
            bar: bar ? bar.visible && bar.unit : null,
            arrow: arrow ? val(arrow.y_end) - val(arrow.y_start) : null};
  }
  return null;
}"""


@pytest.fixture(autouse=True)
def _chromium_is_installed():
    assert Path(CHROMIUM).exists(), "needs Debian's chromium (bash dev.sh test installs it)"


def true_shape(page, name: str) -> dict:
    """The plot's scale once the page has laid it out; asserts equal scale within 3%."""
    got = wait_for(lambda: (lambda s: s if s and s["w"] > 0 and s["h"] > 0 else None)(
        page.evaluate(SCALE, name)), 30, what=f"the map {name} laid out")
    assert got["x"] == pytest.approx(got["y"], rel=0.03), got
    assert got["bar"] == "m", got  # a metric scale bar on the map
    assert got["arrow"] and got["arrow"] > 20, got  # a north arrow pointing up
    return got


def settled(page, name: str) -> dict:
    """The scale after a resize has been handled (two equal readings in a row)."""
    last = {}

    def same():
        nonlocal last
        now = page.evaluate(SCALE, name)
        ok = now == last
        last = now
        return ok

    page.wait_for_timeout(800)
    wait_for(same, 20, interval=0.5, what="the map to settle after a resize")
    return true_shape(page, name)


def test_maps_keep_their_true_shape(tmp_path):
    from districting.demo import copy_demo

    project = copy_demo(tmp_path / "demo")
    with running_server(project, tmp_path) as url, chromium_page() as page:
        errors: list[str] = []
        page.on("pageerror", lambda e: errors.append(str(e)))
        page.goto(url)
        page.wait_for_function("() => window.Bokeh && Bokeh.documents.length && "
                               "Bokeh.documents[0].get_model_by_name('zone-map')",
                               timeout=60_000)
        wide = settled(page, "zone-map")
        page.set_viewport_size({"width": 1000, "height": 800})
        narrow = settled(page, "zone-map")
        assert narrow["w"] < wide["w"] - 100  # the frame did change shape
        box = page.locator(".zone-map .bk-Canvas").first.bounding_box()
        page.mouse.move(box["x"] + box["width"] / 2, box["y"] + box["height"] / 2)
        page.mouse.wheel(0, -400)  # a zoom: Bokeh stops fitting the ranges by itself
        zoomed = settled(page, "zone-map")
        assert zoomed["x"] < narrow["x"] * 0.95
        page.set_viewport_size({"width": 1400, "height": 900})
        resized = settled(page, "zone-map")
        assert resized["w"] > zoomed["w"] + 100
        assert page.locator(".intro-note").count() == 1
        assert "What you see" in deep_text(page, ".intro-note")

        page.click(".result-tabs .bk-tab:has-text('Compare maps')")
        for name in ("compare-map-a", "compare-map-b", "compare-map-diff"):
            true_shape(page, name)
        page.click(".result-tabs .bk-tab:has-text('Print')")
        wait_for(lambda: page.locator(".print-links a.print-screen").count(), 20,
                 what="the link to the printable map")
        href = page.locator(".print-links a.print-screen").first.get_attribute("href")
        assert href.startswith("./print?level=elementary")

        page.set_viewport_size({"width": 1500, "height": 1000})
        page.goto(url + href[2:])
        page.wait_for_function("() => window.Bokeh && Bokeh.documents.length && "
                               "Bokeh.documents[0].get_model_by_name('print-map')",
                               timeout=60_000)
        printed = settled(page, "print-map")
        assert printed["w"] > 500
        text = deep_text(page, ".print-page")
        assert "Brindlemoor" in text and DRAFT_NOTICE in text
        assert "Attendance zones" in text and TODAY_LINE.words in text
        pdf = tmp_path / "map.pdf"
        page.pdf(path=str(pdf), landscape=True)
        assert pdf.read_bytes()[:5] == b"%PDF-" and pdf.stat().st_size > 50_000
        shot(page, "print-map")
        assert not errors, errors

