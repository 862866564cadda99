"""The workbench's store (ui/store.py) without a browser: edits, locks and runs.

A small invented grid town (tests/ui_town.py) is solved for real by the engine; every
check reads back what the store computed (locks honoured by the plan, the plan on screen
kept when a run fails, interim plans valid and improving).
"""

from __future__ import annotations

import pytest
from ui_town import LEVEL, boundary_pair, new_store

from ui.store import LockRow, StoreError


def test_locks_and_forbids_are_kept_and_listed(inputs):
    st = new_store(inputs)
    u1, u2 = st.unit_ids[:2]
    site, other = st.site_ids[:2]
    st.lock([u1, u2], site)
    st.forbid([u1], other)
    rows = st.lock_rows()
    assert LockRow(u1, site, "lock", "workbench") in rows
    assert LockRow(u2, site, "lock", "workbench") in rows
    assert LockRow(u1, other, "forbid", "workbench") in rows
    st.forbid([u2], site)  # forbidding the locked pair drops that lock
    assert u2 not in st.settings.locks and site in st.settings.forbids[u2]
    st.lock([u2], site)  # and locking it again drops the forbid
    assert st.settings.locks[u2] == site and u2 not in st.settings.forbids
    st.remove([LockRow(u1, site, "lock", "workbench")])
    assert u1 not in st.settings.locks
    st.allow([u1])
    assert st.settings.forbids == {}
    st.unlock([u2])
    assert st.settings.locks == {}


def test_bad_edits_say_what_to_change(inputs):
    st = new_store(inputs)
    with pytest.raises(StoreError, match="unknown planning unit"):
        st.lock(["NOT-A-UNIT"], st.site_ids[0])
    with pytest.raises(StoreError, match="pick a middle school"):
        st.lock([st.unit_ids[0]], "E01")  # not a school of this town
    with pytest.raises(StoreError, match="select one or more"):
        st.lock([], st.site_ids[0])
    with pytest.raises(StoreError, match="capacity of"):
        st.edit_site(st.site_ids[0], capacity=-5)
    with pytest.raises(StoreError, match="status of"):
        st.edit_site(st.site_ids[0], status="demolished")
    with pytest.raises(StoreError, match="plan year"):
        st.update_settings(plan_year=1999)
    with pytest.raises(StoreError, match="min utilization must be between 0 and 1"):
        st.update_settings(min_utilization=1.5)
    st.update_settings(max_utilization=0.9)
    with pytest.raises(StoreError, match="min_utilization 0.95 is above max_utilization 0.9"):
        st.update_settings(min_utilization=0.95)
    st.edit_site(st.site_ids[0], status="closing")
    with pytest.raises(StoreError, match="closing"):
        st.lock([st.unit_ids[0]], st.site_ids[0])


def test_rerun_honours_a_lock_and_keeps_the_previous_plan(inputs):
    st = new_store(inputs)
    first = st.rerun()
    assert first.plan.feasible and first.level == LEVEL
    unit, site = boundary_pair(first, inputs)
    assert st.units_frame().set_index("unit_id").loc[unit, "proposed"] != site
    st.lock([unit], site)
    assert st.pending_edits
    # before the rerun the map already shows the lock (the plan is re-evaluated, not solved)
    assert st.units_frame().set_index("unit_id").loc[unit, "locked"] == site
    second = st.rerun()
    assert second.site_id_of(second.assignment)[second.unit_ids.index(unit)] == site
    assert st.previous[LEVEL] is first and st.outcome is second
    assert not st.pending_edits
    change = st.changes_frame(second, first)
    assert unit in set(change["unit_id"])


def test_cancel_keeps_the_best_plan_found(inputs):
    st = new_store(inputs)
    st.update_settings(gap=0.0)
    # Cancelled at once: no integer round runs, so only a plan found before the first round
    # can come back. On this town today's zones cannot be repaired (two schools' own units
    # lie in other zones), but the LP's own choice, made valid by local search, is a plan
    # before any round, so the cancel keeps it; it even meets the LP bound here, so it
    # may come back proven optimal (gap 0) rather than cancelled.
    kept = st.rerun(cancel=lambda: True)
    assert kept.plan.feasible and kept.plan.rounds == 0
    assert kept.plan.status == "cancelled" or (
        kept.plan.status == "optimal" and kept.plan.gap <= 1e-12)
    rounds = []
    # Cancelled after the first round: the best valid plan so far comes back (on this small
    # town round 1 may already prove it, then the status is optimal).
    out = st.rerun(progress=rounds.append, cancel=lambda: len(rounds) >= 1)
    assert out.plan.feasible and out.plan.status in ("cancelled", "optimal")
    assert st.outcome is out
    # After a lock, a cancel at once keeps the best valid plan: the repaired warm start,
    # which honours the lock.
    unit, site = boundary_pair(out, inputs)
    st.lock([unit], site)
    kept = st.rerun(cancel=lambda: True)
    assert kept.plan.feasible and kept.plan.status in ("cancelled", "optimal")
    assert kept.site_id_of(kept.assignment)[kept.unit_ids.index(unit)] == site


def test_better_plans_go_on_screen_while_the_solver_works(inputs):
    from districting.engine.connectivity import UnitGraph, plan_checks

    st = new_store(inputs)
    st.update_settings(gap=0.0)
    seen = []

    def on_plan(out):
        assert st.outcome is out  # on screen at once
        seen.append(out)

    final = st.rerun(on_plan=on_plan)
    assert seen, "no interim plan was offered"
    graph = UnitGraph.of(final.problem)
    costs = [o.plan.objective for o in seen]
    assert costs == sorted(costs, reverse=True)  # each one better than the last
    for o in seen:
        assert not plan_checks(o.problem, o.assignment, graph)  # every one is valid
    assert final.plan.objective <= costs[-1] + 1e-6
    assert st.outcome is final


def test_infeasible_rerun_keeps_the_plan_on_screen(inputs):
    st = new_store(inputs)
    first = st.rerun()
    for sid in st.site_ids:
        st.edit_site(sid, capacity=10)  # nowhere near the students
    with pytest.raises(StoreError, match="No plan fits|No valid plan|meets every rule"):
        st.rerun()
    assert st.outcome is first


def test_travel_is_a_setting_the_workbench_offers(inputs):
    """The grid town has no streets: the selector offers the two other measures, and the
    choice reaches the problem solved (a session shows it, a page reload keeps it)."""
    from ui.session import Session

    st = new_store(inputs)
    assert st.travel_measures() == ["barrier-aware", "straight-line"]
    with pytest.raises(StoreError, match="not available here"):
        st.update_settings(travel="streets")
    page = Session(st)
    assert page.state.param.travel.objects == ["barrier-aware", "straight-line"]
    page.state.travel = "straight-line"
    assert st.settings.travel == "straight-line" and st.effective.travel == "straight-line"
    assert Session(st).state.travel == "straight-line"


def test_walk_and_group_rules_are_settings_the_workbench_offers(inputs):
    """keep_walkers, the transport limit and the group band: checked by the store, passed
    to the run, shown again by a new page."""
    from ui.session import Session

    st = new_store(inputs)
    with pytest.raises(StoreError, match="group band must be between 0 and 100"):
        st.update_settings(group_band=150)
    page = Session(st)
    page.state.keep_walkers = True
    page.state.group_band = 12.0
    page.state.max_transported = 300.0
    assert st.effective.keep_walkers is True and st.effective.group_band == 12.0
    assert st.effective.max_transported == 300.0
    again = Session(st).state
    assert (again.keep_walkers, again.group_band, again.max_transported) == (True, 12.0, 300.0)
