"""Named options and workbench state in the project's GeoPackage store."""

from __future__ import annotations

import os
import signal
import sqlite3
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import numpy as np
import pyogrio
import pytest
from exports_town import make_outcome, make_town, nearest_assignment, no_plan_outcome

from districting.outputs.store import (
    ASSIGNMENTS_TABLE,
    COLOURS_TABLE,
    OPTIONS_TABLE,
    STATE_TABLE,
    ZONES_LAYER,
    OptionError,
    delete_option,
    list_options,
    load_option,
    load_state,
    metrics_to_dict,
    option_settings,
    rename_option,
    save_option,
    save_state,
)
from districting.study import RunSettings, outcome_from_assignment

TESTS = Path(__file__).parents[1]


def metrics_dict(outcome):
    return metrics_to_dict(outcome.metrics, outcome.site_ids, outcome.problem.years)


def assert_same_outcome(a, b):
    assert a.settings == b.settings
    np.testing.assert_array_equal(a.assignment, b.assignment)
    np.testing.assert_array_equal(a.plan.open_sites, b.plan.open_sites)
    assert a.plan.status == b.plan.status
    assert a.plan.rounds == b.plan.rounds
    assert a.plan.message == b.plan.message
    for f in ("objective", "bound", "gap"):
        np.testing.assert_allclose(getattr(a.plan, f), getattr(b.plan, f), equal_nan=True)
    ma, mb = a.metrics, b.metrics
    for f in ("load", "utilization", "moved_in", "moved_out", "mean_distance",
              "max_distance", "out_of_band"):
        np.testing.assert_allclose(getattr(ma, f), getattr(mb, f), equal_nan=True)
    assert ma.students_moved == mb.students_moved
    assert ma.units_moved == mb.units_moved
    assert ma.overall_mean_distance == pytest.approx(mb.overall_mean_distance)


@pytest.fixture
def town(tmp_path):
    return make_town(tmp_path)


def test_round_trip_restores_every_option(town):
    first = make_outcome(town, stability_weight=120.0, locks={"U0005": "E02"})
    # a second option: move one unit to another school by hand
    a = first.assignment.copy()
    a[0] = (a[0] + 1) % len(first.site_ids)
    second = outcome_from_assignment(town, RunSettings(level="elementary", max_utilization=0.95),
                                     a, {"status": "optimal", "bound": 1.0, "gap": 0.0})
    save_option(town, first, "Option A — keep Larkwhistle")
    save_option(town, second, "Option B: 'quotes' & DROP TABLE x --")
    infos = list_options(town.settings.store)
    assert [i.name for i in infos] == ["Option A — keep Larkwhistle",
                                       "Option B: 'quotes' & DROP TABLE x --"]
    assert infos[0].level == "elementary" and infos[0].plan_year == 2027
    assert infos[0].students_moved == first.metrics.students_moved
    assert infos[1].status == "optimal"
    assert infos[0].mean_distance == pytest.approx(first.metrics.overall_mean_distance)
    assert infos[0].out_of_band == int(first.metrics.out_of_band.sum())
    assert infos[0].n_units == len(town.units)

    back_a = load_option(town, infos[0].name)
    back_b = load_option(town, infos[1].name)
    assert_same_outcome(first, back_a)
    assert_same_outcome(second, back_b)
    assert back_a.settings.locks == {"U0005": "E02"}
    assert back_a.settings.stability_weight == 120.0
    assert back_a.name == infos[0].name and back_a.created == first.created
    assert option_settings(town.settings.store, infos[1].name) == second.settings
    # the saved metrics JSON equals the recomputed metrics
    con = sqlite3.connect(town.settings.store)
    import json
    saved = json.loads(con.execute(f"SELECT metrics_json FROM {OPTIONS_TABLE} WHERE name=?",
                                   (infos[0].name,)).fetchone()[0])
    n_rows = con.execute(f"SELECT count(*) FROM {ASSIGNMENTS_TABLE}").fetchone()[0]
    con.close()
    fresh = metrics_dict(back_a)
    np.testing.assert_allclose(np.array(saved["load"], float), np.array(fresh["load"], float))
    assert saved["site_ids"] == back_a.site_ids
    assert n_rows == 2 * len(town.units)


