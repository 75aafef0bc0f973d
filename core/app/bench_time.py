"""Adaptive steps against fixed steps of the same accuracy, for ``heatsoak bench --time-error``.

For each case (the demo case of a source checkout, and a steel cube whose
face is ramped and then held, convecting on the opposite face):

1. a reference: backward Euler with :data:`REF_STEPS` steps over the run and
   with twice as many, extrapolated (Richardson), probe temperatures at every step;
2. the adaptive run, backward Euler and Crank-Nicolson, with ``tolerance`` = :data:`TOLERANCE`:
   steps, factorisations, wall time and its largest probe error against the
   reference (interpolated linearly in time);
3. the same theta with fixed steps: first as many steps as the adaptive run,
   then the step scaled by the error ratio (to the power 1/order) and shrunk
   by at least 0.8 until its largest probe error is at most the adaptive run's.

Both runs estimate their error as ``heatsoak run`` does; the cost of that
estimate is the fixed run timed again without it. Wall times are of the
stepping only (operators assembled in both), on whatever else the cores run.
"""

from __future__ import annotations

import dataclasses
import time
from pathlib import Path

import numpy as np
from heatsoak.core.mesh.generate import box_mesh
from heatsoak.core.problem.problem import Boundary, Material, Problem, TimeSettings
from heatsoak.core.problem.schedule import Constant, Ramp
from heatsoak.core.results.probes import ProbeSet
from heatsoak.core.solve.stepping import ThetaMethod
from heatsoak.core.solve.stepping.error import step_order

__all__ = ["measure_time_error", "time_error_rows"]

#: Tolerance of the adaptive runs [K] and steps of the reference runs.
TOLERANCE, REF_STEPS = 0.05, 4000
#: The demo case, from a source checkout.
DEMO = Path(__file__).resolve().parents[2] / "meshes" / "platen_warmup.toml"


def _cube_case():
    """(problem, time settings, probe set): 10^3-cube steel block, 0.1 m, face ramped 20 -> 200 degC
    over 300 s then held to 3600 s, convection to 20 degC on the opposite face."""
    mesh = box_mesh((10, 10, 10), size=(0.1,) * 3)
    bcs = {"xmin": Boundary("temperature", Ramp(20.0, 200.0, 0.0, 300.0)),
           "xmax": Boundary("convection", h=25.0, ambient=Constant(20.0))}
    problem = Problem(mesh, {"box": Material(7850.0, 470.0, 45.0)}, bcs, initial=20.0)
    probes = ProbeSet(mesh, [[0.01, 0.05, 0.05], [0.05, 0.05, 0.05], [0.09, 0.05, 0.05]], ["near", "centre", "far"])
    return problem, TimeSettings(end=3600.0, step=40.0), probes


def _demo_case():
    from heatsoak.core.app.runner import _probe_set
    from heatsoak.core.case.casefile import load_case

    case = load_case(DEMO)
    return case.problem, case.time, _probe_set(case)


def _march(problem, settings, probes):
    """(times (n,), probe temperatures (n, k), stepping wall time [s], stepper)."""
    stepper = ThetaMethod(problem, settings)
    t0 = time.perf_counter()
    rows = [(t, probes.values(T)) for t, T in stepper.steps()]
    wall = time.perf_counter() - t0
    return np.array([r[0] for r in rows]), np.array([r[1] for r in rows]), wall, stepper


def _error(times, hist, ref) -> float:
    """Largest probe difference [K] from the reference (times, history), interpolated in time."""
    rt, rh = ref
    return float(max(np.abs(hist[:, j] - np.interp(times, rt, rh[:, j])).max() for j in range(hist.shape[1])))


def _aligned(n: int, end: float, marks) -> int:
    """The smallest N' in [n, 2n] whose step end / N' divides every mark (else n): steps cut short at
    corners make a fixed step less accurate, and a user would pick a step that lands on them."""
    marks = np.asarray([m for m in marks if 0 < m < end], dtype=float)
    for k in range(n, 2 * n + 1):
        q = marks * k / end
        if np.all(np.abs(q - np.round(q)) < 1e-9):
            return k
    return n


