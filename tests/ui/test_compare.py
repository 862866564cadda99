"""Side-by-side compare (ui/views/compare.py): the difference map and the shared colours,
checked against the store's own change table and by hand."""

from __future__ import annotations

from ui_town import new_store

from ui.session import Session
from ui.views.compare import SCREEN_CHOICE, TODAY_CHOICE, CompareMaps, difference_fill
from ui.views.layers import NO_ZONE_COLOR


def test_difference_fill_by_hand():
    colors = {"A": "#111111", "B": "#222222"}
    assert difference_fill(["A", "A", "B", "B"], ["A", "B", "A", "B"], colors) == [
        NO_ZONE_COLOR, "#222222", "#111111", NO_ZONE_COLOR]


def test_two_plans_side_by_side_share_colours_and_ranges(inputs):
    session = Session(new_store(inputs))
    st = session.store
    st.rerun()
    st.save_option("Shortest trips")
    session.state.options_version += 1
    view = CompareMaps(session)
    assert view.first.value == TODAY_CHOICE and view.second.value == SCREEN_CHOICE
    assert "Shortest trips" in view.first.options.values()
    data = view.units.data
    changes = st.changes_frame(st.on_screen(), st.today())
    grey = [k for k, c in enumerate(data["fill_diff"]) if c == NO_ZONE_COLOR]
    assert len(data["fill_diff"]) - len(grey) == len(changes) > 0
    assert f"data-units-differ='{len(changes)}'" in view.summary.object
    # one colour per school on both maps: the same school never takes two colours
    pairs = set(zip(data["school_a"], data["fill_a"], strict=True)) | set(
        zip(data["school_b"], data["fill_b"], strict=True))
    assert len({school for school, _ in pairs}) == len(pairs)
    moved = changes["unit_id"].tolist()
    k = data["unit_id"].index(moved[0])
    assert data["fill_diff"][k] == data["fill_b"][k] != NO_ZONE_COLOR
    a, b, diff = view.figures
    assert a.x_range is b.x_range is diff.x_range and a.y_range is diff.y_range
    view.first.value = "Shortest trips"  # the saved option is the plan on screen
    assert set(view.units.data["fill_diff"]) == {NO_ZONE_COLOR}