def test_store_is_a_geopackage_that_gdal_lists(town):
    save_option(town, make_outcome(town), "A")
    save_state(town.settings.store, "workbench", {"level": "elementary"})
    store = town.settings.store
    con = sqlite3.connect(store)
    app_id, version = (con.execute("PRAGMA application_id").fetchone()[0],
                       con.execute("PRAGMA user_version").fetchone()[0])
    kinds = dict(con.execute("SELECT table_name, data_type FROM gpkg_contents").fetchall())
    assert con.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
    con.close()
    assert app_id == 0x47504B47 and version == 10300  # GeoPackage 1.3, clause 1.1.1.1
    assert kinds == {OPTIONS_TABLE: "attributes", ASSIGNMENTS_TABLE: "attributes",
                     STATE_TABLE: "attributes", COLOURS_TABLE: "attributes",
                     ZONES_LAYER: "features"}
    # GDAL (through pyogrio, an independent reader) sees the attribute tables as layers
    layers = {name for name, _ in pyogrio.list_layers(store)}
    assert {OPTIONS_TABLE, ASSIGNMENTS_TABLE, STATE_TABLE} <= layers
    df = pyogrio.read_dataframe(store, layer=ASSIGNMENTS_TABLE)
    assert len(df) == len(town.units) and set(df["option"]) == {"A"}


def test_zones_layer_follows_the_options(town):
    store = town.settings.store
    out = make_outcome(town)
    save_option(town, out, "A")
    save_option(town, out, "B's")
    zones = pyogrio.read_dataframe(store, layer=ZONES_LAYER)
    assert sorted(set(zones["option"])) == ["A", "B's"]
    a = zones[zones["option"] == "A"].reset_index(drop=True)
    assert list(a["site_id"]) == out.site_ids
    np.testing.assert_allclose(a["students"], out.metrics.load[0])
    assert a.geometry.area.sum() == pytest.approx(town.units.geometry.area.sum())
    assert a.crs.equals(town.crs)
    rename_option(store, "B's", "C")
    delete_option(store, "A")
    zones = pyogrio.read_dataframe(store, layer=ZONES_LAYER)
    assert set(zones["option"]) == {"C"} and len(zones) == len(out.site_ids)
    save_option(town, out, "C", overwrite=True)
    assert len(pyogrio.read_dataframe(store, layer=ZONES_LAYER)) == len(out.site_ids)


def test_store_can_be_a_gdal_geopackage_with_layers(tmp_path):
    town = make_town(tmp_path, store_name="town.gpkg")
    pyogrio.write_dataframe(town.units.drop(columns="point"), town.settings.store, layer="units")
    save_option(town, make_outcome(town), "A")
    layers = {name for name, _ in pyogrio.list_layers(town.settings.store)}
    assert {"units", OPTIONS_TABLE} <= layers
    assert len(pyogrio.read_dataframe(town.settings.store, layer="units")) == len(town.units)
    assert [i.name for i in list_options(town.settings.store)] == ["A"]


def test_name_errors_list_the_options(town):
    out = make_outcome(town)
    save_option(town, out, "Alpha")
    save_option(town, out, "Beta")
    with pytest.raises(OptionError, match=r"'Gamma'.*'Alpha', 'Beta'"):
        load_option(town, "Gamma")
    with pytest.raises(OptionError, match="exists"):
        save_option(town, out, "Alpha")
    with pytest.raises(OptionError, match="exists"):
        rename_option(town.settings.store, "Alpha", "Beta")
    with pytest.raises(OptionError, match="no option named 'Zeta'"):
        delete_option(town.settings.store, "Zeta")
    with pytest.raises(OptionError, match="name is empty"):
        save_option(town, out, "   ")
    assert list_options(town.settings.store)[0].name == "Alpha"


def test_no_plan_is_not_saved_and_says_why_on_lines(town):
    with pytest.raises(OptionError, match="'Nope' has no valid plan: No plan: too few") as err:
        save_option(town, no_plan_outcome(town), "Nope")
    assert str(err.value).splitlines()[1:3] == ["  - Alder: 40 students over",
                                                "  - Birch: 12 students over"]
    assert list_options(town.settings.store) == []


