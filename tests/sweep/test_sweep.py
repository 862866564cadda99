"""Sweeps on the invented grid town (tests/sweep/conftest.py): every option saved once by
the client, resume, the same settings giving the same plan, a scheduler that does not
answer, and a worker process killed mid-sweep."""

from __future__ import annotations

import os
import signal
import socket
import sqlite3
import threading
import time

import dask
import numpy as np
import pytest
from sweep_town import write_sweep_town
from test_cli import run_cli

from districting.intake import load_project
from districting.outputs.store import OPTIONS_TABLE, list_options, load_option
from districting.study import RunSettings, run
from districting.sweep import cluster
from districting.sweep.grid import Scenario, settings_grid
from districting.sweep.runner import plan_jobs, run_sweep

OPENS = Scenario("E3 opens", (("E3", "new"),))
SHUT = Scenario("E3 shut", (("E3", "closed"),))


def sweep(client, project, weights, prefix="Sweep", scenarios=(OPENS, SHUT), **kw):
    inputs = load_project(project)
    grid = settings_grid(inputs, "elementary", stability_weights=weights, scenarios=scenarios)
    todo, done = plan_jobs(inputs, "elementary", grid, prefix, time_limit=20)
    return inputs, run_sweep(client, inputs, todo, done, say=lambda _line: None, **kw)


def rows_per_name(store) -> dict[str, int]:
    """Option rows in the store, counted by name (straight from SQLite)."""
    with sqlite3.connect(store) as con:
        rows = con.execute(f"SELECT name, COUNT(*) FROM {OPTIONS_TABLE} GROUP BY name")
        return dict(rows.fetchall())


def test_each_combination_saved_once_and_a_second_sweep_resumes(client, project):
    inputs, report = sweep(client, project, [0, 3000])
    names = [r.name for r in report.results]
    assert report.solved == 4 and report.resumed == 0 and not report.failed
    assert rows_per_name(inputs.settings.store) == dict.fromkeys(names, 1)
    for r in report.results:  # each name holds its own combination's plan
        option = load_option(inputs, r.name)
        assert option.settings.stability_weight == r.setting.stability_weight
        assert option.settings.status == r.setting.scenario.status_dict()
        e3_open = bool(option.plan.open_sites[option.site_ids.index("E3")])
        assert e3_open == (r.setting.scenario is OPENS)
    saved_at = {o.name: o.saved for o in list_options(inputs.settings.store)}

    time.sleep(1.1)  # a save would change the second-resolution timestamp
    inputs, again = sweep(client, project, [0, 1000, 3000])
    assert again.solved == 2 and again.resumed == 4  # only the two new weights are solved
    assert len(again.results) == 6
    assert rows_per_name(inputs.settings.store) == dict.fromkeys(
        [r.name for r in again.results], 1)
    after = {o.name: o.saved for o in list_options(inputs.settings.store)}
    assert all(after[n] == saved_at[n] for n in names)  # not saved again


def test_the_same_settings_give_the_same_plan(client, tmp_path):
    plans = []
    for copy in ("a", "b"):
        inputs, report = sweep(client, write_sweep_town(tmp_path / copy), [0, 3000])
        plans.append({r.name: load_option(inputs, r.name).plan.assignment
                      for r in report.results})
    assert plans[0].keys() == plans[1].keys()
    for name in plans[0]:
        assert np.array_equal(plans[0][name], plans[1][name]), name
    # and the sweep's plan is the one `districting solve` makes with those settings
    rs = RunSettings(level="elementary", stability_weight=3000.0, status={"E3": "new"},
                     time_limit=20)
    solo = run(inputs, rs)
    name = next(n for n in plans[1] if "3000" in n and "opens" in n)
    assert np.array_equal(solo.plan.assignment, plans[1][name])


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def test_a_scheduler_that_does_not_answer_is_named_and_nothing_is_written(
        project, tmp_path, monkeypatch):
    monkeypatch.setattr(cluster, "CONNECT_TIMEOUT", 2.0)
    before = sorted(p.name for p in project.parent.iterdir())
    address = f"tcp://127.0.0.1:{_free_port()}"
    out = tmp_path / "charts"
    started = time.perf_counter()
    code, _out, err = run_cli("sweep", str(project), "--level", "elementary",
                              "--stability-weight", "0,3000", "--scheduler", address,
                              "--out", str(out))
    assert code == 1
    assert time.perf_counter() - started < 30  # told within the short timeout, not hung
    assert f"no Dask scheduler answered at {address} within 2 s" in err
    assert "`dask scheduler`" in err and "Nothing was solved or written" in err
    assert "Traceback" not in err
    assert sorted(p.name for p in project.parent.iterdir()) == before  # no store, no cache
    assert not out.exists()


def test_a_worker_killed_mid_sweep_leaves_every_option_saved_once(project):
    """A real death: SIGKILL to a worker process while it holds a task. Dask is told to
    give up on a task at its first worker death (allowed-failures 0), so the runner's own
    resubmission is what brings the task back."""
    killed: list[int] = []

    def kill_a_busy_worker(client, pids, stop: threading.Event) -> None:
        while not stop.is_set():  # the first task on a fresh worker takes seconds (imports)
            busy = [w for w, keys in client.processing().items() if keys and w in pids]
            if busy:
                killed.append(pids[busy[0]])
                os.kill(pids[busy[0]], signal.SIGKILL)
                return
            time.sleep(0.02)

    with dask.config.set({"distributed.scheduler.allowed-failures": 0}), \
            cluster.open_client(workers=2) as client:
        stop = threading.Event()
        killer = threading.Thread(target=kill_a_busy_worker,
                                  args=(client, client.run(os.getpid), stop))
        killer.start()
        try:
            inputs, report = sweep(client, project, [0, 1500, 3000])
        finally:
            stop.set()
            killer.join()
    assert killed
    with pytest.raises(ProcessLookupError):
        os.kill(killed[0], 0)  # the worker really died
    assert not report.failed
    assert report.solved == 6
    assert rows_per_name(inputs.settings.store) == dict.fromkeys(
        [r.name for r in report.results], 1)
    assert len(report.results) == 6


def test_the_engine_keeps_highs_random_seed_fixed(project):
    """Same settings, same plan: HiGHS's random seed (its documented option
    ``random_seed``) is the same fixed value in every model the engine builds."""
    from districting.engine.highs_route import HighsRoute
    from districting.study import build_problem

    def seed(route) -> int:
        value = route.h.getOptionValue("random_seed")
        return value[-1] if isinstance(value, tuple) else value

    inputs = load_project(project)
    problem, _ = build_problem(inputs, RunSettings(level="elementary"))
    seeds = {seed(HighsRoute(problem)) for _ in range(3)}
    assert seeds == {0}  # HiGHS's default, never changed by the engine


@pytest.mark.filterwarnings("ignore:Port .* is already in use")  # its idle dashboard port
def test_an_existing_cluster_runs_the_sweep_and_one_without_workers_is_told(project):
    from distributed import LocalCluster

    with LocalCluster(n_workers=0, processes=False, protocol="tcp",
                      dashboard_address=None) as existing:
        address = existing.scheduler_address
        with pytest.raises(cluster.ClusterUnreachable, match="has no workers"), \
                cluster.open_client(scheduler=address, timeout=1):
            pass
        existing.scale(1)
        code, printed, err = run_cli("sweep", str(project), "--level", "elementary",
                                     "--stability-weight", "0", "--scheduler", address,
                                     "--time-limit", "20")
    assert code == 0, err
    assert f"running on 1 Dask workers ({address})" in printed
    assert len(list_options(load_project(project).settings.store)) == 1
