"""Running a case: the loop shared by the command line and the UI, and the ``check``/``run`` commands."""

from __future__ import annotations

import dataclasses
import functools
import signal
import sys
import threading
import time as _time
from contextlib import contextmanager
from pathlib import Path

import numpy as np
from heatsoak.core.app import memory
from heatsoak.core.case.casefile import Case, check_case, load_case, stability_problem
from heatsoak.core.case.paths import describe_limits
from heatsoak.core.case.plausible import drivers, problem_parts, result_problem
from heatsoak.core.errors import CaseError, HeatsoakError, ImplausibleError, InputError, ResultsError
from heatsoak.core.results.probes import ProbeSet
from heatsoak.core.results.record import Recorder, bound_warnings
from heatsoak.core.results.time_error import TimeErrorRecord, margin_warnings
from heatsoak.core.results.writer import ResultFiles
from heatsoak.core.solve.stepping import ThetaMethod
from heatsoak.core.solve.stepping.base import planned_step_times

#: Relative energy imbalance above which a run's summary warns (a sound run is near rounding, 1e-12).
IMBALANCE_WARN = 1e-3

#: Exit code of a run stopped with Ctrl-C (128 + SIGINT, common practice).
EXIT_CANCELLED = 130


def _probe_set(case: Case) -> ProbeSet:
    points = np.array([p.point for p in case.probes]).reshape(-1, 3)
    return ProbeSet(case.mesh, points, [p.name for p in case.probes], unit=case.unit)


def _bound_warnings(case: Case, rec: Recorder) -> list:
    if rec.minimum is None:
        return []
    return bound_warnings(case.problem, case.time.end, rec.minimum.value, rec.maximum.value)


def _time_error(case: Case, rec: Recorder, terr: TimeErrorRecord) -> tuple:
    """(summary entries, warnings) of the estimated time-step error."""
    hist = rec.probe_history
    history = {name: hist[:, i] for i, name in enumerate(terr.per_probe)}
    warn = margin_warnings(terr.per_probe, {p.name: p.threshold for p in case.probes}, history)
    entries = {
        "time_error": dict(terr.per_probe),
        "time_error_field": terr.field,
        "time_error_method": "step doubling: a companion run at half the step, Richardson extrapolation (p = 1)",
    }
    return entries, warn


def _summary(case: Case, stepper, rec: Recorder, files: ResultFiles, status: str, clock: dict,
             terr: TimeErrorRecord) -> dict:
    times = rec.times
    errors, error_warnings = _time_error(case, rec, terr)
    return {
        "status": status,
        "case": "" if case.path is None else case.path.name,
        "steps": max(times.size - 1, 0),
        "end_time": float(times[-1]) if times.size else 0.0,
        "wall_time_s": clock["wall"],
        "timing_s": {"setup": clock["setup"], "stepping": clock["stepping"], "recording_and_writing": clock["output"]},
        "element_order": case.mesh.order,
        "nodes": case.mesh.n_nodes,
        "cells": case.mesh.n_cells,
        "field_steps_written": 0 if files.field is None else len(files.field.times),
        "temperature": {
            "min": None if rec.minimum is None else rec.minimum.to_dict(),
            "max": None if rec.maximum is None else rec.maximum.to_dict(),
            "units": "value degC, where m, when s",
        },
        "probes": {p.name: {"threshold": p.threshold, "crossing_time": rec.crossings().get(p.name)}
                   for p in case.probes},
        **errors,
        "warnings": (list(case.warnings) + _energy_warning(case, stepper.energy()) + list(case.mesh.warnings)
                     + getattr(rec.probes, "notes", []) + _bound_warnings(case, rec) + error_warnings),
        "energy": stepper.energy(),
        "solver": stepper.report(),
    }


@contextmanager
def _interrupts_deferred():
    """Hold Ctrl-C while a step is written, so every result file ends on the same step; the
    interrupt is raised once the write is done. Only the main thread receives signals."""
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    caught = []
    old = signal.signal(signal.SIGINT, lambda signum, frame: caught.append(signum))
    try:
        yield
    finally:
        signal.signal(signal.SIGINT, old)
        if caught:
            raise KeyboardInterrupt


def _plausible(case: Case, t: float, T: np.ndarray) -> None:
    """ImplausibleError when the field ``T`` [degC] at ``t`` [s] is one no body can have; the
    step is then not written, and the run ends on the step before."""
    message = result_problem(t, float(T.min()), float(T.max()), case.data, problem_parts(case.problem))
    if message:
        raise ImplausibleError(message)


