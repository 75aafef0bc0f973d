"""The distributed engine of a sweep: dask.distributed, on this machine or on a running cluster.

dask is imported only here and only when a sweep runs, so heatsoak works
without it (install the ``cluster`` extra to sweep).

* :func:`open_engine` starts a ``LocalCluster`` (worker processes, one thread
  each, loopback only, no dashboard) or connects to a scheduler by address.
* :func:`run_tasks` submits one task per variant and hands each row to a
  callback as it finishes. A stop request (Ctrl-C or ``should_stop``) sets a
  flag that running variants poll between steps, so they end as "cancelled"
  with their results so far; variants not started are cancelled outright.

A worker lost mid-run: the scheduler runs its variant again elsewhere. The
local cluster allows this once per variant (``allowed_failures=1``); a second
loss makes the variant fail with the scheduler's message. A running cluster
applies its own ``distributed.scheduler.allowed-failures`` (dask's default 3).
Tasks are also submitted with ``retries=1``, for errors of the task itself.
"""

from __future__ import annotations

import contextlib
import logging
import os
import signal
import time
import uuid
from dataclasses import replace

from heatsoak.core.app.sweep.table import Row
from heatsoak.core.app.sweep.worker import VariantTask, run_variant
from heatsoak.core.errors import HeatsoakError, InputError

__all__ = ["EngineError", "describe", "open_engine", "run_tasks"]

#: Seconds running variants get to notice a stop request and return their rows.
STOP_GRACE_S = 20.0


class EngineError(HeatsoakError):
    """The distributed engine could not be started or reached."""


def _distributed():
    try:
        import distributed
    except ImportError:
        raise InputError("heatsoak sweep needs dask.distributed: pip install 'heatsoak[cluster]' "
                         "(or pip install 'dask[distributed]')") from None
    return distributed


@contextlib.contextmanager
def _no_sigint():
    """Worker processes started inside ignore SIGINT, so Ctrl-C reaches only this process, which
    then stops the sweep in order (an ignored signal stays ignored in a spawned process)."""
    try:
        old = signal.signal(signal.SIGINT, signal.SIG_IGN)
    except ValueError:  # not the main thread (a UI): signals are not ours to change
        yield
        return
    try:
        yield
    finally:
        signal.signal(signal.SIGINT, old)


def _local_cluster(distributed, workers: int):
    with _no_sigint():
        return distributed.LocalCluster(
            n_workers=workers, threads_per_worker=1, processes=True, host="127.0.0.1",
            scheduler_port=0, dashboard_address=None, silence_logs=logging.ERROR,
            # the scheduler's small HTTP server (health checks; no dashboard) on loopback, any free port
            scheduler_kwargs={"allowed_failures": 1, "dashboard": False, "dashboard_address": "127.0.0.1:0"})


def _connect(distributed, scheduler: str, timeout: float):
    """A client on the running scheduler at ``scheduler`` that has at least one worker."""
    try:
        client = distributed.Client(scheduler, timeout=timeout)
    except (OSError, TimeoutError, ValueError) as exc:
        raise EngineError(f"--scheduler {scheduler}: cannot reach a dask scheduler there ({exc})") from None
    try:
        client.wait_for_workers(1, timeout=timeout)
    except (OSError, TimeoutError):
        client.close()
        raise EngineError(f"--scheduler {scheduler}: the scheduler has no workers (waited {timeout:g} s); "
                          f"start some with: dask worker {scheduler}") from None
    return client


def describe(client) -> str:
    """One line: how many workers the engine has, and where its scheduler is."""
    info = client.scheduler_info()
    threads = sum(w.get("nthreads", 1) for w in info.get("workers", {}).values())
    return f"{len(info.get('workers', {}))} worker(s), {threads} thread(s), scheduler {info.get('address', '?')}"


@contextlib.contextmanager
def open_engine(workers: int | None = None, scheduler: str | None = None, timeout: float = 10.0):
    """A ``distributed.Client`` on a new local cluster, or on the scheduler at ``scheduler``.

    Parameters
    ----------
    workers : int, optional
        Worker processes of the local cluster (default: the cores of this machine).
    scheduler : str, optional
        Address of a running scheduler, ``tcp://host:port``; no local cluster is started.
    timeout : float
        Seconds to wait for the scheduler and for its first worker.
    """
    distributed = _distributed()
    if scheduler is not None:
        with _connect(distributed, scheduler, timeout) as client:
            yield client
        return
    n = workers or os.cpu_count() or 1
    if n < 1:
        raise InputError(f"--workers {workers}: give at least 1 worker process")
    cluster = _local_cluster(distributed, n)
    try:
        with distributed.Client(cluster) as client:
            yield client
    finally:
        cluster.close()


def _outcome(future, task: VariantTask) -> Row:
    """The row a finished future stands for."""
    if future.status == "finished":
        return future.result()
    if future.status == "cancelled":
        return Row(task.name, task.values, "cancelled")
    exc = future.exception()
    return Row(task.name, task.values, "failed", error=f"{type(exc).__name__}: {exc}")


def _collect(pending: dict, on_row, should_stop, poll: float) -> bool:
    """Hand over rows as futures finish; True when stopped by ``should_stop``, False when all are done."""
    while pending:
        if should_stop is not None and should_stop():
            return True
        done = [f for f in pending if f.done()]
        for f in done:
            on_row(_outcome(f, pending.pop(f)))
        if not done:
            time.sleep(poll)
    return False


def _stop(client, event, pending: dict, on_row, poll: float) -> None:
    """Ask running variants to stop, cancel the others, hand over every row that is left."""
    event.set()
    running = {k for keys in client.processing().values() for k in keys}
    idle = [f for f in pending if f.key not in running]
    client.cancel(idle)
    for f in idle:
        on_row(Row(pending[f].name, pending[f].values, "cancelled"))
        del pending[f]
    deadline = time.monotonic() + STOP_GRACE_S
    try:
        _collect(pending, on_row, lambda: time.monotonic() > deadline, poll)
    except KeyboardInterrupt:  # a second Ctrl-C: stop waiting for them
        pass
    client.cancel(list(pending))
    for task in pending.values():
        on_row(Row(task.name, task.values, "cancelled"))
    pending.clear()


def run_tasks(client, tasks, on_row, should_stop=None, poll: float = 0.05) -> str:
    """Run ``tasks`` (VariantTask) on the engine behind ``client``, calling ``on_row(Row)`` as each ends.

    Returns
    -------
    str
        "complete" when every task ran to its end (complete or failed), "cancelled"
        when Ctrl-C or ``should_stop`` stopped the sweep; every task got its row either way.
    """
    distributed = _distributed()
    tag = uuid.uuid4().hex[:8]
    event = distributed.Event(f"heatsoak-sweep-stop-{tag}", client=client)
    pending = {}
    for task in tasks:
        t = replace(task, stop=event.name)
        f = client.submit(run_variant, t, key=f"heatsoak-{t.name}-{tag}", pure=False, retries=1)
        pending[f] = t
    try:
        stopped = _collect(pending, on_row, should_stop, poll)
    except KeyboardInterrupt:
        stopped = True
    if stopped:
        _stop(client, event, pending, on_row, poll)
        return "cancelled"
    return "complete"
