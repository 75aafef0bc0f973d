"""The live what-if's numbers: a reduced model of the set-up, its answers as run-like records,
and the curves with the last full run kept faint beside the estimate.

No trame here: plain objects the handlers in :mod:`heatsoak.plugin.whatif.actions` put in the state.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from heatsoak.core.app.runner import _probe_set
from heatsoak.core.results.record import first_crossing
from heatsoak.core.results.reduced import answer_outputs
from heatsoak.core.solve.reduced import answer, build_reduced, reconstruct, stale_reasons
from heatsoak.plugin.results import figures

#: Run id shown for the estimate in legends and hover text.
ESTIMATE = "estimate"
#: Opacity of the last full run's curves behind the estimate.
FAINT = 0.3


@dataclass
class LiveModel:
    """A reduced model of one set-up with its output matrices (probes, then region means)."""

    model: object
    outputs: object
    probe_names: list
    thresholds: list
    region_names: list


@dataclass
class Estimate:
    """A reduced answer shaped like a kept run (``id``, ``times``, ``probes``, ``regions``, ``summary``)."""

    times: np.ndarray
    probes: dict
    regions: dict
    summary: dict
    error: float
    method: str
    id: str = ESTIMATE
    extra: dict = field(default_factory=dict)


def build_live(case) -> LiveModel:
    """Build the reduced model of ``case`` (seconds; run it off the UI thread)."""
    model = build_reduced(case.problem, case.time)
    probes = _probe_set(case)
    return LiveModel(model, answer_outputs(model, case.mesh, probes), list(probes.names),
                     [p.threshold for p in case.probes], list(case.mesh.region_names))


def stale_reason(live: LiveModel, case) -> str:
    """Why the live model does not fit ``case`` (an empty text when it does)."""
    if [p.name for p in case.probes] != live.probe_names:
        return "the probes changed (the live model knows the probes it was built with)"
    return "; ".join(stale_reasons(live.model, case.problem, case.time))


def estimate(live: LiveModel, case) -> Estimate:
    """The reduced answer to ``case``'s schedules as a run-like record (region min/max = mean:
    the live curves draw region means only, the field is not rebuilt)."""
    ans = answer(live.model, case.problem, case.time, live.outputs)
    k = len(live.probe_names)
    probes = {n: ans.outputs[i] for i, n in enumerate(live.probe_names)}
    regions = {n: {"time": ans.times, "mean": m, "min": m, "max": m}
               for n, m in zip(live.region_names, ans.outputs[k:])}
    thresholds = [p.threshold for p in case.probes]
    info = {n: {"threshold": thr, "crossing_time": None if thr is None else first_crossing(ans.times, probes[n], thr)}
            for n, thr in zip(live.probe_names, thresholds)}
    return Estimate(ans.times, probes, regions, {"probes": info}, ans.error_estimate, ans.method,
                    extra={"answer_s": ans.answer_s, "answer": ans})


def estimate_field(live: LiveModel, est: Estimate, t: float) -> tuple:
    """(nodal temperatures (n_nodes,) [degC], time [s]) of the estimate at its step nearest ``t``,
    rebuilt from the basis for this one frame only."""
    i = int(np.argmin(np.abs(est.times - t)))
    return reconstruct(live.model, est.extra["answer"], [i])[0], float(est.times[i])


def _faint(figure: dict, run_id) -> dict:
    """Draw the traces of run ``run_id`` faint and thin."""
    for trace in figure["data"]:
        if (trace.get("meta") or {}).get("run") == run_id:
            trace["opacity"] = FAINT
            trace["line"] = {**trace.get("line", {}), "width": 1.5}
    return figure


def _title(figure: dict, est: Estimate) -> dict:
    figure["layout"]["title"] = {"text": f"reduced-model estimate (error up to {est.error:.2g} K); "
                                         "faint: last full run", "font": {"size": 12}, "x": 0.01}
    figure["layout"]["margin"]["t"] = 56
    return figure


def live_figures(est: Estimate, reference=None, regions=None) -> tuple:
    """(probe figure, region figure) of the estimate, the run ``reference`` faint behind it."""
    runs = [est] + ([reference] if reference is not None else [])
    probe = figures.probe_figure(runs)
    region = figures.region_figure(runs, regions, "mean")
    if reference is not None:
        probe, region = _faint(probe, reference.id), _faint(region, reference.id)
    return _title(probe, est), _title(region, est)


def difference(est: Estimate, run) -> float | None:
    """Largest difference [K] between the estimate and a full run at their common probes and times."""
    common = [n for n in est.probes if n in run.probes]
    if not common or len(run.times) != len(est.times) or not np.allclose(run.times, est.times):
        return None
    return float(max(np.abs(np.asarray(run.probes[n]) - est.probes[n]).max() for n in common))
