"""Handlers of long jobs: start one in a worker process, show its phase and estimate, cancel it.

One async loop polls the running jobs a few times a second; the UI's
process only reads short messages, so the page answers clicks while a run
steps and an animation renders.
"""

from __future__ import annotations

import asyncio
import atexit
import time

from heatsoak.plugin.jobs.pool import JobRunner

#: Seconds between two looks at the running jobs.
POLL_S = 0.25
#: Modules the spare worker of each kind of job imports while it waits.
WARM = {"run": ("heatsoak.plugin.run.work",), "export": ("heatsoak.plugin.export.movie",)}
#: What a phase's items are called in the progress line.
ITEMS = {"stepping": "step", "rendering": "frame"}
#: Phases whose line does not promise a time left after the first items (too short, or counted in bytes).
QUIET = ("writing", "packing")


def register(panel) -> None:
    """The job runner and the cancel handler."""
    panel.jobs = JobRunner(warm=WARM)
    panel._job_watch = None
    panel._job_views = {}
    atexit.register(panel.jobs.close)

    @panel.ctrl.set("hs_cancel_job")
    def cancel_job(job_id):
        """Stop a job at its next check; what it finished is kept."""
        job = panel.jobs.jobs.get(int(job_id))
        if job is not None:
            job.cancel()


def start(panel, kind: str, fn, *args, show=None, done=None):
    """Run ``fn(reporter, *args)`` in a worker; ``show(job)`` while it runs, ``done(job)`` when it ends.

    Both are called in the UI's process, inside a state update.
    """
    job = panel.jobs.submit(kind, fn, *args, on_done=done)
    if show is not None:
        panel._job_views[job.id] = show
        show(job)
    if panel._job_watch is None or panel._job_watch.done():
        panel._job_watch = asyncio.ensure_future(watch(panel))
    return job


async def watch(panel) -> None:
    """Poll the running jobs until none is left."""
    while panel.jobs.running():
        await asyncio.sleep(POLL_S)
        with panel.state:
            for job in panel.jobs.running():
                ended = job.poll()
                show = panel._job_views.get(job.id)
                if show is not None and not ended:
                    show(job)
                if ended:
                    panel._job_views.pop(job.id, None)


def seconds(s: float) -> str:
    """``42 s``, ``3 min 5 s``."""
    s = max(float(s), 0.0)
    return f"{s:.0f} s" if s < 90 else f"{int(s // 60)} min {int(s % 60)} s"


def status_text(job) -> str:
    """The job's phase, its progress and the time left, e.g.
    ``stepping · step 12 of 60 · t = 120 s of 600 s · about 8 s left``."""
    parts = [job.phase]
    if job.cancel_asked is not None:
        return f"{job.phase} · stopping, " + ("nothing is kept..." if job.phase == "packing" else "keeping what is done...")
    item = ITEMS.get(job.phase)
    if item and job.done:
        parts.append(f"{item} {job.done}" + (f" of {job.total}" if job.total else ""))
    elif job.phases:
        parts.append(f"{seconds(time.time() - job.phases[-1][1])} so far")
    if job.detail:
        parts.append(job.detail)
    eta = job.eta_s
    if eta is not None:
        parts.append(f"about {seconds(eta)} left" if eta >= 1 else "under 1 s left")
    elif job.phase not in QUIET:
        parts.append(f"time left known after the first {ITEMS.get(job.phase, 'step')}s")
    return " · ".join(parts)


def overall_fraction(job) -> float:
    """0-1 for a progress bar: the part of the counted phase done."""
    return job.fraction
