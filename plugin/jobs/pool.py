"""Long work (runs, animations) in worker processes, so the UI's process stays free to answer.

Each job runs in its own process, started with ``spawn`` (no copy of the UI's
threads, locks or VTK state). One process is started ahead and waits with the
heavy modules already imported, so a job does not pay for Python's start-up.
The work function reports phases and progress through a :class:`Reporter`;
the UI reads them with :meth:`Job.poll` and never blocks on the worker.

>>> jobs = JobRunner(warm={"run": ("scipy.sparse",)})       # doctest: +SKIP
>>> job = jobs.submit("run", work_function, arg1, arg2)     # doctest: +SKIP
>>> job.poll(); job.phase, job.fraction, job.eta_s           # doctest: +SKIP
"""

from __future__ import annotations

import importlib
import multiprocessing as mp
import os
import queue
import threading
import time
import traceback
from dataclasses import dataclass, field
from pathlib import Path

_CTX = mp.get_context("spawn")

#: Seconds between two progress messages of one job (the UI redraws about 4 times a second).
REPORT_EVERY_S = 0.1
#: How much lower the CPU priority of a worker is than the UI's process (POSIX nice increment).
WORKER_NICENESS = 10
#: Seconds a job may take to stop after cancel before its process is ended.
CANCEL_GRACE_S = 20.0


class Reporter:
    """What a work function gets in the worker to say where it is and to hear a cancel.

    Parameters
    ----------
    outbox : multiprocessing queue to the UI's process.
    cancel : multiprocessing event set by :meth:`Job.cancel`.
    """

    def __init__(self, outbox, cancel):
        self._outbox, self._cancel, self._last = outbox, cancel, 0.0

    def phase(self, name: str, total: int = 0) -> None:
        """A new phase starts (``total`` items of work in it, 0 when not counted)."""
        self._outbox.put(("phase", name, int(total), time.time()))
        self._last = 0.0

    def advance(self, done: int, total: int = 0, detail: str = "", eta_s: float | None = None,
                force: bool = False) -> None:
        """``done`` of ``total`` items of the phase are done; ``eta_s``: seconds the whole job still needs."""
        now = time.monotonic()
        if force or now - self._last >= REPORT_EVERY_S or (total and done >= total):
            self._last = now
            self._outbox.put(("progress", int(done), int(total), detail, eta_s, time.time()))

    def stopped(self) -> bool:
        """True once the user asked to cancel: finish what can be kept, then return."""
        return self._cancel.is_set()


def describe_error(exc: BaseException) -> str:
    """One line for the user: the input errors' own message, or the error and where it happened."""
    from heatsoak.core.errors import HeatsoakError

    if isinstance(exc, HeatsoakError):
        return str(exc)
    frames = traceback.extract_tb(exc.__traceback__)
    where = f" (in {Path(frames[-1].filename).name}, line {frames[-1].lineno})" if frames else ""
    return f"{type(exc).__name__}: {exc}{where}"


#: Seconds between two looks of a worker at whether the UI's process is still there.
PARENT_CHECK_S = 1.0


def _exit_with_parent(parent: int) -> None:
    """End this worker as soon as the process that started it is gone (killed, crashed or stopped
    without cleaning up): a waiting or working worker must never outlive the UI."""
    while True:
        time.sleep(PARENT_CHECK_S)
        if os.getppid() != parent:
            os._exit(1)


def _serve(inbox, outbox, cancel, warm, parent) -> None:
    """Body of a worker process: import ``warm``, wait for one job, run it, send its result."""
    threading.Thread(target=_exit_with_parent, args=(parent,), daemon=True, name="parent-watch").start()
    if hasattr(os, "nice"):
        os.nice(WORKER_NICENESS)  # the UI's process is served first when both want the CPU
    for name in warm:
        try:
            importlib.import_module(name)
        except Exception:  # noqa: BLE001 - a module that fails here fails again, with a message, in the job
            pass
    item = inbox.get()
    if item is None:
        return
    fn, args = item
    try:
        outbox.put(("result", fn(Reporter(outbox, cancel), *args), time.time()))
    except BaseException as exc:  # noqa: BLE001 - every failure goes back as a message, never a traceback
        outbox.put(("error", describe_error(exc), time.time()))
    outbox.close()
    outbox.join_thread()


class Worker:
    """One spawned process that waits for a single job."""

    def __init__(self, warm=()):
        self.inbox, self.outbox, self.cancel = _CTX.Queue(), _CTX.Queue(), _CTX.Event()
        self.process = _CTX.Process(target=_serve, args=(self.inbox, self.outbox, self.cancel, tuple(warm), os.getpid()),
                                    daemon=True, name="heatsoak-worker")
        self.process.start()

    def stop(self) -> None:
        """End the process now (it is idle or cancelled past its grace)."""
        if self.process.is_alive():
            self.process.terminate()
        self.process.join(timeout=5)
        for q in (self.inbox, self.outbox):
            q.cancel_join_thread()
            q.close()


