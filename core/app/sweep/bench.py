"""Sweep throughput, for ``heatsoak bench --sweep``.

The same variants of a cube case (a ramped side, a convecting side; the
convection coefficient and the conductivity varied) are run twice: one after
another in this process, then on a local cluster of ``workers`` processes
(started and warmed up before the clock starts: the cluster's start is
reported apart). Both reuse the mesh and its pattern per process, as a sweep
does. The ratio is sequential time over cluster time; on a machine whose
cores are busy with other work it stays well below the number of workers.

A schedule-only sweep of the same case (ramp length and ambient temperature
varied) is answered by one reduced model on this process: variants per
second, the model's build reported apart, against full runs one after another.
"""

from __future__ import annotations

import os
import tempfile
import time
from pathlib import Path

from heatsoak.core.app.sweep.command import prepare
from heatsoak.core.app.sweep.plan import plan_sweep
from heatsoak.core.app.sweep.worker import run_variant
from heatsoak.core.case.casefile import save_case
from heatsoak.core.mesh.generate import box_mesh
from heatsoak.core.mesh.write import write_msh22

__all__ = ["measure_reduced", "measure_sweep", "sweep_rows"]

#: Cubes per side of the bench mesh (6 n^3 tetrahedra) and steps per variant.
CUBES, STEPS = 12, 300
#: The varied keys: 4 x 2 = 8 variants.
VARY = ("boundary.xmax.h=[5, 10, 25, 50]", "material.box.conductivity=[30.0, 45.0]")


def _bench_case(folder: Path, cubes: int, steps: int) -> Path:
    write_msh22(box_mesh((cubes,) * 3, size=(0.1,) * 3), folder / "cube.msh")
    dt = 2.0
    data = {
        "title": "sweep bench cube",
        "mesh": {"file": "cube.msh", "unit": "m"},
        "material": {"box": {"density": 7850, "specific_heat": 470, "conductivity": 45.0}},
        "initial": {"temperature": 20},
        "boundary": {"xmin": {"kind": "temperature", "ramp": {"start": 20, "end": 200, "at": 0, "over": 100 * dt}},
                     "xmax": {"kind": "convection", "h": 25, "ambient": 20}},
        "time": {"end": steps * dt, "step": dt, "theta": 1.0},
        "probe": [{"name": "middle", "at": [0.05, 0.05, 0.05], "threshold": 60}],
        "output": {"every": steps + 1},
    }
    save_case(data, folder / "cube.toml")
    return folder / "cube.toml"


def _load() -> float | None:
    """The 1-minute load average of this machine at the end of a measurement (busy cores blur ratios)."""
    try:
        return os.getloadavg()[0]
    except (AttributeError, OSError):
        return None


def _warm() -> None:
    """Import what a variant needs (run on each worker before the clock starts)."""
    import heatsoak.core.app.sweep.worker  # noqa: F401


def measure_sweep(workers: int = 2, cubes: int = CUBES, steps: int = STEPS, scheduler: str | None = None) -> dict:
    """Seconds for the bench variants one after another and on ``workers`` processes.

    ``scheduler`` times a running cluster instead of a new local one (``workers`` of its workers).

    Returns
    -------
    dict
        variants, cells, steps, workers, load_avg (1 minute, at the end), sequential_s, cluster_s,
        ratio (sequential / cluster),
        variants_per_s (on the cluster), cluster_start_s, statuses (every row's status).
    """
    from heatsoak.core.app.sweep.engine import open_engine, run_tasks

    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        case = _bench_case(tmp, cubes, steps)
        alone, _ = prepare(plan_sweep(case, VARY, out_dir=tmp / "alone"), tmp / "alone")
        t0 = time.perf_counter()
        rows = [run_variant(t) for t in alone]
        sequential = time.perf_counter() - t0
        spread, _ = prepare(plan_sweep(case, VARY, out_dir=tmp / "spread"), tmp / "spread")
        t0 = time.perf_counter()
        with open_engine(workers, scheduler) as client:
            client.wait_for_workers(workers)
            client.run(_warm)
            start = time.perf_counter() - t0
            t1 = time.perf_counter()
            run_tasks(client, spread, rows.append)
            spread_s = time.perf_counter() - t1
    return {"variants": len(alone), "cells": 6 * cubes**3, "steps": steps, "workers": workers, "load_avg": _load(),
            "sequential_s": sequential, "cluster_s": spread_s, "ratio": sequential / spread_s,
            "variants_per_s": len(spread) / spread_s, "cluster_start_s": start,
            "statuses": sorted({r.status for r in rows})}


#: A schedule-only sweep of the same case: 4 x 2 = 8 variants.
VARY_SCHEDULES = ("boundary.xmin.ramp.over=[100, 200, 400, 800]", "boundary.xmax.ambient=[20, 40]")


def measure_reduced(cubes: int = CUBES, steps: int = STEPS) -> dict:
    """Seconds of a schedule-only sweep answered by one reduced model, on this process.

    Returns
    -------
    dict
        variants, build_s (the model, once), answer_s (all variants, files written),
        variants_per_s (answers only), statuses.
    """
    from heatsoak.core.app.sweep.reduced import answer_reduced, schedule_only

    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        case = _bench_case(tmp, cubes, steps)
        tasks, _ = prepare(plan_sweep(case, VARY_SCHEDULES, out_dir=tmp / "r"), tmp / "r")
        cases = schedule_only(tasks)
        if cases is None:
            raise AssertionError("the bench's schedule-only variants do not share one reduced model")
        rows, clock = [], {}

        def mark(line: str) -> None:
            if line.startswith("reduced model:"):
                clock["built"] = time.perf_counter()

        t0 = time.perf_counter()
        answer_reduced(tasks, cases, tmp / "r", rows.append, say=mark)
        end = time.perf_counter()
    return {"variants": len(tasks), "build_s": clock["built"] - t0, "answer_s": end - clock["built"],
            "variants_per_s": len(tasks) / (end - clock["built"]), "statuses": sorted({r.status for r in rows})}


def sweep_rows(record: dict, fmt) -> list:
    """Rows (size, phase, heatsoak, reference, ratio, peak MB) of the bench table; ``fmt`` formats seconds."""
    size = f"sweep ({record['variants']} variants, {record['cells']} cells, {record['steps']} steps)"
    load = "" if record.get("load_avg") is None else f" (load average {record['load_avg']:.1f})"
    return [
        (size, f"{record['workers']} worker{'s' if record['workers'] != 1 else ''}, local cluster", fmt(record["cluster_s"]),
         f"one after another {fmt(record['sequential_s'])}{load}", f"speed-up {record['ratio']:.2f}x", ""),
        (size, "local cluster start (not in the above)", fmt(record["cluster_start_s"]), "-", "-", ""),
    ] + ([] if "reduced" not in record else [
        (size.replace("variants", "schedule-only variants"), "one reduced model, this process",
         f"{record['reduced']['variants_per_s']:.3g} variants/s",
         f"model built once in {fmt(record['reduced']['build_s'])}; full runs one after another "
         f"{record['variants'] / record['sequential_s']:.3g} variants/s",
         f"speed-up {record['reduced']['variants_per_s'] * record['sequential_s'] / record['variants']:.0f}x", "")])
