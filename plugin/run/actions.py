"""Handlers of running: start a run in a background thread, show progress, cancel."""

from __future__ import annotations

import asyncio
import os
import threading
import time
from pathlib import Path

from heatsoak.core.app.runner import run_case
from heatsoak.core.case.casefile import case_from_data, save_case
from heatsoak.core.errors import HeatsoakError
from heatsoak.plugin.load import guard
from heatsoak.plugin.results import actions as results_actions
from heatsoak.plugin.setup import actions as setup_actions

#: Seconds between progress updates pushed to the browser.
POLL_S = 0.25


class RunJob:
    """One run in a background thread; the UI polls :attr:`progress` and :attr:`done`."""

    def __init__(self, case, out_dir: Path):
        self.case, self.out_dir = case, out_dir
        self.progress = None
        self.summary = None
        self.error = ""
        self.stop = False
        self.thread = threading.Thread(target=self._work, name="heatsoak-run", daemon=True)

    def _work(self):
        try:
            self.summary = run_case(self.case, self.out_dir, progress=self._on_progress,
                                    should_stop=lambda: self.stop)
        except HeatsoakError as exc:
            self.error = str(exc)
        except Exception as exc:  # noqa: BLE001 - a bug must not kill the UI; say what happened
            self.error = f"the run failed: {type(exc).__name__}: {exc}"

    def _on_progress(self, p):
        self.progress = p

    @property
    def done(self) -> bool:
        return not self.thread.is_alive()


def progress_text(p) -> str:
    """``step 12 - t = 120 s of 600 s - about 8 s left``."""
    if p is None:
        return "starting..."
    left = f"about {p.eta_s:.0f} s left" if p.eta_s >= 1 else "finishing"
    return f"step {p.step} · t = {p.t:g} s of {p.end:g} s · {left}"


def register(panel) -> None:
    """Defaults and handlers of the run bar."""
    state, ctrl = panel.state, panel.ctrl
    state.update({"hs_running": False, "hs_progress": 0.0, "hs_progress_text": "", "hs_run_error": "",
                  "hs_solver_reason": "", "hs_run_request": 0})

    @state.change("hs_run_request")
    def run_requested(hs_run_request=0, **_):
        """Run pressed. The button counts presses in the state instead of calling the server
        directly, so the press travels with (never ahead of) edits the browser has not sent yet."""
        if hs_run_request:
            start_run()

    @ctrl.set("hs_run")
    def start_run():
        """Check the case, write it into a new results folder and run it in the background."""
        if state.hs_running:
            return
        if setup_actions.validate(panel):
            state.hs_run_error = state.hs_run_reason
            return
        data, _ = setup_actions.current_case(panel)
        run_id = panel.runs.next_id()
        out_dir = panel.work_dir / "runs" / f"run-{run_id:03d}"
        out_dir.mkdir(parents=True, exist_ok=True)
        save_case(portable_case(data, panel.case_dir, out_dir), out_dir / "case.toml")
        case = case_from_data(data, panel.case_dir, mesh=panel.mesh, root=panel.root)
        panel.job = RunJob(case, out_dir)
        state.update({"hs_running": True, "hs_progress": 0.0, "hs_progress_text": "starting...",
                      "hs_run_error": "", "hs_solver_reason": ""})
        panel.job.data = data
        panel.job.thread.start()
        guard.mark_kept(panel)  # a run keeps the set-up it ran (its case.toml is in the results)
        asyncio.ensure_future(watch(panel))

    @ctrl.set("hs_cancel")
    def cancel_run():
        """Stop after the current step; the steps done are kept."""
        if panel.job is not None:
            panel.job.stop = True
            state.hs_progress_text = "stopping after this step..."


def portable_case(data: dict, base_dir: Path, out_dir: Path) -> dict:
    """The case with its mesh file named relative to ``out_dir`` (so the copy runs where it is)."""
    mesh = dict(data["mesh"])
    mesh["file"] = os.path.relpath(Path(base_dir) / mesh["file"], out_dir)
    return {**data, "mesh": mesh}


async def watch(panel) -> None:
    """Push progress until the job ends, then keep the run and show it."""
    state, job = panel.state, panel.job
    while not job.done:
        with state:
            p = job.progress
            state.hs_progress = 100.0 * (p.fraction if p else 0.0)
            state.hs_progress_text = progress_text(p)
        await asyncio.sleep(POLL_S)
    with state:
        finish(panel, job)


def finish(panel, job) -> None:
    """Keep the run's results (also when cancelled) and switch the view to them."""
    state = panel.state
    state.hs_running = False
    panel.job = None
    if job.error or job.summary is None:
        state.hs_run_error = job.error or "the run stopped without results"
        state.hs_progress_text = "failed"
        return
    run = panel.runs.add(job.data, job.out_dir, job.summary, mesh=job.case.mesh)
    state.hs_progress = 100.0 if run.status == "complete" else state.hs_progress
    solver = run.summary.get("solver") or {}
    state.hs_progress_text = (f"{run.status}: {run.summary.get('steps', 0)} steps to t = "
                              f"{run.summary.get('end_time', 0):g} s in {run.summary.get('wall_time_s', 0):.1f} s"
                              + (f" · solver {solver['solver']}" if solver.get("solver") else ""))
    state.hs_solver_reason = solver.get("reason", "")
    state.hs_last_run_time = time.time()
    results_actions.runs_changed(panel, show=run.id)
