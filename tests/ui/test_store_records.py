"""The store file (ui/store_records.py): the state read back by a fresh store, options,
two sessions on one project never writing over each other, drafts and reload."""

from __future__ import annotations

import numpy as np
import pytest
from ui_town import LEVEL, boundary_pair, new_store

from ui.store import TODAY, Store, StoreError


def test_state_is_restored_by_a_new_store(inputs):
    st = new_store(inputs)
    out = st.rerun()
    unit, site = boundary_pair(out, inputs)
    st.lock([unit], site)
    st.edit_site(st.site_ids[1], capacity=987, max_util=0.95)
    st.update_settings(stability_weight=250)
    out = st.rerun()
    st.save_option("Plan with lock")
    again = Store(inputs)
    assert again.level == LEVEL
    assert again.settings == st.settings
    assert again.outcome.name == "Plan with lock"
    assert np.array_equal(again.outcome.assignment, out.assignment)
    assert again.summary() == st.summary()
    assert "Plan with lock" in again.option_names()
    opened = again.load_option("Plan with lock")
    assert np.array_equal(opened.assignment, out.assignment)


def test_two_sessions_never_overwrite_each_other(inputs):
    a = new_store(inputs)
    b = Store(inputs)  # a second browser session on the same project
    assert b.level == LEVEL
    u, site = a.unit_ids[5], a.site_ids[0]
    a.lock([u], site)
    a.rerun()
    assert b.settings.locks == {} and b.outcome is None  # nothing shared in memory
    assert b.on_screen().name == TODAY
    # b's record is stale (a saved after b loaded it): b's edit is kept in b, not written
    b.edit_site(b.site_ids[2], capacity=1234)
    c = Store(inputs)  # the stored record still holds a's work
    assert c.settings.locks == {u: site} and c.outcome is not None
    assert b.conflict and "Another session saved" in b.problem
    assert b.settings.capacity == {b.site_ids[2]: 1234.0}
    assert a.settings.capacity == {} and not a.conflict
    # b keeps its edits as a draft of its own; a's record stays a's
    assert b.keep_as_draft("  Capacity test  ") == "Capacity test"
    assert not b.conflict and b.drafts() == ["Capacity test"]
    assert Store(inputs).settings.locks == {u: site}
    assert Store(inputs, draft="Capacity test").settings.capacity == {b.site_ids[2]: 1234.0}
    with pytest.raises(StoreError, match="exists"):
        Store(inputs).keep_as_draft("Capacity test")
    with pytest.raises(StoreError, match="letters and digits"):
        Store(inputs).keep_as_draft("../other")
    # both go on saving, each to its own record
    a.unlock([u])
    b.edit_site(b.site_ids[1], capacity=999)
    assert not a.conflict and not b.conflict
    assert Store(inputs).settings.locks == {}
    # reload: a stale session takes the saved work and then saves normally
    c.edit_site(c.site_ids[0], capacity=10)
    assert c.conflict and c.settings.capacity == {c.site_ids[0]: 10.0}
    c.reload()
    assert not c.conflict and c.settings == a.settings
    c.edit_site(c.site_ids[3], capacity=777)
    assert not c.conflict and Store(inputs).settings.capacity == {c.site_ids[3]: 777.0}
    a.edit_site(a.site_ids[0], capacity=20)  # now a is the stale one, and is told
    assert a.conflict and Store(inputs).settings.capacity == {c.site_ids[3]: 777.0}