def _energy_warning(case: Case, energy: dict) -> list:
    """A loud warning when the energy balance is off by more than :data:`IMBALANCE_WARN`."""
    off = energy.get("relative_imbalance", 0.0)
    if not off > IMBALANCE_WARN:
        return []
    return [f"THE ENERGY BALANCE IS OFF BY {100 * off:.3g} %: these results are not reliable; inputs that may "
            f"cause it: {drivers(case.data, problem_parts(case.problem))}"]


def _last_field(files: ResultFiles, terr, stepper, status: str, error: str):
    """Write the last step's field if it was held back; (status, error) after it ("failed" when it cannot be)."""
    try:
        if files.flush_field():
            terr.record(stepper.estimator.error, True)
    except ResultsError as exc:
        return "failed", str(exc)
    return status, error


#: Phases of a run, in the order :func:`run_case` reports them.
RUN_PHASES = ("assembling", "factorising", "stepping", "writing")


def run_case(case: Case, out_dir, progress=None, should_stop=None, assembler=None, phase=None) -> dict:
    """Run ``case``, writing result files into ``out_dir`` as the run goes.

    Parameters
    ----------
    case : Case
    out_dir : path
        Results folder, created if needed (see :mod:`heatsoak.core.results.writer`).
    progress : callable, optional
        Called with a :class:`~heatsoak.core.solve.stepping.Progress` after every step.
    should_stop : callable, optional
        Polled after every step; when it returns True the run stops cleanly.
    assembler : Assembler, optional
        An assembler of ``case.mesh`` whose pattern and geometry are reused (sweeps).
    phase : callable, optional
        Called with the name of each phase as it starts (see :data:`RUN_PHASES`):
        assembling (probes and operators), factorising (the first step's system),
        stepping (steps with their output), writing (the last field and the summary).

    Returns
    -------
    dict
        The summary also written to ``summary.json``; ``status`` is
        "complete" or "cancelled" (Ctrl-C or ``should_stop``). On any other
        error (a full disk, a solver failure) the files are closed on the
        last whole step, summary.json says "failed" and why, and the error is
        re-raised. Ctrl-C before the result files exist propagates.
    """
    phase = phase or (lambda name: None)
    t0 = _time.perf_counter()
    phase("assembling")
    probes = _probe_set(case)
    rec = Recorder(case.mesh, probes, [p.threshold for p in case.probes])
    settings = dataclasses.replace(case.time, error_estimate=True)
    stepper = ThetaMethod(case.problem, settings, progress=progress, assembler=assembler)
    terr = TimeErrorRecord(probes)
    phase("factorising")
    stepper.prepare()
    phase("stepping")
    files = ResultFiles(out_dir, case.mesh, probes.names, every=case.output_every)
    clock = {"setup": _time.perf_counter() - t0, "output": 0.0}
    status, error = "failed", ""
    tick = _time.perf_counter()
    try:
        for t, T in stepper.steps():
            t1 = _time.perf_counter()
            _plausible(case, t, T)
            with _interrupts_deferred():
                written = files.step(t, *rec.record(t, T), T)
            terr.record(stepper.estimator.error, written)
            clock["output"] += _time.perf_counter() - t1
            if should_stop is not None and should_stop():
                stepper.cancel()
        status = stepper.status
    except KeyboardInterrupt:
        status = "cancelled"
    except Exception as exc:
        error = str(exc) if isinstance(exc, HeatsoakError) else f"{type(exc).__name__}: {exc}"
        if isinstance(exc, MemoryError):
            error = "out of memory: the run needed more than this process may use (heatsoak run --max-memory)"
        raise
    finally:
        phase("writing")
        with _interrupts_deferred():
            status, error = _last_field(files, terr, stepper, status, error)
        clock["wall"] = _time.perf_counter() - t0
        clock["stepping"] = _time.perf_counter() - tick - clock["output"]
        summary = _summary(case, stepper, rec, files, status, clock, terr)
        if status == "failed":
            summary["error"] = error
        with _interrupts_deferred():
            summary = files.finish(summary)
    return summary


