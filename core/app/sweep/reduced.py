"""Schedule-only sweeps: every variant answered by one reduced model, on the client.

When all variants of a sweep share the mesh, materials, boundary kinds,
convection coefficients and time settings (they differ only in schedules:
ramps, tables, values, ambient temperatures, sources, initial temperatures),
one reduced model (:mod:`heatsoak.core.solve.reduced`) answers all of them
at a cost independent of the mesh; building it costs a few full solves. The
variants' results are written like ``heatsoak whatif`` writes them (the run's
files without the temperature field) and their rows say ``model = reduced``.
The model is kept in ``DIR/.heatsoak-cache`` and reused by a rerun while it fits.
"""

from __future__ import annotations

import time
from pathlib import Path

from heatsoak.core.app.sweep.table import Row, read_results_row
from heatsoak.core.app.sweep.worker import cached_mesh
from heatsoak.core.app.whatif import obtain_model, whatif
from heatsoak.core.case.casefile import case_from_data
from heatsoak.core.errors import InputError
from heatsoak.core.solve.reduced import fingerprint

__all__ = ["CACHE", "schedule_only", "answer_reduced"]

#: Folder of the sweep's reduced model, inside the sweep folder.
CACHE = ".heatsoak-cache"


def _case(task):
    base = Path(task.case_file).parent
    mesh, _, _ = cached_mesh(task.data, base)
    return case_from_data(task.data, base, mesh=mesh, path=task.case_file)


def schedule_only(tasks) -> list | None:
    """The cases of ``tasks`` when every one is valid and all share one fingerprint (only schedules
    differ), else None: then each variant is a full run."""
    if not tasks:
        return None
    try:
        cases = [_case(t) for t in tasks]
    except InputError:  # a variant that does not build: the full route records why
        return None
    first = fingerprint(cases[0].problem, cases[0].time)
    if any(fingerprint(c.problem, c.time) != first for c in cases[1:]):
        return None
    return cases


def _one(task, case, model) -> Row:
    t0 = time.perf_counter()
    try:
        whatif(case, task.out_dir, field=True, model=model)
        row = read_results_row(task.out_dir, task.name, task.values)
    except Exception as exc:  # noqa: BLE001 - this variant's result; the others go on
        row = Row(task.name, task.values, "failed", wall_s=time.perf_counter() - t0,
                  error=f"{type(exc).__name__}: {exc}")
    row.model = "reduced"
    return row


def answer_reduced(tasks, cases, out_dir, on_row, should_stop=None, say=None) -> str | None:
    """Answer every task with one reduced model; ``on_row`` gets each row.

    Returns "complete" or "cancelled"; None when the model could not be built (``say`` is told
    why): the variants then go to full runs.
    """
    say = say or (lambda line: None)
    say(f"{len(tasks)} variant(s) differ only in schedules: answered by one reduced model on this machine")
    path = Path(out_dir) / CACHE / "sweep.reduced.npz"
    try:
        model, reused = obtain_model(cases[0], path, say)
    except Exception as exc:  # noqa: BLE001 - full runs still answer the sweep
        say(f"the reduced model could not be built ({type(exc).__name__}: {exc}); running every variant in full")
        return None
    say(f"reduced model: {model.size} basis vectors, {'reused' if reused else 'built'}")
    done = 0
    try:
        for task, case in zip(tasks, cases):
            if should_stop is not None and should_stop():
                break
            on_row(_one(task, case, model))
            done += 1
    except KeyboardInterrupt:
        pass
    for task in tasks[done:]:
        on_row(Row(task.name, task.values, "cancelled", model="reduced"))
    return "complete" if done == len(tasks) else "cancelled"
