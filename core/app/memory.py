"""Memory of one job: estimated before it runs, bounded while it runs.

``heatsoak check`` states the estimate and the bound; ``heatsoak run`` refuses
a case whose estimate passes the bound, and runs under it as an operating
system limit on the process's data (Linux ``RLIMIT_DATA``), so a job that
still grows past it stops with a clear message instead of taking the
machine's memory from everything else.

The estimate (common practice, no source; sizes measured on this project's
cube meshes) adds: the interpreter and libraries (about 250 MB), the mesh and
its topology (about 400 B per cell), the sparse matrices (six of them, 12 B per
stored entry, 15 entries per row for 4-node cells, 30 for 10-node), the
linear solver (a direct factor from
:func:`~heatsoak.core.solve.linear.factor_memory_gb`, or Krylov vectors and a
multigrid hierarchy of about three matrices) and the per-step history kept for
the summary (probes and region statistics, about 150 B + 8 B per value).
"""

from __future__ import annotations

import resource
from contextlib import contextmanager

from heatsoak.core.solve.linear import factor_memory_gb, memory_budget_gb

#: Fraction of the machine's memory one job may use by default.
DEFAULT_SHARE = 0.5
_BASE = 250 * 2**20


def default_limit_bytes() -> int:
    """Half the machine's memory [bytes] (:func:`memory_budget_gb` is a quarter of it)."""
    return int(2.0 * memory_budget_gb() * 2**30)


def estimate_bytes(case, steps: int, solver: str = "auto") -> dict:
    """Estimated peak memory of running ``case`` for ``steps`` steps, by part [bytes] and ``total``."""
    mesh = case.mesh
    n, per_row = mesh.n_nodes, (15 if mesh.order == 1 else 30)
    matrices = 6 * 12 * per_row * n
    direct = int(factor_memory_gb(n) * 1e9)
    krylov = 3 * 12 * per_row * n + 10 * 8 * n
    if solver == "direct":
        linear = direct
    elif solver in ("cg-jacobi", "cg-amg"):
        linear = krylov
    else:  # auto takes direct only when its factor fits a quarter of the machine
        linear = direct if direct <= memory_budget_gb() * 2**30 else krylov
    values = 1 + len(case.probes) + 3 * len(mesh.region_names)
    parts = {"base": _BASE, "mesh": 400 * mesh.n_cells + 24 * n, "matrices": matrices, "solver": linear,
             "history": (steps + 1) * (150 + 8 * values)}
    parts["total"] = sum(parts.values())
    return parts


def describe(parts: dict, limit: int) -> str:
    """One line: the estimate and the bound."""
    mb = {k: v / 2**20 for k, v in parts.items()}
    return (f"about {mb['total']:.0f} MiB estimated (solver {mb['solver']:.0f}, matrices {mb['matrices']:.0f}, "
            f"mesh {mb['mesh']:.0f}, history {mb['history']:.0f}); a run may use at most {limit / 2**30:.3g} GiB "
            f"(heatsoak run --max-memory)")


@contextmanager
def bounded(limit: int):
    """Within the block, this process's data and anonymous mappings may not pass ``limit`` bytes
    (``RLIMIT_DATA``; nothing is done where the system has no such limit); yields the limit."""
    try:
        old = resource.getrlimit(resource.RLIMIT_DATA)
        hard = old[1]
        limit = int(limit if hard == resource.RLIM_INFINITY else min(limit, hard))
        resource.setrlimit(resource.RLIMIT_DATA, (limit, hard))
    except (ValueError, OSError, AttributeError):
        old = None
    try:
        yield limit
    finally:
        if old is not None:
            resource.setrlimit(resource.RLIMIT_DATA, old)