@dataclass
class Job:
    """A job as the UI sees it: its phase, progress, estimate, result or error.

    Attributes
    ----------
    status : {"running", "complete", "cancelled", "failed"}
    phase : str
        The phase under way ("starting" until the worker names one).
    done, total : int
        Items of the phase done and to do (total 0: not counted).
    phases : list of (name, start, end)
        Wall-clock times [s since the epoch] of each phase; the last one is open (end None).
    eta_s : float or None
        Seconds the job still needs, from the worker's measured rates; None until it knows.
    """

    id: int
    kind: str
    worker: Worker = field(repr=False)
    on_done: object = field(default=None, repr=False)
    status: str = "running"
    phase: str = "starting"
    done: int = 0
    total: int = 0
    detail: str = ""
    started: float = field(default_factory=time.time)
    phases: list = field(default_factory=list)
    result: object = None
    error: str = ""
    cancel_asked: float | None = None
    _eta: tuple | None = None  # (eta_s, when sent)

    @property
    def fraction(self) -> float:
        """Part of the current phase done (0 when not counted)."""
        return min(self.done / self.total, 1.0) if self.total else 0.0

    @property
    def eta_s(self) -> float | None:
        if self._eta is None or self.status != "running":
            return None
        eta, sent = self._eta
        return max(eta - (time.time() - sent), 0.0)

    @property
    def elapsed_s(self) -> float:
        end = self.phases[-1][2] if self.status != "running" and self.phases and self.phases[-1][2] else time.time()
        return end - self.started

    def cancel(self) -> None:
        """Ask the work to stop at its next check; what it finished is kept."""
        if self.status == "running" and self.cancel_asked is None:
            self.cancel_asked = time.time()
            self.worker.cancel.set()

    def poll(self) -> bool:
        """Read what the worker sent; True when the job ended with this call."""
        if self.status != "running":
            return False
        while True:
            try:
                msg = self.worker.outbox.get_nowait()
            except (queue.Empty, OSError, EOFError):
                break
            self._take(msg)
            if self.status != "running":
                return self._finish()
        if not self.worker.process.is_alive():
            self.error = self.error or f"the worker process ended without a result (exit code {self.worker.process.exitcode})"
            self.status = "cancelled" if self.cancel_asked else "failed"
            return self._finish()
        if self.cancel_asked and time.time() - self.cancel_asked > CANCEL_GRACE_S:
            self.status, self.error = "cancelled", "stopped before anything could be kept"
            return self._finish()
        return False

    def _take(self, msg: tuple) -> None:
        kind = msg[0]
        if kind == "phase":
            _, name, total, when = msg
            if self.phases:
                self.phases[-1] = (*self.phases[-1][:2], when)
            self.phases.append((name, when, None))
            self.phase, self.done, self.total, self.detail = name, 0, total, ""
        elif kind == "progress":
            _, self.done, total, self.detail, eta, when = msg
            self.total = total or self.total
            self._eta = None if eta is None else (float(eta), when)
        elif kind == "result":
            self.result, self.status = msg[1], "cancelled" if self.cancel_asked else "complete"
            self._close_phase(msg[2])
        elif kind == "error":
            self.error, self.status = msg[1], "failed"
            self._close_phase(msg[2])

    def _close_phase(self, when: float) -> None:
        if self.phases and self.phases[-1][2] is None:
            self.phases[-1] = (*self.phases[-1][:2], when)

    def _finish(self) -> bool:
        self.worker.stop()
        if self.on_done is not None:
            self.on_done(self)
        return True


class JobRunner:
    """Starts jobs in worker processes, one spare process per kind of job kept started and warm.

    Parameters
    ----------
    warm : dict of str to tuple of str
        For each kind of job, the modules its spare process imports while it waits
        (a run needs scipy, an animation VTK: each kind gets its own spare).
    spare : bool
        Keep spare processes started ahead.
    """

    def __init__(self, warm=None, spare: bool = True):
        self.warm, self.keep_spare = dict(warm or {}), spare
        self.jobs: dict[int, Job] = {}
        self._next = 1
        self._spares = {kind: Worker(mods) for kind, mods in self.warm.items()} if spare else {}

    def submit(self, kind: str, fn, *args, on_done=None) -> Job:
        """Run ``fn(reporter, *args)`` in a worker; ``fn`` must be a module-level function.

        ``on_done(job)`` is called from :meth:`poll` (in the UI's process) when the job ends.
        """
        worker = self._spares.pop(kind, None)
        if worker is None or not worker.process.is_alive():
            worker = Worker(self.warm.get(kind, ()))
        if self.keep_spare and kind in self.warm:
            self._spares[kind] = Worker(self.warm[kind])
        worker.inbox.put((fn, args))
        job = Job(self._next, kind, worker, on_done=on_done)
        self._next += 1
        self.jobs[job.id] = job
        return job

    def running(self) -> list:
        return [j for j in self.jobs.values() if j.status == "running"]

    def poll(self) -> list:
        """Read every running job's messages; the jobs that ended with this call."""
        return [j for j in self.running() if j.poll()]

    def close(self) -> None:
        """End every worker (running jobs are cancelled without their results)."""
        for job in self.running():
            job.status, job.error = "cancelled", "closed"
            job.worker.stop()
        for spare in self._spares.values():
            spare.inbox.put(None)
            spare.stop()
        self._spares = {}
