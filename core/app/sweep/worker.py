"""One variant of a sweep, run where a worker runs it.

:func:`run_variant` is what the engine sends to a worker process: it builds
the variant's case from its data, runs it with :func:`~heatsoak.core.app.runner.run_case`
into the variant's results folder and returns its :class:`~.table.Row`. Any
error becomes a failed row carrying the message; nothing is raised, so one bad
variant never stops the others.

Each worker process keeps the last few meshes it read, with their assembler
(sparsity pattern and element geometry), keyed by the mesh file's content,
its length unit and feature angle: the variants of a sweep that share a mesh
read and pattern it once per worker.
"""

from __future__ import annotations

import hashlib
import os
import socket
import time
from collections import OrderedDict
from dataclasses import dataclass
from pathlib import Path

from heatsoak.core.app.runner import run_case
from heatsoak.core.app.sweep.table import Row, read_results_row
from heatsoak.core.case.casefile import case_from_data
from heatsoak.core.fem.assembly import Assembler
from heatsoak.core.mesh.read import read_mesh

__all__ = ["VariantTask", "cache_counts", "cached_mesh", "run_variant"]

#: Meshes kept per worker process (each with its pattern).
KEEP_MESHES = 4

_MESHES: OrderedDict = OrderedDict()
_COUNTS = {"built": 0, "reused": 0}

#: Seconds between two looks at the engine's stop flag during a run.
STOP_POLL_S = 0.5


@dataclass(frozen=True)
class VariantTask:
    """Everything a worker needs to run one variant.

    Attributes
    ----------
    name : str
    values : dict
        Varied key -> value.
    data : dict
        The variant's case tables, file names relative to ``case_file``'s folder.
    case_file : str
        Where the variant's case file was written (``DIR/variants/<name>.toml``).
    out_dir : str
        Its results folder (``DIR/<name>``).
    stop : str or None
        Name of the engine's stop flag (a ``distributed.Event``), polled during the run.
    """

    name: str
    values: dict
    data: dict
    case_file: str
    out_dir: str
    stop: str | None = None


def _mesh_source(data: dict, base_dir: Path):
    """(path, unit, feature angle) of a case's mesh section, or None when it is not plain enough to cache."""
    sec = data.get("mesh") if isinstance(data, dict) else None
    if not isinstance(sec, dict) or not isinstance(sec.get("file"), str):
        return None
    unit, angle = sec.get("unit", "m"), sec.get("feature_angle", 30.0)
    if not isinstance(unit, str) or isinstance(angle, bool) or not isinstance(angle, (int, float)):
        return None
    return base_dir / sec["file"], unit, float(angle)


def cached_mesh(data: dict, base_dir):
    """The mesh of a case and its assembler, read once per process and reused.

    Returns
    -------
    (Mesh, Assembler, bool) or (None, None, False)
        The bool is True when both came from the cache. (None, None, False) when
        the mesh section or file cannot be used: building the case then reports why.
    """
    source = _mesh_source(data, Path(base_dir))
    if source is None:
        return None, None, False
    path, unit, angle = source
    try:
        content = path.read_bytes()
    except OSError:
        return None, None, False
    key = (hashlib.sha256(content).hexdigest(), unit, angle)
    if key in _MESHES:
        _MESHES.move_to_end(key)
        _COUNTS["reused"] += 1
        return (*_MESHES[key], True)
    try:
        mesh = read_mesh(path, unit, angle)
    except Exception:  # noqa: BLE001 - the case check reads it again and names the problem
        return None, None, False
    asm = Assembler(mesh)
    asm.pattern  # noqa: B018 - built here, once, for every variant on this mesh
    _MESHES[key] = (mesh, asm)
    _COUNTS["built"] += 1
    while len(_MESHES) > KEEP_MESHES:
        _MESHES.popitem(last=False)
    return mesh, asm, False


def cache_counts() -> dict:
    """``{"built", "reused"}``: meshes this process read and patterned, and times it reused one."""
    return dict(_COUNTS)


def _stop_flag(name):
    """A callable telling whether the engine asked to stop (looked up at most every STOP_POLL_S)."""
    if name is None:
        return None
    try:
        from distributed import Event, get_worker

        get_worker()
    except (ImportError, ValueError):  # not on a dask worker: nothing to poll
        return None
    event, last = Event(name), [-float("inf")]

    def should_stop() -> bool:
        now = time.monotonic()
        if now - last[0] < STOP_POLL_S:
            return False
        last[0] = now
        return bool(event.is_set())

    return should_stop


def _where() -> str:
    return f"{socket.gethostname()}:{os.getpid()}"


def run_variant(task: VariantTask) -> Row:
    """Run one variant into ``task.out_dir``; its row, failed with the error message if anything went wrong."""
    t0 = time.perf_counter()
    out = Path(task.out_dir)
    (out / "summary.json").unlink(missing_ok=True)  # a stale "complete" must not outlive this attempt
    should_stop = _stop_flag(task.stop)
    reused = False
    if should_stop is not None and should_stop():
        return Row(task.name, task.values, "cancelled", wall_s=0.0, worker=_where())
    try:
        base = Path(task.case_file).parent
        mesh, asm, reused = cached_mesh(task.data, base)
        case = case_from_data(task.data, base, mesh=mesh, path=task.case_file)
        run_case(case, out, should_stop=should_stop, assembler=asm)
    except Exception as exc:  # noqa: BLE001 - every error is this variant's result, the sweep goes on
        row = read_results_row(out, task.name, task.values) or Row(task.name, task.values, "failed")
        row.status, row.error = "failed", f"{type(exc).__name__}: {exc}"
        row.wall_s = time.perf_counter() - t0
        row.worker, row.mesh_reused = _where(), reused
        return row
    row = read_results_row(out, task.name, task.values)
    row.worker, row.mesh_reused = _where(), reused
    return row