def test_overwrite_rename_delete(town):
    out = make_outcome(town)
    save_option(town, out, "Alpha")
    moved = out.assignment.copy()
    moved[:3] = 0
    other = outcome_from_assignment(town, out.settings, moved)
    save_option(town, other, "Alpha", overwrite=True)
    assert len(list_options(town.settings.store)) == 1
    np.testing.assert_array_equal(load_option(town, "Alpha").assignment, moved)
    rename_option(town.settings.store, "Alpha", "Alpha (revised)")
    assert [i.name for i in list_options(town.settings.store)] == ["Alpha (revised)"]
    np.testing.assert_array_equal(load_option(town, "Alpha (revised)").assignment, moved)
    delete_option(town.settings.store, "Alpha (revised)")
    assert list_options(town.settings.store) == []
    con = sqlite3.connect(town.settings.store)
    assert con.execute(f"SELECT count(*) FROM {ASSIGNMENTS_TABLE}").fetchone()[0] == 0
    con.close()


def test_no_store_yet(tmp_path):
    town = make_town(tmp_path)
    assert list_options(town.settings.store) == []
    assert load_state(town.settings.store, "workbench") is None
    with pytest.raises(OptionError, match="none saved yet"):
        load_option(town, "A")
    assert not town.settings.store.exists()


def test_not_a_geopackage(tmp_path):
    town = make_town(tmp_path)
    town.settings.store.write_text("unit_id,site\n")
    with pytest.raises(OptionError, match="not a GeoPackage"):
        save_option(town, make_outcome(town), "A")
    assert town.settings.store.read_text() == "unit_id,site\n"


def test_load_checks_the_project_still_matches(tmp_path):
    town = make_town(tmp_path)
    save_option(town, make_outcome(town), "A")
    bigger = make_town(tmp_path, nx=11)  # same store, one more column of units
    with pytest.raises(OptionError, match="does not match the project's units"):
        load_option(bigger, "A")
    changed = make_town(tmp_path, seed=8)  # same units, other student counts
    with pytest.warns(UserWarning, match="differ from those saved"):
        back = load_option(changed, "A")
    np.testing.assert_array_equal(back.assignment, nearest_assignment(changed))


def test_state_round_trip(town):
    store = town.settings.store
    state = {"level": "elementary", "locks": {"U0001": "E02"}, "caps": [0.9, 1.0],
             "note": "Überlegung – draft", "open": {"E03": False}, "n": 3}
    save_state(store, "workbench", state)
    save_state(store, "other", {"x": 1})
    assert load_state(store, "workbench") == state
    state["locks"]["U0002"] = "E01"
    save_state(store, "workbench", state)
    assert load_state(store, "workbench") == state
    assert load_state(store, "other") == {"x": 1}
    assert load_state(store, "missing") is None
    with pytest.raises(ValueError, match="not JSON"):
        save_state(store, "workbench", {"bad": object()})
    assert load_state(store, "workbench") == state  # a failed save changes nothing


def test_failed_save_leaves_store_unchanged(town, monkeypatch):
    save_option(town, make_outcome(town), "A")
    before = town.settings.store.read_bytes()

    class Boom(RuntimeError):
        pass

    import districting.outputs.store.options as options  # save_option calls its _touch

    def explode(con, *tables):
        raise Boom("disk full")

    monkeypatch.setattr(options, "_touch", explode)
    with pytest.raises(Boom):
        save_option(town, make_outcome(town), "B")
    assert town.settings.store.read_bytes() == before
    assert not list(town.settings.store.parent.glob(".tmp-*"))
    assert not list(town.settings.store.parent.glob(".*.lock"))


