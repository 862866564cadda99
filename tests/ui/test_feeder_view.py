"""The workbench's feeder table (ui/views/results.py) on the six-unit town of
tests/outputs/test_feeders.py: after a rerun of the middle level, each unit goes to its
nearer middle school (Cedar: U0-U2, Dunmore: U3-U5), so today's elementary zones feed
whole: Alder's 60 students all go to Cedar, Birch's 20 to Dunmore (counts by hand in that
module's docstring)."""

from __future__ import annotations

import importlib.util
from pathlib import Path

from ui.session import Session
from ui.store import Store
from ui.views.results import ResultsView

_spec = importlib.util.spec_from_file_location(
    "feeder_town_module", Path(__file__).parents[1] / "outputs" / "test_feeders.py")
_town = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(_town)


def test_the_changes_tab_shows_the_feeder_table_after_a_rerun(tmp_path):
    store = Store(_town.feeder_town(tmp_path))
    store.set_level("middle")
    session = Session(store)
    store.rerun()
    session.state.plan_version += 1
    shown = ResultsView(session).feeders.value
    rows = shown[["From school", "To school", "Students 2027",
                  "Share of the from school's students (%)", "From school splits"]]
    assert rows.values.tolist() == [
        ["Alder Elementary", "Cedar Middle", "60", "100.0", "no"],
        ["Birch Elementary", "Dunmore Middle", "20", "100.0", "no"]]
