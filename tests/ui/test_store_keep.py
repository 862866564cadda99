"""A workbench rerun after a lock keeps the plan being edited (ui/store.py `Store.rerun`):
it is charged the project's keep_option_weight per student moved away from the plan on
screen, and the figures against that plan are counted again here from the store's own
comparison of the two plans (`changes_frame`), and from today's zones by hand.

The town is the invented grid of tests/ui_town.py, solved for real.
"""

from __future__ import annotations

import numpy as np
from ui_town import boundary_pair, new_store

from districting.outputs.option_edit import edit_figures, edit_lines


def test_rerun_after_a_lock_is_charged_against_the_plan_on_screen(inputs):
    st = new_store(inputs)
    first = st.rerun()
    assert first.problem.anchor is None  # a first run has no plan to keep
    unit, site = boundary_pair(first, inputs)
    st.lock([unit], site)
    second = st.rerun()
    p = second.problem
    assert np.array_equal(p.anchor, first.assignment)
    assert p.anchor_weight == 3000.0  # the schema's default (the project sets none)
    f = edit_figures(second)
    assert f.moved_vs_option == st.changes_frame(second, first)["students"].sum() > 0
    d0 = p.demand[0]
    a = second.assignment
    assert f.moved_vs_today == d0[(p.current >= 0) & (p.current != a)].sum()
    assert any("price of the edit" in line for line in edit_lines(second))
    # the plan kept is no pending edit, and the plan on screen still reports against it
    assert not st.pending_edits and edit_figures(st.on_screen()) == f


def test_weight_zero_is_a_free_rerun(inputs):
    st = new_store(inputs)
    first = st.rerun()
    st.update_settings(keep_option_weight=0.0)
    unit, site = boundary_pair(first, inputs)
    st.lock([unit], site)
    second = st.rerun()
    assert second.problem.anchor_weight == 0.0
    assert "not charged: a free rerun" in edit_lines(second)[0]


def test_settings_card_sets_the_charge(inputs):
    from ui.session import Session

    s = Session(new_store(inputs))
    assert s.state.keep_option_weight == 3000.0  # shown from the project's default
    s.state.keep_option_weight = 500.0  # the settings card's field
    assert s.store.settings.keep_option_weight == 500.0
    assert s.store.effective.keep_option_weight == 500.0
