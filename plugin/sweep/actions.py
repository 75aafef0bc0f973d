"""Handlers of the sweep form: up to three numbers of the set-up, their values, run on the sweep engine.

The sweep runs in a background thread through :func:`heatsoak.core.app.sweep.command.run_sweep`
(a local dask cluster, or one reduced model when only schedules change); rows reach the table
as variants finish, and every variant that finished is kept as a run, so the results
workspace overlays any of them with the other runs.
"""

from __future__ import annotations

import asyncio
import threading

from heatsoak.core.app.sweep.command import run_sweep
from heatsoak.core.app.sweep.plan import plan_from_data
from heatsoak.core.app.sweep.table import columns
from heatsoak.core.errors import HeatsoakError
from heatsoak.plugin.results import actions as results_actions
from heatsoak.plugin.results import curves as results_curves
from heatsoak.plugin.runs.labels import flatten
from heatsoak.plugin.setup import actions as setup_actions

#: Numbers of the set-up a sweep may vary at once.
SLOTS = 3
#: Seconds between pushes of new rows to the browser.
POLL_S = 0.3
#: Sections whose numbers are not physics (file reading, output cadence).
SKIPPED = ("mesh", "output")


def sweepable_keys(data: dict) -> list:
    """Dotted keys of every plain number of case ``data`` (probes by name), e.g. ``boundary.rim.h``."""
    keys = []
    for path, value in flatten(data).items():
        if path[0] in SKIPPED or isinstance(value, bool) or not isinstance(value, (int, float)):
            continue
        keys.append(".".join(path))
    return keys


def vary_texts(slots) -> list:
    """``KEY=[v1, v2]`` texts of the filled slots (``[(key, "v1, v2"), ...]``); empty slots are skipped."""
    out = []
    for key, values in slots:
        text = str(values or "").strip().strip("[]")
        if key and text:
            out.append(f"{key}=[{text}]")
    return out


class SweepJob:
    """One sweep in a background thread; rows arrive in :attr:`rows` as variants finish."""

    def __init__(self, plan, out_dir):
        self.plan, self.out_dir = plan, out_dir
        self.rows, self.result, self.error, self.stop = [], None, "", False
        self.thread = threading.Thread(target=self._work, name="heatsoak-sweep", daemon=True)

    def _work(self):
        try:
            self.result = run_sweep(self.plan, self.out_dir, on_row=self.rows.append, should_stop=lambda: self.stop)
        except HeatsoakError as exc:
            self.error = str(exc)
        except Exception as exc:  # noqa: BLE001 - a bug must not kill the UI; say what happened
            self.error = f"the sweep failed: {type(exc).__name__}: {exc}"

    @property
    def done(self) -> bool:
        return not self.thread.is_alive()


def register(panel) -> None:
    """Defaults and handlers of the sweep form."""
    state, ctrl = panel.state, panel.ctrl
    panel.sweep, panel.sweep_count = None, 0
    state.update({"hs_sweep_open": False, "hs_sweep_keys": [], "hs_sweep_running": False, "hs_sweep_text": "",
                  "hs_sweep_error": "", "hs_sweep_rows": [], "hs_sweep_headers": []})
    state.update({f"hs_sweep_key_{i}": None for i in range(SLOTS)})
    state.update({f"hs_sweep_values_{i}": "" for i in range(SLOTS)})

    @state.change("hs_sweep_open")
    def on_open(hs_sweep_open=False, **_):
        """Opening the form lists the numbers of the set-up as it is now."""
        if hs_sweep_open:
            data, _ = setup_actions.current_case(panel)
            state.hs_sweep_keys = sweepable_keys(data) if panel.mesh is not None else []

    @ctrl.set("hs_sweep_start")
    def start():
        start_sweep(panel)

    @ctrl.set("hs_sweep_stop")
    def stop():
        """Stop: running variants stop at their next step, the others are cancelled."""
        if panel.sweep is not None:
            panel.sweep.stop = True
            state.hs_sweep_text = "stopping..."


