"""Reduced-model rows of ``heatsoak bench --reduced``.

On the bench cube of each size (:mod:`heatsoak.core.app.benchphases`,
alpha dt / h^2 = 1, ``steps`` backward-Euler steps) this measures, in one
fresh process per size: the build of the reduced model (assembly, one
factorisation per shift, basis, modal form) against one full run of the
same steps (no field output); one answer with 10 probes on the cube's
diagonal and the region means at every step (the ``steps`` + 1 output
times) for the case's own schedules and for a changed ramp; and the largest
difference to the full run at the probes, beside the answer's error
estimate. With ``pymor`` (and pyMOR installed: the ``mor`` extra), pyMOR's
balanced truncation of the same system to the same order is built beside it
and both are compared by their transfer functions at 7 frequencies (it
solves two Lyapunov equations: keep it to the small sizes).
"""

from __future__ import annotations

import dataclasses
import time

import numpy as np
from heatsoak.core.app import benchphases as ph
from heatsoak.core.problem.problem import TimeSettings
from heatsoak.core.problem.schedule import Ramp
from heatsoak.core.results.probes import ProbeSet
from heatsoak.core.results.reduced import answer_outputs
from heatsoak.core.solve.reduced import answer, build_reduced
from heatsoak.core.solve.stepping import ThetaMethod

__all__ = ["measure_reduced", "reduced_rows"]

#: Probes on the diagonal of the cube and the mesh Fourier number of the bench runs.
PROBES, FOURIER = 10, 1.0


def _bench(n: int, steps: int):
    mesh = ph.bench_mesh(n)
    dt = ph.bench_dt(n, FOURIER)
    problem = ph.bench_problem(mesh, dt)
    pts = np.linspace(0.05, 0.95, PROBES)[:, None] * np.full(3, ph.LENGTH)
    probes = ProbeSet(mesh, pts, [f"p{i}" for i in range(PROBES)])
    return mesh, problem, TimeSettings(end=steps * dt, step=dt, theta=1.0), probes


def _full_probes(problem, tm, probes):
    t0 = time.perf_counter()
    values = np.array([probes.values(T) for _, T in ThetaMethod(problem, tm).steps()])
    return values.T, time.perf_counter() - t0


def _transfer_error(b, C, B, reduced, omegas) -> float:
    """Largest relative error over ``omegas`` [1/s] of a reduced transfer function
    ``reduced(w) -> (k, m)`` against C (K + i w M)^-1 B of the full free-node system."""
    import scipy.sparse as sp
    import scipy.sparse.linalg as spla

    worst = 0.0
    for w in omegas:
        H = C @ spla.spsolve(sp.csc_matrix(b.K + 1j * w * b.M), B.astype(complex))
        worst = max(worst, float(np.abs(H - reduced(w)).max() / np.abs(H).max()))
    return worst


def _compare_pymor(problem, tm, model, probes) -> dict:
    """Build time and transfer-function error of pyMOR's balanced truncation beside this model's,
    on the same free-node system (inputs: loads and group rates; outputs: probes); {} without pyMOR."""
    try:
        from pymor.models.iosys import LTIModel
        from pymor.reductors.bt import BTReductor
    except ImportError:
        return {}
    import logging

    from heatsoak.core.solve.reduced.model import _Blocks

    logging.getLogger("pymor").setLevel(logging.ERROR)
    b = _Blocks(problem, tm)
    B = np.hstack([b.loads, b.rates])
    rows = np.zeros((PROBES, problem.mesh.n_nodes))
    np.put_along_axis(rows, probes.nodes, probes.weights, axis=1)
    C = rows[:, model.free]
    t0 = time.perf_counter()
    lti = LTIModel.from_matrices(-b.K.tocsc(), B, C, E=b.M.tocsc())
    red = BTReductor(lti)
    try:
        rom = red.reduce(model.size)
    except ValueError:  # the low-rank Gramian factors hold fewer vectors than asked
        rom = red.reduce(tol=1e-10)
    bt_s = time.perf_counter() - t0
    A, Br, Cr, E = (rom.A.matrix, rom.B.matrix, rom.C.matrix, rom.E.matrix)
    omegas = np.geomspace(0.1 / tm.end, 10.0 / tm.step, 7)
    W = model.basis
    VB, CV, lam = W.T @ B, C @ W, model.system.lam
    ours = _transfer_error(b, C, B, lambda w: CV @ (VB / (lam + 1j * w)[:, None]), omegas)
    theirs = _transfer_error(b, C, B, lambda w: Cr @ np.linalg.solve(1j * w * E - A, Br), omegas)
    return {"pymor_bt_s": bt_s, "pymor_order": int(A.shape[0]), "pymor_tf_error": theirs, "krylov_tf_error": ours}