class TerminalProgress:
    """A one-line progress bar redrawn with a carriage return, at most every ``interval`` seconds."""

    def __init__(self, stream=None, width: int = 30, interval: float = 0.1):
        self.stream = sys.stderr if stream is None else stream
        self.width, self.interval, self._last = width, interval, -1.0

    def __call__(self, p) -> None:
        now = _time.perf_counter()
        if p.fraction < 1.0 and now - self._last < self.interval:
            return
        self._last = now
        filled = round(self.width * min(max(p.fraction, 0.0), 1.0))
        bar = "#" * filled + "-" * (self.width - filled)
        eta = _time.strftime("%H:%M:%S", _time.gmtime(max(p.eta_s, 0.0)))
        self.stream.write(f"\rstep {p.step:>6}  t {p.t:>10.4g} / {p.end:g} s  [{bar}] {100 * p.fraction:5.1f}%"
                          f"  left {eta} ")
        self.stream.flush()

    def done(self) -> None:
        if self._last >= 0:
            self.stream.write("\n")
            self.stream.flush()


def _fmt_point(point, unit: str, scale: float) -> str:
    return "(" + ", ".join(f"{x / scale:g}" for x in point) + f") {unit}"


def _describe_boundary(b) -> str:
    if b.kind == "temperature":
        return f"temperature [degC] {b.value.describe()}"
    if b.kind == "heat_flux":
        return f"heat flux into the body [W/m2] {b.value.describe()}"
    if b.kind == "convection":
        return f"convection, h {b.h:g} W/(m2 K), ambient [degC] {b.ambient.describe()}"
    return "insulated"


def describe_case(case: Case) -> list:
    """Short plain-text lines saying what a case will run."""
    from heatsoak.core.mesh.read import UNITS

    m, tm = case.mesh, case.time
    kind = "tetra" if m.order == 1 else "tetra10"
    lines = [(f"mesh      {case.mesh_file.name} ({case.unit}): {m.n_nodes} nodes, {m.n_cells} {kind} cells, "
              f"{len(m.region_names)} regions, {len(m.group_names)} surface groups")]
    extent = m.points.max(axis=0) - m.points.min(axis=0)
    scale = UNITS[case.unit]
    lines.append(f"size      {' x '.join(f'{e / scale:.4g}' for e in extent)} {case.unit}")
    for name, mat in case.problem.materials.items():
        k = mat.conductivity if np.ndim(mat.conductivity) == 0 else "tensor"
        src = "" if mat.source is None else f", source [W/m3] {mat.source.describe()}"
        lines.append(f"material  {name}: density {mat.density:g} kg/m3, specific heat {mat.specific_heat:g} J/(kg K), "
                     f"conductivity {k if isinstance(k, str) else format(k, 'g')} W/(m K){src}")
    for name, b in case.problem.boundaries.items():
        lines.append(f"boundary  {name}: {_describe_boundary(b)}")
    rest = [g for g in m.group_names if g not in case.problem.boundaries]
    if rest:
        lines.append(f"boundary  insulated (not listed): {', '.join(rest)}")
    if tm.tolerance is not None:
        steps = f"adaptive steps to a time-step error of {tm.tolerance:g} K, at most {tm.step:g} s"
    else:
        n, plain = len(planned_step_times(case.problem, tm)), int(np.ceil(tm.end / tm.step - 1e-9))
        extra = f", {n - plain} more than end/step for schedule corners and start steps" if n > plain else ""
        steps = f"step {tm.step:g} s ({n} steps{extra})"
    lines.append(f"time      0 to {tm.end:g} s, {steps}, theta {tm.theta:g}, {tm.mass} mass, solver {tm.solver}")
    for p in case.probes:
        thr = "" if p.threshold is None else f", threshold {p.threshold:g} degC"
        lines.append(f"probe     {p.name} at {_fmt_point(p.point, case.unit, UNITS[case.unit])}{thr}")
    lines.append(f"output    temperature field every {case.output_every} step(s) and the last")
    return lines


def cmd_check(args) -> int:
    """``heatsoak check CASE``: print every problem (exit 2) or "ok" and what will run (exit 0)."""
    try:
        case = load_case(args.case)
    except CaseError as exc:
        for problem in exc.problems:
            print(problem, file=sys.stderr)
        print(f"{len(exc.problems)} problem(s) in {args.case}", file=sys.stderr)
        return 2
    unstable = stability_problem(case.problem, case.time)
    if unstable:
        print(f"{case.path.name}: time.step: {unstable}\n1 problem(s) in {args.case}", file=sys.stderr)
        return 2
    print(f"ok: {args.case}")
    print("\n".join(describe_case(case)))
    for w in case.warnings:
        print(f"warning   {w}")
    for w in [*case.mesh.warnings, *_probe_set(case).notes]:
        print(f"note      {w}")
    steps = len(planned_step_times(case.problem, case.time))
    print(f"memory    {memory.describe(memory.estimate_bytes(case, steps, case.time.solver), memory.default_limit_bytes())}")
    print(f"limits    {describe_limits()}")
    return 0


