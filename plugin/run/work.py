"""A run as a job: what the worker process does with the case the UI set up."""

from __future__ import annotations

from heatsoak.core.app.runner import run_case
from heatsoak.core.case.casefile import case_from_data


def run_in_worker(report, data: dict, case_dir, mesh, out_dir, root=None) -> dict:
    """Build the case from the set-up and run it, reporting each phase and step.

    Parameters
    ----------
    report : heatsoak.plugin.jobs.pool.Reporter
    data : dict
        The case data (as a case file holds it).
    case_dir : path
        Folder that relative file names of the case start from.
    mesh : Mesh
        The mesh the UI has open (sent, not read again).
    out_dir : path
        Results folder.
    root : path, optional
        The folder the files the case names must lie in (as the UI confines them).

    Returns
    -------
    dict
        The run's summary (status "complete" or "cancelled").
    """
    report.phase("reading")
    case = case_from_data(data, case_dir, mesh=mesh, root=root)

    first = {}

    def progress(p):
        """The time left from the steps after the first (the first also warms caches up)."""
        if p.step == 1:
            first["elapsed"], eta = p.elapsed_s, None
        elif p.total and "elapsed" in first:
            eta = (p.elapsed_s - first["elapsed"]) / (p.step - 1) * (p.total - p.step)
        else:
            eta = p.eta_s
        report.advance(p.step, p.total, f"t = {p.t:g} s of {p.end:g} s", eta_s=eta)

    return run_case(case, out_dir, progress=progress, should_stop=report.stopped, phase=report.phase)