def measure_reduced(name: str, steps: int, pymor: bool = False) -> dict:
    """Build, answer and accuracy of the reduced model on the bench cube ``name`` (a fresh process)."""
    from heatsoak.core.app.bench import SIZES

    n = SIZES[name]
    mesh, problem, tm, probes = _bench(n, steps)
    t0 = time.perf_counter()
    model = build_reduced(problem, tm)
    build = time.perf_counter() - t0
    out = answer_outputs(model, mesh, probes)
    faster = dataclasses.replace(problem, boundaries={**problem.boundaries, "xmin": dataclasses.replace(
        problem.boundaries["xmin"], value=Ramp(20.0, 250.0, 0.0, 30 * tm.step))})
    rec = {"size": f"reduced-{name}", "elements": mesh.n_cells, "nodes": mesh.n_nodes, "steps": steps,
           "basis": model.size, "shifts": len(model.info["shifts"]), "build_s": build}
    for label, prob in (("own", problem), ("changed", faster)):
        answer(model, prob, tm, out)  # first call warms caches
        times = [answer(model, prob, tm, out).answer_s for _ in range(5)]
        ans = answer(model, prob, tm, out)
        full, full_s = _full_probes(prob, tm, probes)
        rec[f"{label}_answer_s"] = float(np.median(times))
        rec[f"{label}_error_K"] = float(np.abs(ans.outputs[:PROBES] - full).max())
        rec[f"{label}_estimate_K"] = ans.error_estimate
        rec[f"{label}_span_K"] = float(np.ptp(full))
        rec["full_run_s"] = full_s
    if pymor:
        rec.update(_compare_pymor(problem, tm, model, probes))
    return rec


def reduced_rows(r: dict, fmt) -> list:
    """Rows (size, phase, heatsoak, reference, ratio, peak MB) of the bench table; ``fmt`` formats seconds."""
    size = f"{r['size']} ({r['elements']} cells)"
    rows = [(size, f"build reduced model ({r['basis']} vectors, {r['shifts']} shifts)", fmt(r["build_s"]),
             f"one full {r['steps']}-step run {fmt(r['full_run_s'])}", f"{r['build_s'] / r['full_run_s']:.2f}x of a run", "")]
    for label, what in (("own", "its own schedules"), ("changed", "a faster, hotter ramp")):
        rows.append((size, f"one answer, {what} ({r['steps'] + 1} times, {PROBES} probes, means)",
                     fmt(r[f"{label}_answer_s"]), f"full run {fmt(r['full_run_s'])}",
                     f"{r['full_run_s'] / r[f'{label}_answer_s']:.0f}x faster", ""))
        rows.append((size, f"reduced vs full at the probes, {what}", f"{r[f'{label}_error_K']:.2g} K",
                     f"estimate {r[f'{label}_estimate_K']:.2g} K, span {r[f'{label}_span_K']:.3g} K",
                     f"{r[f'{label}_error_K'] / r[f'{label}_span_K']:.1e} of span", ""))
    if r.get("pymor_bt_s") is not None:
        rows.append((size, f"pyMOR balanced truncation, order {r['pymor_order']}: build, transfer error",
                     f"{fmt(r['pymor_bt_s'])}, {r['pymor_tf_error']:.1e}",
                     f"rational Krylov ({r['basis']}) {fmt(r['build_s'])}, {r['krylov_tf_error']:.1e}",
                     f"{r['pymor_bt_s'] / r['build_s']:.1f}x the build time", ""))
    return rows
