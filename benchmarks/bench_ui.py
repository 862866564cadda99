"""How fast the workbench feels, measured in Debian's headless Chromium on the demo town.

    .venv/bin/python benchmarks/bench_ui.py [--opens 3]

Prints: seconds from opening the page until it is interactive (the Rerun button and the
map's data are in the page), for a first and later openings; seconds for a first rerun;
and seconds from pressing Rerun after one lock until the map shows the locked unit at its
new school. The server runs on a working copy of the demo town in a temporary folder.
Figures depend on the machine's load: run it on a quiet machine.
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path[:0] = [str(ROOT / "tests"), str(ROOT / "tests" / "ui")]

from browser_support import (  # noqa: E402 - the helpers live beside the tests
    chromium_page,
    deep_text,
    running_server,
    source_columns,
)
from test_browser import lockable_pair  # noqa: E402 - tests/ui/test_browser.py

READY = ("() => window.Bokeh && Bokeh.documents.length && "
         "Bokeh.documents[0].get_model_by_name('units-source')")


def open_page(page, url: str) -> float:
    t = time.perf_counter()
    page.goto(url)
    page.wait_for_selector(".rerun-button button", timeout=120_000)
    page.wait_for_function(READY, timeout=120_000, polling=50)
    return time.perf_counter() - t


def rerun(page) -> float:
    """Seconds from the Rerun click until the page counts one more finished run."""
    def finished() -> int:
        return int(page.get_attribute(".run-status [data-runs]", "data-runs") or 0)

    before = finished()
    t = time.perf_counter()
    page.click(".rerun-button button")
    while finished() <= before:  # Playwright's CSS engine reaches into Panel's shadow roots
        if time.perf_counter() - t > 300:
            raise TimeoutError("the rerun did not finish within 300 s")
        time.sleep(0.05)
    return time.perf_counter() - t


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--opens", type=int, default=3, help="page openings to time")
    args = ap.parse_args(argv)
    from districting.demo import copy_demo

    rows = []
    with tempfile.TemporaryDirectory() as tmp:
        project = copy_demo(Path(tmp) / "demo")
        t = time.perf_counter()
        with running_server(project, Path(tmp), timeout=300) as url:
            rows.append(("server start until the URL is printed", time.perf_counter() - t))
            with chromium_page() as page:
                for k in range(args.opens):
                    rows.append((f"page open {k + 1}: interactive", open_page(page, url)))
                rows.append(("first rerun (click -> result on the page)", rerun(page)))
                msg = deep_text(page, ".message")
                data = source_columns(page, "units-source", ("unit_id", "proposed"))
                unit, target = lockable_pair(project.parent / "town.gpkg", data["proposed"],
                                             data["unit_id"])
                page.fill(".selected-units input", unit)
                page.press(".selected-units input", "Enter")
                page.wait_for_timeout(500)
                options = page.eval_on_selector_all(
                    ".target-school select option", "os => os.map(o => [o.value, o.textContent])")
                value = next(v for v, label in options if label.endswith(f"({target})"))
                page.select_option(".target-school select", value=value)
                page.click(".lock-button button")
                page.wait_for_timeout(500)
                t = time.perf_counter()
                page.click(".rerun-button button")
                page.wait_for_function(
                    """([u, s]) => { const m = Bokeh.documents[0].get_model_by_name(
                        'units-source'); const d = m.data instanceof Map ? m.data :
                        new Map(Object.entries(m.data)); const ids = d.get('unit_id');
                        return d.get('proposed')[ids.indexOf(u)] === s; }""",
                    arg=[unit, target], timeout=300_000, polling=50)
                rows.append(("rerun after one lock (click -> map shows the unit moved)",
                             time.perf_counter() - t))
    width = max(len(r[0]) for r in rows)
    print(f"{'measure':<{width}}  seconds")
    for label, sec in rows:
        print(f"{label:<{width}}  {sec:7.2f}")
    print(f"(first run said: {msg[:160]})")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
