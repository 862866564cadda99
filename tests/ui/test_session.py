"""A session's actions (ui/session.py) over its state parameters and store, without a
browser: the page's ways out of a stale record or a damaged store file."""

from __future__ import annotations

import pytest
from ui_town import new_store

from ui.session import Session
from ui.store import Store


def test_the_page_offers_reload_or_a_new_draft(inputs):
    a = Session(new_store(inputs))
    b = Session(Store(inputs))
    assert a.state.store_problem == "" and b.state.store_problem == ""
    a.state.max_util_pct = 95.0
    b.state.max_util_pct = 90.0  # stale: refused, and the page says why
    assert "Another session saved" in b.state.store_problem
    assert b.store.settings.max_utilization == pytest.approx(0.90)
    b.reload_record()
    assert b.state.store_problem == "" and b.state.max_util_pct == pytest.approx(95.0)
    a.state.min_util_pct = 10.0
    b.state.min_util_pct = 20.0
    assert b.state.store_problem
    assert not b.keep_as_draft("")  # a name is needed: told, nothing written
    assert b.state.message_kind == "danger" and "empty" in b.state.message
    assert b.keep_as_draft("B's draft") and b.state.store_problem == ""
    assert Store(inputs, draft="B's draft").settings.min_utilization == pytest.approx(0.20)
    assert Store(inputs).settings.min_utilization == pytest.approx(0.10)
    assert b.open_draft("") and b.state.min_util_pct == pytest.approx(10.0)


def test_a_damaged_store_gives_a_message_and_a_way_out(inputs):
    st = new_store(inputs)
    st.rerun()
    st.save_option("Kept")
    store = st.store_path
    data = store.read_bytes()
    store.write_bytes(data[: len(data) // 3])  # cut short
    stale = store.parent / f".tmp-{store.stem}-k1ll3d00{store.suffix}"
    stale.write_bytes(b"")  # what a writer killed mid-save leaves
    page = Session(Store(inputs))  # a page opening: no traceback
    assert not stale.exists()  # stray copies go when a page starts
    assert str(store) in page.state.store_problem and "damaged" in page.state.store_problem
    assert page.store.list_options() == []
    page.state.max_util_pct = 90.0  # edits go on in the page, nothing is written
    assert store.read_bytes() == data[: len(data) // 3]
    assert page.repair_store()
    assert page.state.store_problem == "" and "kept as" in page.state.message
    assert len(list(store.parent.glob(f"{store.stem}.damaged-*{store.suffix}"))) == 1
    assert Store(inputs).settings.max_utilization == pytest.approx(0.90)  # written now


def test_the_store_session_runner_and_map_data_load_no_ui_library():
    """Only views/ and app.py draw: the rest of ui/ runs without Panel or Bokeh (a script or
    another front end can use it)."""
    import os
    import subprocess
    import sys
    from pathlib import Path

    root = str(Path(__file__).resolve().parents[2])
    env = {**os.environ, "PYTHONPATH": os.pathsep.join(
        [root, *filter(None, [os.environ.get("PYTHONPATH")])])}
    code = ("import sys, ui.store, ui.session, ui.runner, ui.mapdata, ui.projects, ui.history, "
            "ui.text; "
            "print(sorted({m.split('.')[0] for m in sys.modules} & {'panel', 'bokeh'}))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True, cwd=root, env=env)
    assert out.stdout.strip() == "[]"