# ------------------------------------------------------------------ kill -9 during a save
WRITER = textwrap.dedent(
    """
    import sys
    from pathlib import Path
    sys.path.insert(0, sys.argv[1])
    from exports_town import make_outcome, make_town
    from districting.outputs.store import save_option, save_state
    town = make_town(Path(sys.argv[2]), nx=40, ny=30)
    out = make_outcome(town)
    k = int(sys.argv[3])
    if k == 0:  # ballast: every later save copies, writes and fsyncs a store of ~30 MB
        save_state(town.settings.store, "ballast", {"rows": ["x" * 1000] * 30_000})
    while True:
        save_option(town, out, f"run {k}")
        save_state(town.settings.store, "workbench", {"last": k})
        print(k, flush=True)
        k += 1
    """
)
N_KILL_UNITS = 40 * 30


def _integrity(store: Path) -> str:
    con = sqlite3.connect(store)
    try:
        return con.execute("PRAGMA integrity_check").fetchone()[0]
    finally:
        con.close()


def test_sigkill_mid_save_keeps_previous_options(tmp_path):
    """Kill a writer with SIGKILL while it saves large options in a loop; the store survives.

    A stray temporary copy left beside the store shows the kill landed inside a save.
    """
    start = 0
    hit_mid_save = False
    rng = np.random.default_rng(1)
    for _attempt in range(6):
        proc = subprocess.Popen(
            [sys.executable, "-c", WRITER, str(TESTS), str(tmp_path), str(start)],
            stdout=subprocess.PIPE, text=True, env={**os.environ, "PYTHONHASHSEED": "0"},
        )
        done = []
        try:
            while len(done) < 2:
                line = proc.stdout.readline()
                assert line, "the writer stopped before saving twice"
                done.append(int(line))
            time.sleep(float(rng.uniform(0.0, 0.3)))
        finally:
            proc.send_signal(signal.SIGKILL)
            proc.wait()
            # saves reported while the test slept count too (their lines are still unread)
            done += [int(x) for x in proc.stdout.read().split()]
            proc.stdout.close()
        store = tmp_path / "options.gpkg"
        leftovers = list(tmp_path.glob(".tmp-options-*"))
        hit_mid_save |= bool(leftovers)
        assert _integrity(store) == "ok"
        names = [i.name for i in list_options(store)]
        expected = [f"run {k}" for k in range(done[-1] + 1)]
        assert names[: len(expected)] == expected
        assert len(names) <= len(expected) + 1  # the save under way finished before the kill
        state = load_state(store, "workbench")
        assert state["last"] in (len(names) - 1, len(names) - 2)
        con = sqlite3.connect(store)
        per_option = dict(con.execute(
            f"SELECT option, count(*) FROM {ASSIGNMENTS_TABLE} GROUP BY option").fetchall())
        zones = dict(con.execute(
            f"SELECT option, count(*) FROM {ZONES_LAYER} GROUP BY option").fetchall())
        con.close()
        # no option half-written: every listed option has all its units and all its zones
        assert per_option == {n: N_KILL_UNITS for n in names}
        assert zones == {n: 4 for n in names}
        start = len(names)
        if hit_mid_save and _attempt >= 1:
            break
    assert hit_mid_save, "no kill landed inside a save; the test did not exercise it"
    # the next save clears the stray copies and works
    town = make_town(tmp_path, nx=40, ny=30)
    save_option(town, make_outcome(town), "after")
    assert not list(tmp_path.glob(".tmp-options-*"))
    assert load_option(town, "run 0").assignment.shape == (N_KILL_UNITS,)
    assert len(load_state(tmp_path / "options.gpkg", "ballast")["rows"]) == 30_000


# ------------------------------------------------------------------ leftovers and damage
def test_no_lock_file_is_left_beside_the_store(town):
    store = town.settings.store
    save_option(town, make_outcome(town), "A")
    save_state(store, "workbench", {"x": 1})
    rename_option(store, "A", "B")
    delete_option(store, "B")
    assert sorted(p.name for p in store.parent.iterdir() if p.name.startswith(".")) == []


