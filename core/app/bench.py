"""``heatsoak bench``: assembly and solver speed on cube meshes, beside references
measured in the same run on the same mesh.

Sizes (cubes of 6 n^3 linear tetrahedra): tiny n = 10 (6k cells, a smoke
test), small n = 20 (48k), medium n = 40 (384k), large n = 64 (1.57M).
Each size runs in a fresh process, so its memory is its own. Per size:

* assembly of K and M: first (pattern included) and again on the cached
  pattern, against scikit-fem assembling the same two matrices from the same
  mesh (its basis included), when scikit-fem is installed;
* for two time steps, alpha dt / h^2 = 1 and 20 (backward Euler): what
  ``solver = "auto"`` picks; one full step against the bare solve inside it;
  every solver's estimated time for a run of ``--steps`` steps (setup +
  steps x median step over steps 7 to 24); the time of writing the
  field, as a fraction of a step; and, in a fresh process, a whole run of
  ``--steps`` steps with auto's solver (assembly included) writing the field
  every 50 steps (XDMF), with the run's peak resident memory (the process
  and the mesh included).

``--json FILE`` writes a list of records, one per size and time step, with
the keys size, elements, nodes, fourier, dt_s, assemble_s, reassemble_s,
skfem_assemble_s, solver, solver_reason, factor_s, step_s, bare_solve_s,
iterations, krylov_spmv_s (as many bare mat-vecs as Krylov iterations; null
for the direct solver), run_1000_s (the run of ``--steps`` steps, 1000 by default),
steps, fields_written, field_every_step_overhead, peak_rss_mb (peak of the
whole run), assemble_peak_mb, energy_imbalance, run_solver, machine and
compare (estimated run time per solver, null where left out).

``--sweep`` adds rows timing 8 variants of a small cube case on a local
cluster of 2 worker processes against the same variants one after another
(:mod:`heatsoak.core.app.sweep.bench`), and a JSON record with size "sweep".

``--reduced`` adds the reduced model's rows per size (build against a full
run, one answer, its error; :mod:`heatsoak.core.app.reduced_bench`) and
records with size "reduced-NAME"; ``--reduced-only`` measures only those.
"""

from __future__ import annotations

import json
import os
import platform
import sys
import tempfile
from concurrent.futures import ProcessPoolExecutor
from multiprocessing import get_context
from pathlib import Path

from heatsoak.core.app import benchphases as ph
from heatsoak.core.app.reduced_bench import measure_reduced, reduced_rows
from heatsoak.core.errors import InputError
from heatsoak.core.solve.linear import cholmod_available, factor_memory_gb

#: Grid cubes per side of each size.
SIZES = {"tiny": 10, "small": 20, "medium": 40, "large": 64}
#: Mesh Fourier numbers alpha dt / h^2 of the two runs.
FOURIERS = (1.0, 20.0)
#: Field output interval of the runs [steps].
FIELD_EVERY = 50
#: A direct solver whose factor would need more than this is left out of the comparison [GB].
COMPARE_DIRECT_GB = 6.0


def measure_size(name: str, steps: int) -> list:
    """All phases of one size but the whole runs; one record per Fourier number (see the module doc)."""
    n = SIZES[name]
    mesh = ph.bench_mesh(n)
    reps = 9 if n <= 20 else (5 if n <= 40 else 2)
    asm = ph.assembly(mesh, reps)
    skfem = ph.skfem_assembly(mesh, reps=3 if n <= 40 else 1)
    skip = ("direct",) if factor_memory_gb(mesh.n_nodes) > COMPARE_DIRECT_GB else ()
    ph.warm_up()
    records = []
    with tempfile.TemporaryDirectory() as tmp:
        for fo in FOURIERS:
            dt = ph.bench_dt(n, fo)
            problem = ph.bench_problem(mesh, dt)
            auto, reason = ph.auto_choice(problem, dt, steps)
            compare = ph.solver_comparison(problem, dt, steps, skip=skip)
            chosen = compare[auto] or ph.step_costs(problem, dt, auto)
            records.append({
                "size": name, "elements": mesh.n_cells, "nodes": mesh.n_nodes, "fourier": fo, "dt_s": dt,
                "assemble_s": asm["assemble_s"], "reassemble_s": asm["reassemble_s"],
                "skfem_assemble_s": skfem, "assemble_peak_mb": asm["assemble_peak_mb"],
                "solver": auto, "solver_reason": reason, "factor_s": chosen["factor_s"],
                "step_s": chosen["step_s"], "bare_solve_s": chosen["bare_solve_s"],
                "iterations": chosen["iterations"], "krylov_spmv_s": chosen["krylov_spmv_s"], "steps": steps,
                "field_every_step_overhead": ph.field_overhead(problem, dt, auto, tmp),
                "compare": {k: None if v is None else v["estimate_s"] for k, v in compare.items()},
            })
    return records


