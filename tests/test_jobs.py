"""The job runner: work in a worker process, phases in order, progress, cancel, errors as messages."""

from __future__ import annotations

import os
import time
from pathlib import Path

import pytest
from heatsoak.core.case.casefile import load_case
from heatsoak.core.errors import InputError
from heatsoak.core.results.result_field import FieldSeries
from heatsoak.plugin.jobs.actions import status_text
from heatsoak.plugin.jobs.pool import JobRunner
from heatsoak.plugin.run.work import run_in_worker

MESHES = Path(__file__).resolve().parents[1] / "meshes"


def counting(report, n: int, pause: float) -> int:
    """A job of ``n`` items, each taking ``pause`` seconds; returns how many it did."""
    report.phase("counting", n)
    done = 0
    for done in range(1, n + 1):
        if report.stopped():
            return done - 1
        time.sleep(pause)
        report.advance(done, n, eta_s=(n - done) * pause, force=True)
    return done


def niceness(report) -> int:
    return os.nice(0)


def failing(report, kind: str):
    report.phase("reading")
    if kind == "input":
        raise InputError("mesh file box.msh: no tetrahedra in it")
    if kind == "bug":
        return {}["missing key"]
    os._exit(3)


def finish(job, timeout: float = 60.0, seen=None):
    """Poll ``job`` until it ends; ``seen`` collects (phase, done) pairs observed on the way."""
    end = time.monotonic() + timeout
    while not job.poll():
        if seen is not None:
            seen.append((job.phase, job.done))
        assert time.monotonic() < end, f"job still {job.phase} after {timeout} s"
        time.sleep(0.02)
    return job


@pytest.fixture(scope="module")
def jobs():
    runner = JobRunner(warm={"run": ("heatsoak.plugin.run.work",)})
    yield runner
    runner.close()


@pytest.fixture(scope="module")
def lblock():
    return load_case(MESHES / "lblock_cooling.toml")


def test_a_run_reports_its_phases_in_order_and_its_steps(jobs, lblock, tmp_path):
    seen = []
    job = finish(jobs.submit("run", run_in_worker, lblock.data, lblock.base_dir, lblock.problem.mesh, tmp_path),
                 seen=seen)
    assert job.status == "complete" and job.error == ""
    assert [p[0] for p in job.phases] == ["reading", "assembling", "factorising", "stepping", "writing"]
    starts = [p[1] for p in job.phases]
    assert starts == sorted(starts) and all(p[2] is not None for p in job.phases)
    assert job.result["status"] == "complete" and job.result["steps"] > 0
    steps = [d for phase, d in seen if phase == "stepping"]
    assert steps == sorted(steps)
    assert (tmp_path / "summary.json").is_file()


def test_the_worker_is_another_process(jobs):
    job = finish(jobs.submit("pid", counting, 1, 0.0))
    assert job.status == "complete" and job.worker.process.pid != os.getpid()


def test_the_worker_yields_the_cpu_to_the_ui(jobs):
    job = finish(jobs.submit("nice", niceness))
    assert job.result == min(os.nice(0) + 10, 19)


def test_progress_and_estimate_are_shown_while_it_runs(jobs):
    job = jobs.submit("count", counting, 40, 0.05)
    end = time.monotonic() + 30
    while not (job.phase == "counting" and job.done >= 3):
        job.poll()
        assert time.monotonic() < end
        time.sleep(0.02)
    text = status_text(job)
    assert text.startswith("counting") and "left" in text
    assert 0 < job.eta_s <= 40 * 0.05
    finish(job)
    assert job.result == 40 and job.eta_s is None


def test_cancel_stops_the_run_and_keeps_the_steps_done(jobs, lblock, tmp_path):
    data = {**lblock.data, "time": {**lblock.data["time"], "end": 1e6}}
    job = jobs.submit("run", run_in_worker, data, lblock.base_dir, lblock.problem.mesh, tmp_path)
    end = time.monotonic() + 60
    while not (job.phase == "stepping" and job.done >= 5):
        job.poll()
        assert time.monotonic() < end, f"no steps after 60 s (phase {job.phase})"
        time.sleep(0.02)
    job.cancel()
    assert "stopping" in status_text(job)
    finish(job)
    assert job.status == "cancelled" and job.result["status"] == "cancelled"
    assert 5 <= job.result["steps"] < 100_000
    series = FieldSeries(tmp_path)
    assert len(series) >= 1 and series.times[-1] == pytest.approx(job.result["end_time"])
    series.close()


def test_cancel_of_a_counting_job_returns_what_it_did(jobs):
    job = jobs.submit("count", counting, 10_000, 0.01)
    while job.done < 2:
        job.poll()
        time.sleep(0.02)
    job.cancel()
    finish(job)
    assert job.status == "cancelled" and 2 <= job.result < 10_000


def test_an_input_error_in_the_worker_is_its_message(jobs):
    job = finish(jobs.submit("bad", failing, "input"))
    assert job.status == "failed" and job.error == "mesh file box.msh: no tetrahedra in it"


def test_a_bug_in_the_worker_is_one_line_naming_where(jobs):
    job = finish(jobs.submit("bad", failing, "bug"))
    assert job.status == "failed" and job.error.startswith("KeyError: 'missing key' (in test_jobs.py, line ")
    assert "Traceback" not in job.error and "\n" not in job.error


def test_a_worker_that_dies_is_reported(jobs):
    job = finish(jobs.submit("bad", failing, "exit"))
    assert job.status == "failed" and "exit code 3" in job.error


def test_a_bad_case_is_reported_as_the_case_problems(jobs, lblock, tmp_path):
    data = {**lblock.data, "time": {**lblock.data["time"], "step": -1.0}}
    job = finish(jobs.submit("run", run_in_worker, data, lblock.base_dir, lblock.problem.mesh, tmp_path))
    assert job.status == "failed" and "time.step" in job.error and "Traceback" not in job.error


def test_done_callback_runs_once_in_this_process(jobs):
    ended = []
    finish(jobs.submit("count", counting, 2, 0.0, on_done=lambda j: ended.append((j.id, os.getpid()))))
    assert len(ended) == 1 and ended[0][1] == os.getpid()


def test_a_waiting_worker_ends_when_the_ui_process_is_killed():
    """A UI process killed without cleaning up (SIGKILL, crash) leaves no worker behind."""
    import subprocess
    import sys

    code = (
        "import os, sys\n"
        "from heatsoak.plugin.jobs.pool import Worker\n"
        "w = Worker()\n"
        "print(w.process.pid, flush=True)\n"
        "os._exit(0)\n"  # no atexit, no terminate of daemon children: as after a kill
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=60)
    pid = int(out.stdout.split()[0])
    deadline = time.time() + 30
    while time.time() < deadline and _alive(pid):
        time.sleep(0.2)
    assert not _alive(pid), f"worker {pid} outlived the process that started it"


def _alive(pid: int) -> bool:
    try:
        with open(f"/proc/{pid}/stat") as f:
            return f.read().split()[2] != "Z"
    except FileNotFoundError:
        return False
