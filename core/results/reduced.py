"""What a reduced-model answer records, in the shape of a run's :class:`~heatsoak.core.results.record.Recorder`.

Probe temperatures and region means come from the answer's small output
matrices; region minima and maxima and the field's extremes need the nodal
field, rebuilt from the basis a block of steps at a time (never the whole
history at once).
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp
from heatsoak.core.results.probes import ProbeSet
from heatsoak.core.results.record import Extreme, first_crossing, node_integrals
from heatsoak.core.solve.reduced import answer, output_rows, reconstruct

__all__ = ["ReducedRecord", "answer_outputs", "energy_balance", "probe_rows", "region_rows", "run_answer",
           "time_errors"]

#: Nodal values rebuilt at once when scanning for minima and maxima (bounds memory to ~160 MB).
_BLOCK_VALUES = 20_000_000


def probe_rows(mesh, probes: ProbeSet) -> sp.csr_matrix:
    """(k, n_nodes) interpolation rows: row i times the nodal field is probe i's temperature."""
    k, nb = probes.nodes.shape
    return sp.csr_matrix((probes.weights.ravel(), (np.repeat(np.arange(k), nb), probes.nodes.ravel())),
                         shape=(k, mesh.n_nodes))


def region_rows(mesh) -> sp.csr_matrix:
    """(n_regions, n_nodes) rows whose product with the nodal field is each region's mean [degC]."""
    W = node_integrals(mesh)
    vol = np.asarray(W.sum(axis=1)).ravel()
    return sp.diags(1.0 / vol) @ W


def answer_outputs(model, mesh, probes: ProbeSet):
    """Output matrices of a model for these probes followed by the region means."""
    return output_rows(model, sp.vstack([probe_rows(mesh, probes), region_rows(mesh)]))


