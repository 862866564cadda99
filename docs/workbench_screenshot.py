"""Take the README's picture of the workbench: docs/workbench.png.

    .venv/bin/python docs/workbench_screenshot.py

Serves a working copy of the invented demo town in a temporary folder, opens it in
Debian's headless Chromium, solves the middle-school level (15 s limit) and takes the
page as a planner sees it at 1500 x 1000 pixels.
"""

from __future__ import annotations

import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path[:0] = [str(ROOT), str(ROOT / "tests")]

from browser_support import chromium_page, running_server, wait_for  # noqa: E402


def main() -> int:
    from districting.demo import copy_demo

    with tempfile.TemporaryDirectory() as tmp:
        project = copy_demo(Path(tmp) / "demo")
        with running_server(project, Path(tmp)) as url, chromium_page() as page:
            page.goto(url)
            page.wait_for_function("() => window.Bokeh && Bokeh.documents.length && "
                                   "Bokeh.documents[0].get_model_by_name('zone-map')",
                                   timeout=90_000)
            page.select_option(".setting-level select", label="middle")
            page.fill(".setting-time-limit input", "15")
            page.press(".setting-time-limit input", "Enter")
            page.wait_for_timeout(1500)
            page.click(".rerun-button button")
            wait_for(lambda: _runs(page) >= 1, 120, what="the run to finish")
            page.wait_for_timeout(2500)
            out = ROOT / "docs" / "workbench.png"
            page.screenshot(path=str(out), full_page=False)
            print(f"wrote {out}")
    return 0


def _runs(page) -> int:
    return int(page.get_attribute(".run-status [data-runs]", "data-runs") or 0)


if __name__ == "__main__":
    raise SystemExit(main())
