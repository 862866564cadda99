"""The feeder rule and the transport charge chosen on the workbench settings card
(ui/state.py -> ui/session.py -> ui/store.py, ui/store_feeders.py) reach the rerun.

Feeder rule: the six-unit town of tests/outputs/test_feeders.py (units U0 ... U5 in a row,
250 m squares; Cedar Middle M1 at U0, Dunmore Middle M2 at U5, 8 middle students per unit).
Worked by hand: with no rule, each unit goes to its nearer middle school, so U3 (750 m from
Cedar, 500 m from Dunmore) goes to Dunmore. A saved elementary option "Elementary B" has
Alder (E1) = U0-U3 and Birch (E2) = U4-U5; whole feeding against it keeps Alder's zone in
one middle zone, so U3 goes with U0-U2 to Cedar.

Transport charge: the grid town of tests/ui_town.py with a 600 m walking distance; the
students beyond it are counted by hand from straight-line distances between unit and
school points (the town has no streets).
"""

from __future__ import annotations

import dataclasses
import importlib.util
from pathlib import Path

import numpy as np
import pytest
import shapely
from ui_town import new_store

from districting.engine.run import objective
from districting.intake.records import WalkSettings
from districting.outputs.store import save_option
from districting.study import RunSettings, outcome_from_assignment
from ui.session import Session
from ui.state import TODAY_ZONES
from ui.store import Store

_spec = importlib.util.spec_from_file_location(
    "feeder_town_module_card", Path(__file__).parents[1] / "outputs" / "test_feeders.py")
_town = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(_town)

ELEMENTARY_B = np.array([0, 0, 0, 0, 1, 1])  # Alder U0-U3, Birch U4-U5 (level's site order)


def _town_with_option(tmp_path):
    inputs = _town.feeder_town(tmp_path)
    option = outcome_from_assignment(inputs, RunSettings(level="elementary"), ELEMENTARY_B,
                                     {"status": "feasible"}, name="Elementary B")
    save_option(inputs, option, "Elementary B")
    return inputs


def _middle_session(inputs) -> Session:
    store = Store(inputs)
    store.set_level("middle")
    return Session(store)


def test_whole_feeding_chosen_on_the_card_keeps_every_lower_zone_whole(tmp_path):
    s = _middle_session(_town_with_option(tmp_path))
    assert s.state.feeding == "none"  # the project's [feeders]: no rule
    free = s.store.rerun()
    assert free.site_id_of(free.assignment).tolist()[3] == "M2"  # the nearer school
    s.state.feeding = "whole"
    assert s.state.message_kind != "danger", s.state.message
    assert s.state.param.given_option.objects == [TODAY_ZONES, "Elementary B"]
    s.state.given_option = "Elementary B"
    assert s.store.settings.given_name == "Elementary B"
    out = s.store.rerun()
    middle = out.site_id_of(out.assignment).tolist()
    assert middle == ["M1", "M1", "M1", "M1", "M2", "M2"]
    for school in (0, 1):  # every elementary zone of the option lies in one middle zone
        assert len({middle[i] for i in np.flatnonzero(ELEMENTARY_B == school)}) == 1
    assert out.settings.feeding == "whole" and out.settings.given_name == "Elementary B"


def test_today_s_lower_zones_and_splits_are_kept_by_the_rerun(tmp_path):
    s = _middle_session(_town_with_option(tmp_path))
    s.state.feeding = "whole"
    s.state.max_splits = 1
    out = s.store.rerun()
    assert out.settings.given_name == "" and out.settings.max_splits == 1
    assert out.problem.feeder_splits == 1


def test_choices_that_cannot_apply_are_refused_in_words(tmp_path):
    inputs = _town_with_option(tmp_path)
    s = _middle_session(inputs)
    s.state.feeding = "nested"  # middle is the highest level
    assert s.state.message_kind == "danger"
    assert "highest level" in s.state.message and "Traceback" not in s.state.message
    assert s.state.feeding == "none" and s.store.settings.feeding is None
    s.state.level = "elementary"
    s.state.feeding = "whole"  # elementary is the lowest level
    assert "lowest level" in s.state.message and s.state.feeding == "none"
    s.state.feeding = "nested"
    assert s.store.settings.feeding == "nested", s.state.message
    assert s.state.param.given_option.objects == [TODAY_ZONES]  # no middle option saved
    from ui.store import StoreError

    try:  # a saved option of the wrong level (the store refuses it; the card cannot list it)
        s.store.update_settings(given_name="Elementary B")
    except StoreError as exc:
        assert "is a elementary option" in str(exc) and "middle" in str(exc)
        assert "--" not in str(exc)  # plain words, not the CLI's flags
    else:
        raise AssertionError("an elementary option was taken as the middle zones")
    s.state.max_splits = 2  # splits belong to whole feeding
    assert "whole feeding only" in s.state.message and s.state.max_splits == 0


def test_the_transport_charge_on_the_card_reaches_the_plan(inputs):
    walk = 600.0
    inputs = dataclasses.replace(inputs, settings=dataclasses.replace(
        inputs.settings, walking=WalkSettings(distance={"middle": walk})))
    s = Session(new_store(inputs))
    assert s.state.transport_charge == 0.0  # the schema's default: none
    s.state.transport_charge = 250.0  # the settings card's field
    assert s.store.effective.transport_charge == 250.0
    out = s.store.rerun()
    p, a = out.problem, out.assignment
    assert p.transport_weight == 250.0
    # students beyond walking distance of their school, counted by hand (straight lines)
    pts = shapely.get_coordinates(inputs.units["point"].to_numpy())
    xy = shapely.get_coordinates(inputs.sites.geometry.to_numpy())
    d = np.hypot(*(pts - xy[a]).T)
    beyond = float(p.demand[0][d > walk].sum())
    assert beyond > 0
    free = objective(dataclasses.replace(p, transport_weight=0.0), a)
    assert objective(p, a) - free == pytest.approx(250.0 * beyond, rel=1e-9)


def test_a_deleted_option_is_refused_at_the_rerun_and_none_restores_the_project_s(tmp_path):
    s = _middle_session(_town_with_option(tmp_path))
    s.state.feeding = "whole"
    s.state.given_option = "Elementary B"
    s.store.delete_option("Elementary B")
    from ui.store import StoreError

    with pytest.raises(StoreError, match="no saved option named 'Elementary B'"):
        s.store.rerun()
    s.store.update_settings(feeding=None, given_name=None, max_splits=None)
    assert s.store.settings.feeding is None and s.store.feeder_choice() == ("none", "", 0)