def _error_lines(summary: dict) -> list:
    """The estimated time-step error, as printed after a run."""
    per_probe = summary.get("time_error") or {}
    solver = summary.get("solver") or {}
    tol = solver.get("tolerance")
    how = (f"adaptive steps to {tol:g} K ({solver.get('rejected_steps', 0)} retaken)" if tol is not None
           else "fixed step")
    lines = [f"time-step error ({how}): at most {summary.get('time_error_field', 0.0):.3g} K in the field "
             f"at the written steps; {solver.get('factorizations', 0)} factorisations"]
    lines += [f"probe {name}: time-step error at most {e:.3g} K" for name, e in per_probe.items()]
    return lines


def _report(summary: dict, out_dir: Path) -> list:
    t = summary["temperature"]
    lines = [(f"{summary['status']}: {summary['steps']} steps to t = {summary['end_time']:g} s "
              f"in {summary['wall_time_s']:.1f} s; results in {out_dir}")]
    solver = summary.get("solver") or {}
    if solver.get("solver"):
        lines.append(f"solver {solver['solver']}: {solver['reason']}")
    if t["min"] is not None:
        lines.append(f"temperature from {t['min']['value']:.4g} to {t['max']['value']:.4g} degC "
                     f"(max at t = {t['max']['when']:g} s)")
    for name, p in summary["probes"].items():
        if p["threshold"] is not None:
            when = "not reached" if p["crossing_time"] is None else f"reached at t = {p['crossing_time']:.4g} s"
            lines.append(f"probe {name}: {p['threshold']:g} degC {when}")
    lines.extend(_error_lines(summary))
    lines.append(f"energy balance: relative imbalance {summary['energy']['relative_imbalance']:.2e}")
    lines.extend(f"warning: {w}" for w in summary.get("warnings", []))
    lines.append(summary["note"])
    return lines


def _memory_limit(args) -> int:
    given = getattr(args, "max_memory", None)
    if given is not None and not given > 0:
        raise InputError(f"--max-memory {given!r}: expected a number of GB > 0")
    return memory.default_limit_bytes() if given is None else int(given * 2**30)


def _run_one(path, out, quiet: bool, limit: int | None = None) -> dict:
    case = load_case(path)
    if limit is not None:
        need = memory.estimate_bytes(case, len(planned_step_times(case.problem, case.time)), case.time.solver)
        if need["total"] > limit:
            raise InputError(f"{path}: {memory.describe(need, limit)}: the case needs more; use a coarser mesh, "
                             "a larger step or fewer probes, or raise --max-memory")
    bar = None if quiet else TerminalProgress()
    try:
        with memory.bounded(memory.default_limit_bytes() if limit is None else limit):
            summary = run_case(case, out, progress=bar)
    finally:
        if bar is not None:
            bar.done()
    print("\n".join(_report(summary, out)))
    return summary


def cmd_run(args) -> int:
    """``heatsoak run CASE [CASE ...] [--out DIR] [--quiet]``: run headless.

    One case writes into DIR (default ``<case>-results`` beside it); several
    cases are a batch (:mod:`heatsoak.core.app.batch`): every case is checked
    before the first one runs, each writes into a folder of its own, a case
    that fails does not stop the others. Exit 0 when all complete, 2 on bad
    input, 1 when a run failed, 130 when cancelled.
    """
    paths = [Path(c) for c in ([args.case] if isinstance(args.case, str) else args.case)]
    if len(paths) > 1:
        from heatsoak.core.app.batch import output_folders, run_batch

        output_folders(paths, args.out)  # a file named twice is refused before anything runs
        problems = [i.message for p in paths for i in check_case(p)]
        if problems:
            raise CaseError(problems)
        return run_batch(paths, args.out, args.quiet, functools.partial(_run_one, limit=_memory_limit(args)))
    out = paths[0].parent / f"{paths[0].stem}-results" if args.out is None else Path(args.out)
    summary = _run_one(paths[0], out, args.quiet, _memory_limit(args))
    return 0 if summary["status"] == "complete" else EXIT_CANCELLED
