"""Undo and redo of locks and site edits (ui/history.py through ui/session.py).

Hand-worked sequences on the grid town (tests/ui_town.py): after each step the expected
locks, forbids and capacities are written out by hand, and the store file is read back by
a new store to show that undo and redo are saved like any edit.
"""

from __future__ import annotations

import pytest
from ui_town import new_store

from ui.history import History, describe_units
from ui.session import Session
from ui.store import Store


def session_on(inputs) -> Session:
    s = Session(new_store(inputs))
    return s


def lock(s: Session, units, site) -> None:
    s.select(units)
    s.state.target_site = site
    s.lock_selection()


def test_lock_lock_undo_edit_then_nothing_to_redo(inputs):
    s = session_on(inputs)
    st = s.store
    u1, u2, u3 = st.unit_ids[:3]
    m1, m2 = st.site_ids[:2]
    cap0 = st.sites_frame(resolved_settings=st.effective).set_index("site_id").loc[
        m2, "capacity"]
    lock(s, [u1], m1)
    lock(s, [u2, u3], m2)
    assert st.settings.locks == {u1: m1, u2: m2, u3: m2}
    assert s.undo()
    assert st.settings.locks == {u1: m1}
    assert "Undone: locked units" in s.state.message
    assert Store(inputs).runs[st.level].locks == {u1: m1}  # an undo is written at once
    s.edit_site(m2, capacity=321)
    assert st.settings.capacity == {m2: 321.0}
    assert not s.history.can_redo and not s.redo()  # the new edit dropped the undone lock
    assert st.settings.locks == {u1: m1}
    assert s.undo()  # the capacity goes back to the project's value
    assert st.settings.capacity == {}
    assert st.sites_frame(resolved_settings=st.effective).set_index("site_id").loc[
        m2, "capacity"] == cap0
    assert s.undo()
    assert st.settings.locks == {} and not s.history.can_undo and not s.undo()
    assert s.redo() and st.settings.locks == {u1: m1}
    assert s.redo() and st.settings.capacity == {m2: 321.0}
    assert not s.redo()
    assert Store(inputs).runs[st.level].capacity == {m2: 321.0}  # written like any edit
    assert Store(inputs).runs[st.level].locks == {u1: m1}
    words = [(t, done) for t, done in s.history.lines()]
    assert words == [
        ("set the capacity of Tumbleford Middle (M2) to 321 seats", True),
        (f"locked unit {u1} to Brackenlow Middle (M1)", True),
    ]


def test_undo_of_a_forbid_brings_back_the_lock_it_replaced(inputs):
    s = session_on(inputs)
    st = s.store
    u = st.unit_ids[5]
    m1 = st.site_ids[0]
    lock(s, [u], m1)
    s.forbid_selection()  # the same unit and school: the lock makes way for the forbid
    assert st.settings.locks == {} and st.settings.forbids == {u: [m1]}
    assert s.history.lines()[0] == (f"forbade Brackenlow Middle (M1) for unit {u}", True)
    s.undo()
    assert st.settings.locks == {u: m1} and st.settings.forbids == {}


def test_undo_leaves_settings_that_are_not_in_the_history(inputs):
    s = session_on(inputs)
    st = s.store
    lock(s, [st.unit_ids[0]], st.site_ids[0])
    s.state.max_util_pct = 95.0  # a band change: not a step
    s.undo()
    assert st.settings.locks == {}
    assert st.settings.max_utilization == pytest.approx(0.95)


def test_a_refused_edit_is_no_step(inputs):
    s = session_on(inputs)
    lock(s, ["NOT-A-UNIT"], s.store.site_ids[0])
    assert s.state.message_kind == "danger"
    assert s.history.steps == [] and not s.undo()
    assert not s.edit_site(s.store.site_ids[0], capacity=-1)
    assert s.history.steps == []


def test_opening_a_saved_option_starts_a_new_history(inputs):
    s = session_on(inputs)
    st = s.store
    st.rerun()
    s.save_option("Kept")
    lock(s, [st.unit_ids[0]], st.site_ids[0])
    assert s.history.can_undo
    assert s.open_option("Kept")
    assert s.history.steps == [] and st.settings.locks == {}


def test_history_alone():
    h = History()
    from ui_town import LEVEL

    from districting.study import RunSettings

    a = RunSettings(level=LEVEL)
    b = a.replace(locks={"G001": "M1"})
    assert h.record("no change", LEVEL, a, a) is None and h.steps == []
    h.record("one", LEVEL, a, b)
    h.record("two", LEVEL, b, b.replace(capacity={"M1": 5.0}))
    assert h.undo().text == "two" and h.undo().text == "one" and h.undo() is None
    assert h.lines() == [("two", False), ("one", False)]
    assert h.redo().after["locks"] == {"G001": "M1"}
    assert describe_units(["A"]) == "unit A"
    assert describe_units(["A", "B", "C"]) == "units A, B and C"
    assert describe_units(list("ABCDE")) == "5 units (A, B, C and 2 more)"