def whole_run(name: str, fourier: float, steps: int, solver: str) -> dict:
    """One run of ``steps`` steps (fields every :data:`FIELD_EVERY`), for a fresh process."""
    with tempfile.TemporaryDirectory() as tmp:
        return ph.run(SIZES[name], fourier, steps, solver, tmp, FIELD_EVERY)


def _fresh_process(func, *args):
    """``func(*args)`` in a new Python process, so its memory and caches are its own."""
    with ProcessPoolExecutor(max_workers=1, mp_context=get_context("spawn")) as pool:
        return pool.submit(func, *args).result()


def machine() -> str:
    """One line describing this machine and the numerical stack."""
    import numpy
    import scipy

    cpu = platform.processor() or platform.machine()
    try:
        with open("/proc/cpuinfo") as f:
            cpu = next(line.split(":", 1)[1].strip() for line in f if line.startswith("model name"))
    except (OSError, StopIteration):
        pass
    mem = ""
    try:
        with open("/proc/meminfo") as f:
            kb = int(next(line for line in f if line.startswith("MemTotal")).split()[1])
        mem = f", {kb / 2**20:.1f} GB RAM"
    except (OSError, StopIteration, ValueError):
        pass
    try:
        import pyamg

        amg = f"pyamg {pyamg.__version__}"
    except ImportError:
        amg = "no pyamg"
    chol = "CHOLMOD (scikit-sparse)" if cholmod_available() else "SuperLU (no scikit-sparse)"
    return (f"{os.cpu_count()} cores ({cpu}){mem}; Python {platform.python_version()}, numpy {numpy.__version__}, "
            f"scipy {scipy.__version__}, {amg}, direct solver {chol}")


def _t(seconds) -> str:
    if seconds is None:
        return "-"
    return f"{seconds * 1e3:.3g} ms" if seconds < 1.0 else f"{seconds:.3g} s"


def table_rows(records: list) -> list:
    """(size, phase, heatsoak, reference, ratio, peak MB) rows of the printed table."""
    rows, seen = [], set()
    for r in records:
        size = f"{r['size']} ({r['elements']} cells)"
        if r["size"] not in seen:
            seen.add(r["size"])
            sk = r["skfem_assemble_s"]
            ref = "-" if sk is None else f"scikit-fem {_t(sk)}"
            for phase, key in (("assemble K+M (first)", "assemble_s"), ("re-assemble K+M", "reassemble_s")):
                ratio = "-" if sk is None else f"{sk / r[key]:.1f}x faster"
                peak = f"{r['assemble_peak_mb']:.0f}" if key == "assemble_s" else ""
                rows.append((size, phase, _t(r[key]), ref, ratio, peak))
        fo, solver = f"Fo {r['fourier']:g}", r["solver"]
        if r["factor_s"] > 1e-3:
            rows.append((size, f"solver setup, {fo} ({solver})", _t(r["factor_s"]), "-", "-", ""))
        ref = f"bare solve {_t(r['bare_solve_s'])}"
        if r.get("krylov_spmv_s"):
            ref += f" ({r['iterations']:.0f} its; their mat-vecs {_t(r['krylov_spmv_s'])})"
        rows.append((size, f"one step, {fo} ({solver})", _t(r["step_s"]), ref,
                     f"{r['step_s'] / r['bare_solve_s']:.2f}x of bare", ""))
        est = {k: v for k, v in r["compare"].items() if v is not None}
        ref = ", ".join(f"{k} {_t(v)}*" for k, v in sorted(est.items(), key=lambda kv: kv[1])) or "-"
        ratio = f"auto {est[solver] / min(est.values()):.2f}x of best*" if solver in est else "-"
        rows.append((size, f"{r['steps']} steps, {fo} ({solver}), fields/{FIELD_EVERY}", _t(r["run_1000_s"]), ref,
                     ratio, f"{r['peak_rss_mb']:.0f}"))
        rows.append((size, f"field written every step, {fo}", f"{100 * r['field_every_step_overhead']:+.0f}%",
                     "-", "of the step time", ""))
    return rows


