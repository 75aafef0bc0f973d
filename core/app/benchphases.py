"""Measurements behind ``heatsoak bench``: one function per phase, each returning plain numbers.

The benchmark case is a steel-like cube, 0.1 m on a side, cut into
``6 n^3`` linear tetrahedra: one side's temperature ramps from 20 to 200 degC
over the first 100 steps, the opposite side convects to 20 degC air, the top
takes a constant heat flux and the body a constant source. The time step
makes the mesh Fourier number alpha dt / h^2 (h = 0.1 m / n) what is asked.

Wall times are the best of a few repetitions where a phase is short; peak
resident memory is read per phase from the kernel (VmHWM, reset between
phases through /proc/self/clear_refs where allowed).
"""

from __future__ import annotations

import time
from pathlib import Path

import numpy as np
from heatsoak.core.fem.assembly import Assembler
from heatsoak.core.mesh.generate import box_mesh
from heatsoak.core.problem.problem import Boundary, Material, Problem, TimeSettings
from heatsoak.core.problem.schedule import Constant, Ramp
from heatsoak.core.solve.linear import SOLVERS
from heatsoak.core.solve.stepping import ThetaMethod

#: Edge of the cube [m] and its material (steel-like: kappa [W/(m K)], rho [kg/m3], c [J/(kg K)]).
LENGTH, KAPPA, RHO, C = 0.1, 45.0, 7850.0, 470.0
ALPHA = KAPPA / (RHO * C)
#: Steps of the prescribed-temperature ramp at the start of a run.
RAMP_STEPS = 100


def bench_mesh(n: int):
    return box_mesh((n, n, n), size=(LENGTH,) * 3)


def bench_dt(n: int, fourier: float) -> float:
    """Time step [s] with alpha dt / h^2 = fourier on the n^3 grid."""
    return fourier * (LENGTH / n) ** 2 / ALPHA


def bench_problem(mesh, dt: float) -> Problem:
    mat = Material(RHO, C, KAPPA, source=Constant(1e5))
    bcs = {
        "xmin": Boundary("temperature", Ramp(20.0, 200.0, 0.0, RAMP_STEPS * dt)),
        "xmax": Boundary("convection", h=25.0, ambient=Constant(20.0)),
        "zmax": Boundary("heat_flux", Constant(5e3)),
    }
    return Problem(mesh, {"box": mat}, bcs, initial=20.0)


def peak_reset() -> bool:
    """Reset the process's peak resident memory to its current value; False where not allowed."""
    try:
        with open("/proc/self/clear_refs", "w") as f:
            f.write("5")
        return True
    except OSError:
        return False


def peak_mb() -> float:
    """Peak resident memory of this process since start or the last :func:`peak_reset` [MB]."""
    try:
        with open("/proc/self/status") as f:
            for line in f:
                if line.startswith("VmHWM:"):
                    return int(line.split()[1]) / 1024.0
    except OSError:
        pass
    import resource

    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0


def best_of(func, reps: int) -> float:
    """Shortest wall time of ``reps`` calls of ``func()`` [s]."""
    times = []
    for _ in range(max(reps, 1)):
        t0 = time.perf_counter()
        func()
        times.append(time.perf_counter() - t0)
    return min(times)


def assembly(mesh, reps: int = 3) -> dict:
    """K and M: first assembly (pattern included), re-assembly on the cached pattern, peak memory."""
    release_free_memory()
    peak_reset()

    def first():
        a = Assembler(mesh)
        a.stiffness(KAPPA)
        a.mass(RHO * C)

    out = {"assemble_s": best_of(first, reps)}
    asm = Assembler(mesh)
    asm.stiffness(KAPPA)
    out["reassemble_s"] = best_of(lambda: (asm.stiffness(KAPPA * 1.1), asm.mass(RHO * C * 0.9)), reps + 2)
    out["assemble_peak_mb"] = peak_mb()
    return out


def skfem_assembly(mesh, reps: int = 2) -> float | None:
    """scikit-fem's time for the same K and M from the same mesh (basis included) [s]; None if missing."""
    try:
        import skfem
        from skfem.models.poisson import laplace, mass
    except ImportError:
        return None
    m = skfem.MeshTet(np.ascontiguousarray(mesh.points.T), np.ascontiguousarray(mesh.cells.T))

    def run():
        basis = skfem.Basis(m, skfem.ElementTetP1())
        KAPPA * skfem.asm(laplace, basis)
        RHO * C * skfem.asm(mass, basis)

    return best_of(run, reps)


class _TimedSolves:
    """Wraps a solver's ``solve`` to record the wall time and iterations of each call."""

    def __init__(self, solver):
        self.solver, self.inner, self.times, self.iterations = solver, solver.solve, [], []
        solver.solve = self

    def __call__(self, b, x0=None):
        t0 = time.perf_counter()
        x = self.inner(b, x0)
        self.times.append(time.perf_counter() - t0)
        self.iterations.append(self.solver.iterations)
        return x


def stepper_for(problem, dt: float, steps: int, solver: str) -> ThetaMethod:
    return ThetaMethod(problem, TimeSettings(end=steps * dt, step=dt, theta=1.0, solver=solver))


