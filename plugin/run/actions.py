"""Handlers of running: start a run in a worker process, show its phase and progress, cancel."""

from __future__ import annotations

import os
import time
from pathlib import Path

from heatsoak.core.case.casefile import save_case
from heatsoak.plugin.jobs import actions as jobs
from heatsoak.plugin.load import guard
from heatsoak.plugin.results import actions as results_actions
from heatsoak.plugin.run.work import run_in_worker
from heatsoak.plugin.setup import actions as setup_actions


def progress_text(job) -> str:
    """The run's phase and progress: ``stepping · step 12 of 60 · t = 120 s of 600 s · about 8 s left``."""
    return jobs.status_text(job)


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
        state.update({"hs_running": True, "hs_progress": 0.0, "hs_progress_text": "starting...",
                      "hs_run_error": "", "hs_solver_reason": ""})
        mesh = panel.mesh
        panel.job = jobs.start(panel, "run", run_in_worker, data, panel.case_dir, mesh, out_dir, panel.root,
                               show=lambda job: show_progress(panel, job),
                               done=lambda job: finish(panel, job, data, out_dir, mesh))
        guard.mark_kept(panel)  # a run keeps the set-up it ran (its case.toml is in the results)

    @ctrl.set("hs_cancel")
    def cancel_run():
        """Stop after the current step; the steps done are kept."""
        if panel.job is not None:
            panel.job.cancel()
            state.hs_progress_text = progress_text(panel.job)


def portable_case(data: dict, base_dir: Path, out_dir: Path) -> dict:
    """The case with its mesh file named relative to ``out_dir`` (so the copy runs where it is)."""
    mesh = dict(data["mesh"])
    mesh["file"] = os.path.relpath(Path(base_dir) / mesh["file"], out_dir)
    return {**data, "mesh": mesh}


def show_progress(panel, job) -> None:
    """The run bar's line and bar for the job's phase."""
    panel.state.hs_progress = 100.0 * jobs.overall_fraction(job)
    panel.state.hs_progress_text = progress_text(job)


def finish(panel, job, data: dict, out_dir: Path, mesh) -> None:
    """Keep the run's results (also when cancelled) and switch the view to them."""
    state = panel.state
    state.hs_running = False
    panel.job = None
    if job.error or job.result is None:
        state.hs_run_error = job.error or "the run stopped without results"
        state.hs_progress_text = "cancelled" if job.status == "cancelled" else "failed"
        return
    run = panel.runs.add(data, out_dir, job.result, mesh=mesh)
    state.hs_progress = 100.0 if run.status == "complete" else state.hs_progress
    solver = run.summary.get("solver") or {}
    state.hs_progress_text = (f"{run.status}: {run.summary.get('steps', 0)} steps to t = "
                              f"{run.summary.get('end_time', 0):g} s in {run.summary.get('wall_time_s', 0):.1f} s"
                              + (f" · solver {solver['solver']}" if solver.get("solver") else ""))
    state.hs_solver_reason = solver.get("reason", "")
    state.hs_last_run_time = time.time()
    results_actions.runs_changed(panel, show=run.id)