def _fixed_same_error(problem, base, probes, ref, target: float, steps: int) -> dict:
    """The fixed-step run of fewest steps end / N, N from ``steps`` up (each landing on the corners when
    some N up to twice as many does), whose largest probe error is at most ``target``."""
    n, order = steps, step_order(base.theta)
    marks = ThetaMethod(problem, base).ops.breakpoints()
    for _ in range(40):
        n = _aligned(n, base.end, marks)
        times, hist, wall, st = _march(problem, dataclasses.replace(base, step=base.end / n, error_estimate=True),
                                       probes)
        err = _error(times, hist, ref)
        if err <= target:
            break
        n = max(int(np.ceil(1.25 * n)), int(np.ceil(n * (err / target) ** (1.0 / order) * 0.9)))
    bare = _march(problem, dataclasses.replace(base, step=base.end / n), probes)[2]
    return {"fixed_step_s": base.end / n, "fixed_steps": st.step_count, "fixed_wall_s": wall, "fixed_error_K": err,
            "fixed_factorizations": st.factorizations, "estimate_overhead": wall / bare - 1.0}


def _reference(problem, base, probes, ref_steps: int):
    """Probe histories free of time error to well below the runs': backward Euler with end / REF_STEPS and
    half that, extrapolated (2 U_half - U, second order and damped, unlike Crank-Nicolson whose stiff
    modes ring after every ramp corner), on the coarser run's times."""
    dt = base.end / ref_steps
    t1, h1, _, _ = _march(problem, dataclasses.replace(base, step=dt, theta=1.0), probes)
    t2, h2, _, _ = _march(problem, dataclasses.replace(base, step=dt / 2, theta=1.0), probes)
    fine = np.column_stack([np.interp(t1, t2, h2[:, j]) for j in range(h2.shape[1])])
    return t1, 2.0 * fine - h1


def measure_case(name: str, problem, settings, probes, theta: float, tolerance: float = TOLERANCE,
                 ref_steps: int = REF_STEPS) -> dict:
    """One record: adaptive against fixed steps of the same probe accuracy (see the module doc)."""
    base = dataclasses.replace(settings, theta=theta, tolerance=None, output_times=())
    rt, rh = _reference(problem, base, probes, ref_steps)
    adaptive = dataclasses.replace(base, step=base.end / 32, tolerance=tolerance)
    times, hist, wall, st = _march(problem, adaptive, probes)
    err = _error(times, hist, (rt, rh))
    rec = {"case": name, "theta": theta, "tolerance_K": tolerance, "adaptive_steps": st.step_count, "adaptive_wall_s": wall,
           "adaptive_error_K": err, "adaptive_factorizations": st.factorizations,
           "adaptive_rejected": st.rejected, "reference_steps": ref_steps}
    rec.update(_fixed_same_error(problem, base, probes, (rt, rh), err, st.step_count))
    return rec


def measure_time_error() -> list:
    """Records of the cube and, from a source checkout, the demo case."""
    cases = [("cube 6k cells, ramp and hold", _cube_case)]
    if DEMO.is_file():
        cases.insert(0, ("demo case (platen)", _demo_case))
    return [measure_case(name, *make(), theta) for name, make in cases for theta in (1.0, 0.5)]


def time_error_rows(records: list, fmt) -> list:
    """(size, phase, heatsoak, reference, ratio, peak MB) rows of the bench table; ``fmt`` formats seconds."""
    rows = []
    for r in records:
        method = "BE" if r["theta"] == 1.0 else "CN"
        rows.append((r["case"], f"adaptive {method}, tolerance {r['tolerance_K']:g} K", fmt(r["adaptive_wall_s"]),
                     f"{r['adaptive_steps']} steps ({r['adaptive_factorizations']} factorisations), "
                     f"probe error {r['adaptive_error_K']:.2g} K", "", ""))
        rows.append((r["case"], f"fixed {method} step of the same error", fmt(r["fixed_wall_s"]),
                     f"{r['fixed_steps']} steps of {r['fixed_step_s']:.3g} s, probe error {r['fixed_error_K']:.2g} K",
                     f"{r['fixed_steps'] / r['adaptive_steps']:.1f}x the steps, "
                     f"{r['fixed_wall_s'] / r['adaptive_wall_s']:.1f}x the time", ""))
        rows.append((r["case"], f"time-step error estimate, fixed {method}", f"{100 * r['estimate_overhead']:+.0f}%",
                     "-", "of the stepping time", ""))
    return rows
