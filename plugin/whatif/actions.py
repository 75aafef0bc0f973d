"""Handlers of the live what-if: build the reduced model of the set-up, answer every schedule edit
from it, say when an edit made it stale and why, confirm with a full run and show the difference."""

from __future__ import annotations

import asyncio
import threading

from heatsoak.core.case.casefile import case_from_data
from heatsoak.core.errors import HeatsoakError
from heatsoak.plugin.results import actions as results_actions
from heatsoak.plugin.results import curves as results_curves
from heatsoak.plugin.setup import actions as setup_actions
from heatsoak.plugin.setup.materials import MAT_FIELDS
from heatsoak.plugin.whatif import live

#: Seconds between checks of a model being built.
POLL_S = 0.25
#: State keys whose edits are answered live (conditions, time and initial settings, materials, probes).
EDIT_KEYS = (*(f"hs_e_{k}" for k in setup_actions.BC_FIELDS), *setup_actions.TIME_KEYS,
             *(f"hs_m_{k}" for k in MAT_FIELDS), "hs_probes")


def register(panel) -> None:
    """Defaults and handlers of the live what-if."""
    state, ctrl = panel.state, panel.ctrl
    panel.live, panel.live_estimate, panel.live_job = None, None, None
    state.update({"hs_live": False, "hs_live_mode": "off", "hs_live_text": ""})

    @state.change("hs_live")
    def on_switch(hs_live=False, **_):
        """Going live builds the model of the set-up; going off gives the curves back to the runs."""
        if hs_live:
            start_build(panel)
        else:
            panel.live, panel.live_estimate = None, None
            state.hs_live_mode, state.hs_live_text = "off", ""
            results_curves.refresh_curves(panel)
            results_actions.draw_frame(panel, int(state.hs_frame or 0))

    @state.change(*EDIT_KEYS)
    def on_edit(**_):
        if panel.live is not None and state.hs_live_mode in ("live", "stale"):
            answer_now(panel)

    @state.change("hs_frame", "hs_view", "hs_shown_run")
    def on_frame(**_):
        draw_estimate(panel)

    @state.change("hs_last_run_time")
    def on_run_done(**_):
        if state.hs_live:
            confirmed(panel)

    ctrl.hs_live_rebuild = lambda: start_build(panel)


def current(panel):
    """(case, problem text) of the set-up as the forms say now; the case is None with a reason."""
    data, errors = setup_actions.current_case(panel)
    if errors:
        return None, f"cannot estimate: {errors[0]}"
    try:
        return case_from_data(data, panel.case_dir, mesh=panel.mesh, root=panel.root), ""
    except HeatsoakError as exc:
        return None, f"cannot estimate: {str(exc).splitlines()[0]}"


def start_build(panel) -> None:
    """Build the reduced model of the set-up in a background thread, then answer it."""
    state = panel.state
    case, why = current(panel) if panel.mesh is not None else (None, "open a mesh first")
    if case is None:
        state.hs_live_mode, state.hs_live_text = "error", why
        return
    job = {"case": case, "live": None, "error": ""}

    def work():
        try:
            job["live"] = live.build_live(case)
        except Exception as exc:  # noqa: BLE001 - say what failed, never break the UI
            job["error"] = f"the live model could not be built: {exc}"

    panel.live_job = threading.Thread(target=work, name="heatsoak-live", daemon=True)
    state.hs_live_mode, state.hs_live_text = "building", "building the live model (about one run's time)..."
    panel.live_job.start()
    asyncio.ensure_future(_wait(panel, job))


async def _wait(panel, job) -> None:
    while panel.live_job is not None and panel.live_job.is_alive():
        await asyncio.sleep(POLL_S)
    with panel.state:
        if job["error"] or job["live"] is None:
            panel.state.hs_live_mode, panel.state.hs_live_text = "error", job["error"] or "no model was built"
            return
        if not panel.state.hs_live:
            return
        panel.live = job["live"]
        answer_now(panel)


def answer_now(panel) -> None:
    """Answer the set-up from the live model: curves marked as an estimate, or why it cannot."""
    state = panel.state
    case, why = current(panel)
    if case is None:
        state.hs_live_text = why
        return
    reason = live.stale_reason(panel.live, case)
    if reason:
        state.hs_live_mode = "stale"
        state.hs_live_text = f"the live model is stale: {reason}. Rebuild it, or run the case in full."
        results_curves.refresh_curves(panel)
        return
    est = live.estimate(panel.live, case)
    runs = results_curves.compared_runs(panel)
    state.hs_probe_fig, state.hs_region_fig = live.live_figures(est, runs[0] if runs else None,
                                                                state.hs_region_pick or None)
    state.hs_probe_table = results_curves.probe_rows([est, *runs[:1]])
    panel.live_estimate = est
    state.hs_live_mode = "live"
    draw_estimate(panel)
    state.hs_live_text = (f"estimate from the reduced model ({panel.live.model.size} vectors), error up to "
                          f"{est.error:.2g} K, answered in {1000 * est.extra['answer_s']:.0f} ms; "
                          "not a full run: Confirm runs it")


def confirmed(panel) -> None:
    """After a full run, say how far the last estimate was from it."""
    state, est = panel.state, panel.live_estimate
    runs = results_curves.compared_runs(panel)
    if est is None or not runs:
        return
    gap = live.difference(est, runs[0])
    if gap is not None:
        state.hs_live_text = (f"full run {runs[0].id} differs from the estimate by at most {gap:.2g} K "
                              f"(estimated {est.error:.2g} K)")
    panel.live_estimate = None  # the 3D view and the curves show the full run now
    results_actions.refresh_rows(panel)


def draw_estimate(panel) -> None:
    """Show the estimate's field in 3D at the time of the frame chosen (over the shown run's frame)."""
    state, est = panel.state, panel.live_estimate
    run = panel.runs.get(state.hs_shown_run)
    if (est is None or state.hs_live_mode != "live" or state.hs_view != "results" or run is None
            or run.series is None or not 0 <= int(state.hs_frame or 0) < len(run.series)):
        return
    values, t = live.estimate_field(panel.live, est, float(run.series.times[int(state.hs_frame)]))
    panel.scene.set_values(values)
    panel._frame_range = [float(values.min()), float(values.max())]
    state.hs_frame_time = f"estimate at t = {t:g} s (reduced model, error up to {est.error:.2g} K)"
    panel.scene.set_time_text(f"Estimate (reduced model)   t = {t:g} s")
    results_actions.apply_range(panel)
    panel.update_view()