def start_sweep(panel) -> None:
    """Check the set-up and the values, then run the sweep in the background."""
    state = panel.state
    if state.hs_sweep_running:
        return
    if setup_actions.validate(panel):
        state.hs_sweep_error = f"fix the set-up first: {state.hs_run_reason}"
        return
    vary = vary_texts([(state[f"hs_sweep_key_{i}"], state[f"hs_sweep_values_{i}"]) for i in range(SLOTS)])
    data, _ = setup_actions.current_case(panel)
    panel.sweep_count += 1
    out_dir = panel.work_dir / "sweeps" / f"sweep-{panel.sweep_count:03d}"
    try:
        plan = plan_from_data(data, panel.case_dir, vary, out_dir=out_dir)
    except HeatsoakError as exc:
        state.hs_sweep_error = str(exc).replace("--vary ", "").replace("--list ", "")
        return
    panel.sweep = SweepJob(plan, out_dir)
    state.update({"hs_sweep_running": True, "hs_sweep_error": "", "hs_sweep_rows": [],
                  "hs_sweep_text": f"{len(plan.variants)} variant(s): starting...",
                  "hs_sweep_headers": [{"title": c, "key": c} for c in columns(plan.keys, [])]})
    panel.sweep.thread.start()
    asyncio.ensure_future(watch(panel))


def table_row(plan, row) -> dict:
    """A table row of the browser: the column names of ``sweep.csv``, numbers rounded for reading."""
    out = {"variant": row.variant, **{k: row.values.get(k) for k in plan.keys}, "status": row.status,
           "wall_s": None if row.wall_s is None else round(row.wall_s, 2), "model": row.model,
           "error": row.error.splitlines()[0] if row.error else ""}
    for name, p in row.probes.items():
        out.update({f"{name}.{q}": None if p.get(q) is None else round(p[q], 3) for q in ("end", "max", "crossing")})
    out.update({f"region.{name}.max": round(v, 3) for name, v in row.regions.items()})
    return out


def _push(panel, job, shown: int) -> int:
    """Add the rows that arrived since ``shown`` to the table and keep finished variants as runs."""
    state, rows = panel.state, job.rows[shown:]
    if not rows:
        return shown
    state.hs_sweep_rows = state.hs_sweep_rows + [table_row(job.plan, r) for r in rows]
    state.hs_sweep_headers = [{"title": c, "key": c} for c in columns(job.plan.keys, job.rows)]
    keep(panel, job, rows)
    state.hs_sweep_text = f"{len(job.rows)} of {len(job.plan.variants)} variant(s) done"
    return shown + len(rows)


def keep(panel, job, rows) -> None:
    """Keep each variant that computed something as a run, so the results workspace can overlay it."""
    from heatsoak.plugin.runs.store import read_summary

    data = {v.name: v.data for v in job.plan.variants}
    kept = [panel.runs.add(data[r.variant], job.out_dir / r.variant, read_summary(job.out_dir / r.variant),
                           mesh=panel.mesh) for r in rows if r.probes]
    if kept:
        results_actions.runs_changed(panel)
        panel.state.hs_compare = sorted(set(panel.state.hs_compare or []) | {r.id for r in kept})
        results_curves.refresh_curves(panel)


async def watch(panel) -> None:
    """Push rows until the sweep ends, then say how it ended."""
    job, shown = panel.sweep, 0
    while not job.done:
        with panel.state:
            shown = _push(panel, job, shown)
        await asyncio.sleep(POLL_S)
    with panel.state:
        _push(panel, job, shown)
        finish(panel, job)


def finish(panel, job) -> None:
    state = panel.state
    state.hs_sweep_running, panel.sweep = False, None
    if job.error or job.result is None:
        state.hs_sweep_error = job.error or "the sweep stopped without a table"
        state.hs_sweep_text = "failed"
        return
    counts = {s: sum(r.status == s for r in job.result.rows) for s in ("complete", "failed", "cancelled")}
    state.hs_sweep_text = ", ".join(f"{n} {s}" for s, n in counts.items() if n) + f"; table in {job.result.table.name}"