def step_costs(problem, dt: float, solver: str, steps: int = 12, skip: int = 2) -> dict:
    """Setup, one full step and the bare solve inside it, over the first ``steps`` steps.

    ``factor_s`` is the solver's setup (factorisation or preconditioner);
    ``step_s`` the median wall time of a whole step (loads, boundary terms,
    solve, energy balance) after ``skip`` steps; ``bare_solve_s`` the median
    time of the solver's own solve call in the same steps (the triangular
    solves of the factor, or the whole Krylov solve); for Krylov solvers
    ``krylov_spmv_s`` the time of as many bare mat-vecs as iterations.
    """
    stepper = stepper_for(problem, dt, steps, solver)
    t0 = time.perf_counter()
    s = stepper._solver(dt, 1.0)
    factor = time.perf_counter() - t0
    timed = _TimedSolves(s)
    gen = stepper.steps()
    next(gen)
    step_times = []
    for _ in range(steps):
        t0 = time.perf_counter()
        next(gen)
        step_times.append(time.perf_counter() - t0)
    n = slice(skip, None)
    iterations = float(np.mean(timed.iterations[n]))
    spmv = None
    if iterations > 0:  # the Krylov iterations' mat-vecs alone, for comparison with the whole solve
        x = np.ones(s.A.shape[0])
        count = max(int(round(iterations)), 1)
        spmv = best_of(lambda: [s.A @ x for _ in range(count)], 3) * iterations / count
    return {
        "solver": s.name,
        "factor_s": factor,
        "step_s": float(np.median(step_times[n])),
        "bare_solve_s": float(np.median(timed.times[n])),
        "iterations": iterations,
        "krylov_spmv_s": spmv,
        "first_steps_s": float(np.sum(step_times)),
    }


def release_free_memory() -> None:
    """Return freed heap to the system (glibc ``malloc_trim``), so a phase's peak starts clean."""
    import ctypes
    import gc

    gc.collect()
    try:
        ctypes.CDLL("libc.so.6").malloc_trim(0)
    except (OSError, AttributeError):
        pass


def run(n: int, fourier: float, steps: int, solver: str, out_dir, every: int = 50) -> dict:
    """A whole run of ``steps`` backward-Euler steps on the n^3 cube, writing the field every ``every``
    steps; meant for a fresh process: its peak memory counts from the mesh in memory
    (the process, the mesh, assembly, solver and output)."""
    from heatsoak.core.results.writer import XdmfSeries

    mesh = bench_mesh(n)
    dt = bench_dt(n, fourier)
    problem = bench_problem(mesh, dt)
    release_free_memory()
    peak_reset()
    t0 = time.perf_counter()
    stepper = stepper_for(problem, dt, steps, solver)
    field = XdmfSeries(Path(out_dir) / "temperature.xdmf", problem.mesh)
    try:
        for k, (t, T) in enumerate(stepper.steps()):
            if k % every == 0 or k == steps:
                field.write(t, T)
    finally:
        field.close()
    wall = time.perf_counter() - t0
    return {
        "run_1000_s": wall,
        "fields_written": len(field.times),
        "peak_rss_mb": peak_mb(),
        "energy_imbalance": stepper.energy()["relative_imbalance"],
        "run_solver": stepper.report()["solver"],
    }


def field_overhead(problem, dt: float, solver: str, out_dir, steps: int = 20) -> float:
    """Wall time of writing the field (XDMF + HDF5) as a fraction of the step time:
    median write over median step, writing at every step of a short run."""
    from heatsoak.core.results.writer import XdmfSeries

    stepper = stepper_for(problem, dt, steps, solver)
    field = XdmfSeries(Path(out_dir) / "every-step.xdmf", problem.mesh)
    gen = stepper.steps()
    field.write(*next(gen))
    step_times, write_times = [], []
    try:
        while True:
            t0 = time.perf_counter()
            try:
                t, T = next(gen)
            except StopIteration:
                break
            t1 = time.perf_counter()
            field.write(t, T)
            step_times.append(t1 - t0)
            write_times.append(time.perf_counter() - t1)
    finally:
        field.close()
    # the first step builds the solver
    return float(np.median(write_times) / np.median(step_times[1:]))


def auto_choice(problem, dt: float, steps: int):
    """What ``solver = "auto"`` picks for this case, and why."""
    stepper = stepper_for(problem, dt, steps, "auto")
    return stepper.solver_name, stepper.solver_reason


def warm_up() -> None:
    """Build and use every solver once on a small system, so one-time costs (imports, first
    calls into the libraries) do not land on the first measured size."""
    mesh = bench_mesh(6)
    dt = bench_dt(6, 1.0)
    for name in SOLVERS:
        step_costs(bench_problem(mesh, dt), dt, name, steps=3, skip=0)


#: Steps each solver is timed over for the comparison, and the first ones left out of the median:
#: Krylov iteration counts settle over the first few steps as the warm start gets its history.
PROBE_STEPS, PROBE_SKIP = 24, 6


def solver_comparison(problem, dt: float, steps: int, skip=(), probe_steps: int = PROBE_STEPS) -> dict:
    """Estimated wall time of ``steps`` steps with each solver: setup + steps * (median step
    over steps PROBE_SKIP + 1 to ``probe_steps``).

    Solvers named in ``skip`` are left out (reported as None).
    """
    out = {}
    for name in SOLVERS:
        if name in skip:
            out[name] = None
            continue
        c = step_costs(problem, dt, name, steps=probe_steps, skip=PROBE_SKIP)
        c["estimate_s"] = c["factor_s"] + steps * c["step_s"]
        out[name] = c
    return out

