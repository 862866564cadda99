"""Helpers for driving the workbench in Debian's headless Chromium (tests and benchmark).

``running_server`` starts ``districting serve PROJECT --port N`` as a subprocess, waits for
the URL it prints and kills it afterwards; ``chromium_page`` opens Playwright's Chromium
from /usr/bin/chromium (never a browser download) with every outside request refused, so
a page that needed the internet would fail. The page helpers read the Bokeh documents the
way a script in the page would.
"""

from __future__ import annotations

import contextlib
import os
import re
import signal
import socket
import subprocess
import sys
import threading
import time
from collections.abc import Iterator
from pathlib import Path

CHROMIUM = "/usr/bin/chromium"
CHROMIUM_ARGS = [
    "--headless", "--no-sandbox", "--disable-gpu", "--disable-dev-shm-usage", "--disable-quic",
    "--no-first-run", "--disable-background-networking", "--disable-component-update",
    "--disable-sync",
]
ARTIFACTS = Path(__file__).resolve().parents[1] / "test-artifacts"


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


@contextlib.contextmanager
def running_server(project: Path | None, cwd: Path, timeout: float = 90.0) -> Iterator[str]:
    """``districting serve`` in a subprocess; yields the URL it printed."""
    port = free_port()
    cmd = [sys.executable, "-m", "districting.cli", "serve"]
    if project is not None:
        cmd.append(str(project))
    cmd += ["--port", str(port)]
    env = {**os.environ, "PYTHONUNBUFFERED": "1", "BOKEH_LOG_LEVEL": "warn"}
    proc = subprocess.Popen(cmd, cwd=cwd, stdout=subprocess.PIPE, stderr=subprocess.STDOUT,
                            text=True, env=env, start_new_session=True)
    lines: list[str] = []
    found = threading.Event()
    url_box: list[str] = []

    def reader() -> None:
        for line in proc.stdout:  # keeps draining so the server never blocks on a pipe
            lines.append(line)
            m = re.search(r"(http://[\w.\-]+:\d+/)", line)
            if m and not found.is_set():
                url_box.append(m.group(1))
                found.set()

    threading.Thread(target=reader, daemon=True).start()
    try:
        if not found.wait(timeout) or proc.poll() is not None:
            raise RuntimeError("the workbench did not print its URL:\n" + "".join(lines))
        yield url_box[0]
    finally:
        with contextlib.suppress(ProcessLookupError):
            os.killpg(proc.pid, signal.SIGTERM)
        try:
            proc.wait(10)
        except subprocess.TimeoutExpired:
            os.killpg(proc.pid, signal.SIGKILL)
            proc.wait(5)
        server_log = "".join(lines)
        ARTIFACTS.mkdir(exist_ok=True)
        (ARTIFACTS / "server.log").write_text(server_log)


@contextlib.contextmanager
def chromium_page(width: int = 1500, height: int = 1000) -> Iterator:
    """A Playwright page in Debian's Chromium; requests off this machine are aborted."""
    from playwright.sync_api import sync_playwright

    with sync_playwright() as pw:
        browser = pw.chromium.launch(executable_path=CHROMIUM, args=CHROMIUM_ARGS,
                                     headless=True)
        try:
            context = browser.new_context(viewport={"width": width, "height": height},
                                          accept_downloads=True)
            outside: list[str] = []

            def route(r):
                host = re.match(r"^[a-z]+://([^/:]+)", r.request.url)
                if host and host.group(1) not in ("127.0.0.1", "localhost"):
                    outside.append(r.request.url)
                    return r.abort()
                return r.continue_()

            context.route("**/*", route)
            page = context.new_page()
            page.outside_requests = outside
            yield page
        finally:
            browser.close()


# ---------------------------------------------------------------------- page scripts
DEEP_TEXT = """(el) => {
  const parts = [];
  const walk = (node) => {
    if (node.nodeType === 3) { parts.push(node.textContent); return; }
    if (node.nodeType !== 1 || node.tagName === 'STYLE' || node.tagName === 'SCRIPT') return;
    if (node.shadowRoot) for (const c of node.shadowRoot.childNodes) walk(c);
    for (const c of node.childNodes) walk(c);
  };
  walk(el);
  return parts.join(' ').replace(/\\s+/g, ' ').trim();
}"""


def deep_text(page, css: str) -> str:
    """Visible text of the first element matching ``css``, shadow roots included ('' if none)."""
    loc = page.locator(css)
    if not loc.count():
        return ""
    return loc.first.evaluate(DEEP_TEXT)


def source_columns(page, name: str, columns: tuple[str, ...]) -> dict:
    """Columns of a named Bokeh ColumnDataSource as the page has them."""
    js = """([name, cols]) => {
      for (const doc of window.Bokeh.documents) {
        const m = doc.get_model_by_name(name);
        if (!m) continue;
        const data = m.data instanceof Map ? m.data : new Map(Object.entries(m.data));
        const out = {};
        for (const c of cols) { out[c] = Array.from(data.get(c) || []); }
        return out;
      }
      return null;
    }"""
    return page.evaluate(js, [name, list(columns)])


def select_units_on_page(page, indices: list[int]) -> None:
    """Select units on the map the way a click does: set the source's selected indices."""
    page.evaluate("""(idx) => {
      for (const doc of window.Bokeh.documents) {
        const m = doc.get_model_by_name('units-source');
        if (m) { m.selected.indices = idx; return true; }
      }
      return false;
    }""", indices)


def wait_for(predicate, timeout: float = 30.0, interval: float = 0.2, what: str = "condition"):
    """Poll ``predicate`` until it returns a truthy value; raise with ``what`` on timeout."""
    end = time.monotonic() + timeout
    last = None
    while time.monotonic() < end:
        last = predicate()
        if last:
            return last
        time.sleep(interval)
    raise AssertionError(f"timed out after {timeout:.0f} s waiting for {what} (last: {last!r})")


def shot(page, name: str) -> Path:
    ARTIFACTS.mkdir(exist_ok=True)
    path = ARTIFACTS / f"{name}.png"
    page.screenshot(path=str(path), full_page=True)
    return path