def format_table(rows: list) -> str:
    head = ("size", "phase", "heatsoak", "reference (same run, same mesh)", "ratio", "peak MB")
    widths = [max(len(str(x[i])) for x in [head, *rows]) for i in range(len(head))]
    line = lambda x: "  ".join(str(v).ljust(w) for v, w in zip(x, widths)).rstrip()
    return "\n".join([line(head), line(["-" * w for w in widths]), *map(line, rows)])


def parse_sizes(text: str) -> list:
    names = [s.strip() for s in text.split(",") if s.strip()]
    bad = [s for s in names if s not in SIZES]
    if bad or not names:
        raise InputError(f"--sizes: unknown size(s) {bad or [text]}; allowed are {', '.join(SIZES)}")
    return names


def _reduced(sizes, steps: int, where: str, pymor: bool = False) -> list:
    """Records of :func:`~heatsoak.core.app.reduced_bench.measure_reduced`, one fresh process per size."""
    out = []
    for name in sizes:
        print(f"measuring reduced model, {name} ...", file=sys.stderr, flush=True)
        out.append({**_fresh_process(measure_reduced, name, steps, pymor), "machine": where})
    return out


def cmd_bench(args) -> int:
    """``heatsoak bench [--sizes small,medium,large] [--json FILE] [--steps N]``."""
    sizes = parse_sizes(args.sizes)
    if args.steps < 1:
        raise InputError(f"--steps must be a positive number of steps, got {args.steps}")
    print(f"heatsoak bench on {machine()}", flush=True)
    print(f"Fo = alpha dt / h^2; * estimated run of the same steps, setup + steps x median of steps "
          f"{ph.PROBE_SKIP + 1} to {ph.PROBE_STEPS};"
          " runs include assembly and field output; peak MB: whole phase, process included", flush=True)
    records, where = [], machine()
    for name in [] if getattr(args, "reduced_only", False) else sizes:
        print(f"measuring {name} ...", file=sys.stderr, flush=True)
        for r in _fresh_process(measure_size, name, args.steps):
            r.update(_fresh_process(whole_run, name, r["fourier"], args.steps, r["solver"]), machine=where)
            records.append(r)
    rows = table_rows(records)
    if getattr(args, "sweep", False):
        from heatsoak.core.app.sweep.bench import measure_reduced, measure_sweep, sweep_rows

        print("measuring sweep ...", file=sys.stderr, flush=True)
        sweep = {**measure_sweep(), "reduced": measure_reduced()}
        rows += sweep_rows(sweep, _t)
    wanted = getattr(args, "reduced", False) or getattr(args, "reduced_only", False)
    reduced = _reduced(sizes, args.steps, where, getattr(args, "pymor", False)) if wanted else []
    rows += [row for r in reduced for row in reduced_rows(r, _t)]
    if getattr(args, "time_error", False):
        from heatsoak.core.app.bench_time import measure_time_error, time_error_rows

        print("measuring adaptive steps against fixed ones ...", file=sys.stderr, flush=True)
        time_records = measure_time_error()
        rows += time_error_rows(time_records, _t)
    print(format_table(rows))
    for r in records:
        print(f"auto, {r['size']}, Fo {r['fourier']:g}: {r['solver']}: {r['solver_reason']}")
    if getattr(args, "sweep", False):
        records.append({"size": "sweep", **sweep, "machine": where})
    records += reduced
    if getattr(args, "time_error", False):
        records += [{"size": "time-error", **r, "machine": where} for r in time_records]
    if args.json:
        Path(args.json).write_text(json.dumps(records, indent=2) + "\n", encoding="utf-8")
    return 0