def test_stale_copies_go_at_start_unless_a_writer_is_at_work(town):
    import fcntl

    from districting.outputs.store import tidy_store

    store = town.settings.store
    save_option(town, make_outcome(town), "A")
    # what a writer killed mid-save leaves: its copy, the copy's journal, its lock file
    stale = [store.parent / ".tmp-options-k1ll3d00.gpkg",
             store.parent / ".tmp-options-k1ll3d00.gpkg-journal",
             store.parent / ".options.gpkg.lock"]
    for p in stale:
        p.write_bytes(b"")
    mine = store.parent / ".tmp-other-k1ll3d00.gpkg"  # not the store's: left alone
    mine.write_bytes(b"x")
    with open(stale[2], "a") as fh:  # another process is saving right now
        fcntl.flock(fh.fileno(), fcntl.LOCK_EX)
        tidy_store(store)
        assert all(p.exists() for p in stale)
        fcntl.flock(fh.fileno(), fcntl.LOCK_UN)
    tidy_store(store)  # e.g. `districting options` or a workbench page starting
    assert not any(p.exists() for p in stale) and mine.exists()
    assert [i.name for i in list_options(store)] == ["A"]


def _damage(store: Path) -> bytes:
    data = store.read_bytes()
    store.write_bytes(data[: len(data) // 3])  # cut short, as a full disk or a bad copy leaves it
    return store.read_bytes()


def test_a_damaged_store_is_named_never_a_traceback(town):
    from districting.outputs.store import StoreDamaged, repair_store, state_record, store_problem

    store = town.settings.store
    save_option(town, make_outcome(town), "A")
    assert store_problem(store) == ""
    cut = _damage(store)
    for action in (lambda: save_state(store, "workbench", {"x": 1}),
                   lambda: save_option(town, make_outcome(town), "B"),
                   lambda: list_options(store), lambda: state_record(store, "workbench")):
        with pytest.raises(StoreDamaged) as err:
            action()
        assert str(store) in str(err.value) and "--repair" in str(err.value)
        assert store.read_bytes() == cut  # left as it was
    assert store_problem(store)
    aside = repair_store(store)
    assert aside.parent == store.parent and aside.name.startswith("options.damaged-")
    assert aside.read_bytes() == cut
    assert list_options(store) == [] and store_problem(store) == ""
    save_option(town, make_outcome(town), "A")  # the new store works
    assert repair_store(store) is None  # a whole store is never moved


def test_not_an_sqlite_file_is_named(town):
    from districting.outputs.store import StoreDamaged

    store = town.settings.store
    store.write_text("name,level\nA,high\n")
    with pytest.raises(StoreDamaged, match="does not start as an SQLite file"):
        list_options(store)


def test_state_revisions_refuse_a_stale_save(town):
    from districting.outputs.store import StateConflict, state_record

    store = town.settings.store
    assert state_record(store, "w") == (None, 0)
    assert save_state(store, "w", {"by": "a"}, expected=0) == 1
    assert save_state(store, "w", {"by": "a"}, expected=1) == 2
    with pytest.raises(StateConflict, match="another session"):
        save_state(store, "w", {"by": "b"}, expected=1)
    with pytest.raises(StateConflict):
        save_state(store, "w", {"by": "b"}, expected=0)  # b thought there was no record
    assert state_record(store, "w") == ({"by": "a"}, 2)
    assert save_state(store, "w", {"by": "c"}) == 3  # no expectation: last writer wins


def test_records_of_an_older_store_get_revisions(town):
    from districting.outputs.store import state_record

    store = town.settings.store
    save_option(town, make_outcome(town), "A")
    con = sqlite3.connect(store)  # the state table as stores had it before revisions
    con.execute(f"DROP TABLE {STATE_TABLE}")
    con.execute(f"CREATE TABLE {STATE_TABLE} (fid INTEGER PRIMARY KEY AUTOINCREMENT, "
                "key TEXT NOT NULL UNIQUE, updated TEXT NOT NULL, state_json TEXT NOT NULL)")
    con.execute(f"INSERT INTO {STATE_TABLE} (key, updated, state_json) VALUES "
                "('workbench', 'x', '{\"old\": true}')")
    con.commit()
    con.close()
    assert state_record(store, "workbench") == ({"old": True}, 1)
    assert save_state(store, "workbench", {"new": True}, expected=1) == 2
    assert [i.name for i in list_options(store)] == ["A"]
