"""Where a sweep runs: a Dask cluster on this machine, or one that already exists.

``workers``: a :class:`distributed.LocalCluster` of that many worker processes, one thread
each (a solve is one process's work; the default is one per core). ``scheduler``: the
address of a running ``dask scheduler`` whose workers can import ``districting``. An
address that does not answer within ``timeout`` seconds is a :class:`ClusterUnreachable`
naming it and the fix, raised before anything is written.
"""

from __future__ import annotations

import contextlib
import logging
import os
import warnings
from collections.abc import Iterator

__all__ = ["ClusterUnreachable", "open_client", "default_workers", "warm_up", "CONNECT_TIMEOUT",
           "WORKER_CONFIG"]

#: Seconds to wait for an existing scheduler to answer (our choice: long enough for a
#: cluster on the local network, short enough that a wrong address is told at once).
CONNECT_TIMEOUT = 10.0


#: Dask settings of the workers this module starts: no statistical profiler (a sample of
#: every worker's stack each 10 ms, for Dask's dashboard, which these workers do not
#: serve). Whether it slows the solves could not be told apart from the load of this
#: shared machine (2026-12-03).
WORKER_CONFIG = {"distributed.worker.profile.enabled": False}


class ClusterUnreachable(RuntimeError):
    """No Dask scheduler answered at the address given."""


def default_workers() -> int:
    """One worker per core this process may use."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # not on Linux
        return max(1, os.cpu_count() or 1)


def warm_up(threads: int | None = None) -> bool:
    """Run on each worker once: import the engine, so the first solve does not pay for it;
    ``threads``: HiGHS threads per solve on that worker (None: the engine's default)."""
    import importlib

    importlib.import_module("districting.study")
    if threads is not None:
        importlib.import_module("districting.engine").use_threads(threads)
    return True


@contextlib.contextmanager
def open_client(workers: int | None = None, scheduler: str | None = None,
                timeout: float | None = None, processes: bool = True) -> Iterator:
    """A :class:`distributed.Client` on a local cluster or on ``scheduler``; closed after."""
    import dask
    from distributed import Client, LocalCluster

    timeout = CONNECT_TIMEOUT if timeout is None else timeout

    if scheduler:
        try:
            client = Client(scheduler, timeout=f"{timeout}s")
        except (OSError, TimeoutError) as err:
            raise ClusterUnreachable(
                f"no Dask scheduler answered at {scheduler} within {timeout:g} s ({err}). "
                f"Start one there with `dask scheduler` and its workers with `dask worker "
                f"{scheduler}`, check the address and port, or leave out --scheduler to run "
                "on this machine (--workers N). Nothing was solved or written.") from None
        with client:
            try:
                client.wait_for_workers(1, timeout=timeout)
            except TimeoutError:
                raise ClusterUnreachable(
                    f"the Dask scheduler at {scheduler} has no workers (none joined within "
                    f"{timeout:g} s); start them with `dask worker {scheduler}` on the machines "
                    "that solve. Nothing was solved or written.") from None
            client.run(warm_up)
            yield client
        return
    n = workers or default_workers()
    if n < 1:
        raise ValueError(f"--workers {n}: give 1 or more worker processes")
    with warnings.catch_warnings(), dask.config.set(WORKER_CONFIG):
        warnings.filterwarnings("ignore", message="Port .* is already in use")  # no dashboard
        cluster = LocalCluster(n_workers=n, threads_per_worker=1, processes=processes,
                               dashboard_address=None, silence_logs=logging.ERROR)
    with cluster, Client(cluster) as client:
        # one worker per core here: one HiGHS thread each (two threads each, on two cores,
        # slowed every solve 2-5 times: benchmarks/bench_sweep.py)
        client.run(warm_up, 1 if processes else None)
        yield client