class ReducedRecord:
    """Probe and region histories, extremes and crossings of one reduced answer.

    Parameters
    ----------
    model : ReducedModel
    mesh : Mesh
    probes : ProbeSet
    thresholds : list of (float or None), one per probe
    ans : Answer, from outputs made by :func:`answer_outputs`
    min_max : bool
        Rebuild the field to find region minima/maxima and the extremes (else they are NaN/None).
    """

    def __init__(self, model, mesh, probes: ProbeSet, thresholds, ans, min_max: bool = True):
        self.probes, self.thresholds, self.mesh = probes, list(thresholds), mesh
        k, nr = len(probes), len(mesh.region_names)
        self.times = ans.times
        self.probe_history = ans.outputs[:k].T
        self.region_history = np.full((ans.times.size, nr, 3), np.nan)
        self.region_history[:, :, 0] = ans.outputs[k:k + nr].T
        self.minimum = self.maximum = None
        if min_max:
            self._scan(model, ans)

    def _scan(self, model, ans) -> None:
        """Region minima and maxima at every step and the extremes, a block of steps at a time."""
        mesh = self.mesh
        nodes = [np.unique(mesh.cells[mesh.cell_region == r]) for r in range(len(mesh.region_names))]
        block = max(1, _BLOCK_VALUES // max(mesh.n_nodes, 1))
        lo, hi = (np.inf, 0, 0.0), (-np.inf, 0, 0.0)
        for s in range(0, ans.times.size, block):
            steps = np.arange(s, min(s + block, ans.times.size))
            T = reconstruct(model, ans, steps)
            for r, idx in enumerate(nodes):
                self.region_history[steps, r, 1] = T[:, idx].min(axis=1)
                self.region_history[steps, r, 2] = T[:, idx].max(axis=1)
            i, j = np.unravel_index(np.argmin(T), T.shape), np.unravel_index(np.argmax(T), T.shape)
            if T[i] < lo[0]:
                lo = (float(T[i]), int(i[1]), float(ans.times[steps[i[0]]]))
            if T[j] > hi[0]:
                hi = (float(T[j]), int(j[1]), float(ans.times[steps[j[0]]]))
        self.minimum = Extreme(lo[0], lo[1], mesh.points[lo[1]].copy(), lo[2])
        self.maximum = Extreme(hi[0], hi[1], mesh.points[hi[1]].copy(), hi[2])

    def crossings(self) -> dict:
        """Probe name -> first time [s] its threshold is reached, None if never or no threshold."""
        return {name: (None if thr is None else first_crossing(self.times, self.probe_history[:, i], thr))
                for i, (name, thr) in enumerate(zip(self.probes.names, self.thresholds))}


def run_answer(model, problem, time, mesh, probes, thresholds, exact_time=False, min_max=True):
    """(Answer, ReducedRecord) of ``problem``'s schedules on ``model``."""
    ans = answer(model, problem, time, answer_outputs(model, mesh, probes), exact_time=exact_time)
    return ans, ReducedRecord(model, mesh, probes, thresholds, ans, min_max=min_max)


def energy_balance(model, problem, time, ans) -> dict:
    """The run's energy balance (:meth:`ThetaMethod.energy`) from a reduced answer [J].

    Every term of a step's balance is a fixed linear functional of the field
    (column sums of M, H and K) or of the schedules, so the sums over steps come
    from the answer's small coordinates; theta-grid answers only (the exact-in-time
    answer gets the theta terms of its own times).
    """
    from heatsoak.core.fem.operators import build_operators
    from heatsoak.core.solve.reduced.inputs import left_values, schedules, values
    from heatsoak.core.solve.reduced.model import time_grid

    ops = build_operators(problem, time.mass)
    n, p = model.n_nodes, ops.fixed
    ones_p = np.zeros(n)
    ones_p[p] = 1.0
    rows = np.vstack([ops.mass_apply(np.ones(n)), ops.mass_apply(ones_p), ops.stiffness.T @ ones_p,
                      ops.convection.T @ np.ones(n)])
    out = output_rows(model, rows)
    loads, groups = schedules(problem, model.load_names, model.group_names)
    times, thetas = time_grid(problem, time)
    t0, t1, dt = times[:-1], times[1:], np.diff(times)
    th = thetas if thetas.size == dt.size else np.ones_like(dt)
    before = out.Cz @ ans.z[:, :-1] + out.Cg @ ans.groups[:, :-1]
    after = out.Cz @ ans.z[:, 1:] + out.Cg @ left_values(groups, t0, t1)  # before any jump at t1
    d, tth = after - before, th * after + (1 - th) * before  # rows: 1^T M, 1_p^T M, 1_p^T K, 1^T H
    coef = th * left_values(loads, t0, t1) + (1 - th) * values(loads, t0)
    kinds = [k for _, _, k in ops.loads]
    vsum = np.array([v.sum() for _, v, _ in ops.loads]).reshape(-1)
    vfix = np.array([v[p].sum() for _, v, _ in ops.loads]).reshape(-1)

    def total(kind):
        return float((dt * (np.array([k == kind for k in kinds]) * vsum @ coef)).sum()) if kinds else 0.0

    jump = float((out.Cg[0] @ (ans.groups[:, 1:] - left_values(groups, t0, t1))).sum())  # stored at once
    e = {"stored_J": float(d[0].sum()) + jump,
         "boundary_in_J": total("boundary") - float((dt * tth[3]).sum()),
         "source_in_J": total("source"),
         "dirichlet_in_J": float(d[1].sum() + (dt * tth[2]).sum() - (dt * (vfix @ coef)).sum()) + jump}
    inflow = e["boundary_in_J"] + e["source_in_J"] + e["dirichlet_in_J"]
    e["imbalance_J"] = e["stored_J"] - inflow
    scale = max(abs(e["stored_J"]), abs(inflow), float(rows[0].sum()), 1e-300)
    e["relative_imbalance"] = abs(e["imbalance_J"]) / scale
    return e


def time_errors(model, problem, time, ans, probes, every: int):
    """The run's time-step error estimate (:mod:`heatsoak.core.solve.stepping.error`) for a
    reduced answer, as a :class:`~heatsoak.core.results.time_error.TimeErrorRecord`.

    The companion answer takes two half steps over every step; E = 2 (y - u) (Richardson with
    p = 1, as the run does) at the probes over all steps and over the nodes at the steps a run
    writes (every ``every``-th and the last). An exact-in-time answer has no time-step error.
    """
    from heatsoak.core.results.time_error import TimeErrorRecord
    from heatsoak.core.solve.reduced import half_step_coordinates
    from heatsoak.core.solve.reduced.answer import Answer
    from heatsoak.core.solve.stepping.error import richardson_factor

    rec = TimeErrorRecord(probes)
    if ans.method.startswith("exact"):
        return rec
    dz = richardson_factor(1) * (ans.z - half_step_coordinates(model, problem, time))
    diff = Answer(ans.times, ans.outputs, dz, np.zeros_like(ans.groups), 0.0, ans.method, 0.0)
    k = len(probes)
    if k:
        at = np.abs(output_rows(model, probe_rows(problem.mesh, probes)).Cz @ dz).max(axis=1)
        rec.per_probe = {name: float(e) for name, e in zip(probes.names, at)}
    written = sorted(set(range(0, ans.times.size, every)) | {ans.times.size - 1})
    block = max(1, _BLOCK_VALUES // max(model.n_nodes, 1))
    for s in range(0, len(written), block):
        rec.field = max(rec.field, float(np.abs(reconstruct(model, diff, written[s:s + block])).max()))
    return rec
