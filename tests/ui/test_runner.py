"""Background solves (ui/runner.py) without an event loop: the run goes off thread, its
result and failures come back as the session's message, the run counter moves, and a
burst of interim plans redraws the page once."""

from __future__ import annotations

import pytest
from ui_town import LEVEL, new_store

from ui.runner import Runner
from ui.session import Session
from ui.state import SessionState


def test_session_state_reruns_off_thread_and_reports(inputs):
    st = new_store(inputs)
    session = Session(st)  # no event loop: results are applied where they arrive
    state = session.state
    assert state.level == LEVEL
    state.max_util_pct = 95.0
    assert st.settings.max_utilization == pytest.approx(0.95)
    session.rerun()
    session.wait(120)
    assert not state.running
    assert state.runs_finished == 1  # the counter the browser tests wait on
    assert state.plan_version >= 1  # interim plans may redraw the page before the end
    assert state.message_kind in ("success", "warning") and state.message
    assert st.outcome is not None
    session.select([st.unit_ids[0]])
    state.target_site = st.site_ids[0]
    session.lock_selection()
    assert st.settings.locks == {st.unit_ids[0]: st.site_ids[0]}
    session.select(["nope"])
    session.lock_selection()
    assert state.message_kind == "danger" and "unknown planning unit" in state.message
    for sid in st.site_ids:
        st.edit_site(sid, capacity=10)
    session.rerun()
    session.wait(120)
    assert state.message_kind == "danger"
    assert "meets every rule" in state.message or "No valid plan" in state.message
    assert state.runs_finished == 2 and not state.running  # a failed run ends too


def test_interim_plans_redraw_once_per_batch(inputs):
    queue = []  # the page's event loop, run by hand
    state = SessionState()
    runner = Runner(new_store(inputs), state, schedule=queue.append)
    state.running = True
    for _ in range(3):  # three better plans arrive before the page's loop runs
        runner._on_plan(None)
    assert len(queue) == 1
    queue.pop()()
    assert state.plan_version == 1
    runner._on_plan(None)  # a later plan is shown again
    queue.pop()()
    assert state.plan_version == 2
    state.running = False
    runner._on_plan(None)  # arriving after the run ended: the final result redraws instead
    queue.pop()()
    assert state.plan_version == 2
