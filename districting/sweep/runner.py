"""Run a sweep on a Dask cluster: one task per combination, the store written here only.

The project is read and checked once (by the caller) and its :class:`Inputs` are sent to
every worker once (``client.scatter``, with the travel matrices the runs need computed
beforehand, so no worker writes even a cache file). Each combination is one task that
solves one level as ``districting solve`` does and sends back the :class:`Plan`; results
stream back in the order they finish, and each is saved as a named option by this
process alone, so every option is written exactly once whatever happens to the workers.

A task that raises is retried by Dask (``retries``); a task whose worker dies is run again
by Dask, and when Dask gives up on it (``KilledWorker``) it is submitted again here, up to
``resubmits`` times. A combination already saved under its name with the same settings is
not solved again (a stopped sweep resumes); one saved with other settings is refused
unless ``overwrite``.
"""

from __future__ import annotations

import json
import time
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field

from ..intake import Inputs
from ..outputs.store import OptionError, list_options, load_option, option_settings, save_option
from ..outputs.wording import gap_words, status_words
from ..plan import Plan
from ..study import Outcome, RunSettings, build_problem, now_iso, resolved, run
from .grid import Setting, option_name, run_settings
from .results import SweepResult, result_of

__all__ = ["Job", "plan_jobs", "run_sweep", "solve_task", "SweepReport"]


@dataclass(frozen=True)
class Job:
    """One combination to run: its values, the option's name, the resolved run settings."""

    index: int  # its place in the grid
    setting: Setting
    name: str
    settings: RunSettings
    overwrite: bool = False  # the name is saved with other settings and --overwrite was given


@dataclass
class SweepReport:
    """What a sweep did: one result per combination, in the grid's order."""

    results: list[SweepResult] = field(default_factory=list)
    solved: int = 0
    resumed: int = 0
    failed: list[str] = field(default_factory=list)  # a line per combination left unsolved


def _same(a: RunSettings, b: RunSettings) -> bool:
    def plain(rs):
        return json.loads(json.dumps(rs.to_dict(), sort_keys=True))

    return plain(a) == plain(b)


def plan_jobs(inputs: Inputs, level: str, grid: Sequence[Setting], prefix: str,
              overwrite: bool = False, **fixed) -> tuple[list[Job], list[Job]]:
    """(to solve, already saved with the same settings), before anything is solved.

    ValueError when a name is saved with other settings and ``overwrite`` is false (the
    names listed, and the fix), or when a name breaks the name rule. Reads the store only.
    """
    saved_names = {o.name for o in list_options(inputs.settings.store)}
    todo, done, clash = [], [], []
    for index, setting in enumerate(grid):
        name = option_name(prefix, setting)
        rs = resolved(inputs, run_settings(level, setting, **fixed))
        if name not in saved_names:
            todo.append(Job(index, setting, name, rs))
        elif _same(option_settings(inputs.settings.store, name), rs):
            done.append(Job(index, setting, name, rs))
        elif overwrite:
            todo.append(Job(index, setting, name, rs, overwrite=True))
        else:
            clash.append(name)
    if clash:
        raise ValueError(f"{inputs.settings.store}: {len(clash)} option name(s) of this sweep "
                         f"are saved with other settings ({', '.join(map(repr, clash[:4]))}"
                         f"{' ...' if len(clash) > 4 else ''}); choose another --save prefix, "
                         "or add --overwrite to solve and replace them")
    return todo, done


@dataclass(frozen=True)
class Solved:
    """What a worker sends back: the plan and when it was made (never the inputs)."""

    plan: Plan
    created: str
    seconds: float


def solve_task(inputs: Inputs, settings: RunSettings) -> Solved:
    """One combination on a worker: solve one level as ``districting solve`` does."""
    started = time.perf_counter()
    outcome = run(inputs, settings)
    return Solved(outcome.plan, outcome.created, time.perf_counter() - started)


def _outcome(inputs: Inputs, job: Job, solved: Solved) -> Outcome:
    problem, rows = build_problem(inputs, job.settings)
    return Outcome(inputs, job.settings, rows, problem, solved.plan, name=job.name,
                   created=solved.created or now_iso())


def run_sweep(client, inputs: Inputs, todo: Sequence[Job], done: Sequence[Job] = (), *,
              say: Callable[[str], None] = print, retries: int = 2, resubmits: int = 2,
              on_result: Callable[[SweepResult], None] | None = None) -> SweepReport:
    """Solve ``todo`` on ``client``'s cluster and save each option from this process;
    ``done`` (saved before with the same settings) are read back, not solved."""
    from distributed import KilledWorker, as_completed

    report = SweepReport()
    by_name: dict[str, SweepResult] = {}
    for job in done:
        outcome = load_option(inputs, job.name)
        by_name[job.name] = result_of(outcome, job.setting, resumed=True)
        report.resumed += 1
    total = len(todo) + len(done)
    if done:
        say(f"{len(done)} of {total} settings already saved with the same settings: "
            "not solved again")
    for measure in {job.settings.travel for job in todo}:
        inputs.travel_metres(measure)  # here, once: the workers get the matrices with the inputs
    if todo:
        shared = client.scatter(inputs, broadcast=True, hash=False)
        jobs = {client.submit(solve_task, shared, job.settings, retries=retries, pure=False): job
                for job in todo}
        attempts = dict.fromkeys((job.name for job in todo), 0)
        best_gap = float("inf")
        finished = len(done)
        stream = as_completed(jobs)
        for future in stream:
            job = jobs.pop(future)
            if future.status == "error":
                err = future.exception()
                if isinstance(err, KilledWorker) and attempts[job.name] < resubmits:
                    attempts[job.name] += 1
                    again = client.submit(solve_task, shared, job.settings, retries=retries,
                                          pure=False)
                    jobs[again] = job
                    stream.add(again)
                    continue
                why = (f"the worker process solving it stopped {attempts[job.name] + 1} times"
                       if isinstance(err, KilledWorker) else f"the solve failed: {err}")
                report.failed.append(f"{job.name}: {why}; run the same command again to "
                                     "resume (options saved so far are kept)")
                continue
            solved = future.result()
            outcome = _outcome(inputs, job, solved)
            if outcome.plan.feasible:
                try:
                    save_option(inputs, outcome, job.name, overwrite=job.overwrite)
                except OptionError as err:
                    report.failed.append(f"{job.name}: not saved: {err}")
                    continue
                best_gap = min(best_gap, max(outcome.plan.gap, 0.0))
            result = result_of(outcome, job.setting, seconds=solved.seconds)
            by_name[job.name] = result
            report.solved += 1
            finished += 1
            best = (f"best so far within {gap_words(best_gap)} of the best possible"
                    if best_gap < float("inf") else "no plan saved yet")
            say(f"[{finished}/{total}] {job.name}: {status_words(outcome.plan)}"
                f"{result.brief}; {best}")
            if on_result is not None:
                on_result(result)
    names = [job.name for job in sorted([*todo, *done], key=lambda j: j.index)]
    report.results = [by_name[n] for n in names if n in by_name]
    return report
