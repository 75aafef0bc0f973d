"""What a reduced model depends on besides schedules, and which of it changed.

A model holds for one mesh (geometry, tags, unit), one set of materials,
boundary kinds and convection coefficients, one mass choice and one set of
time settings (step, theta, start steps). Schedules (temperature groups,
heat flux, ambient, sources, initial values per region) are its inputs and
may change freely; whether a source or a nodal initial field exists at all
is part of the model.
"""

from __future__ import annotations

import hashlib
import weakref

import numpy as np
from heatsoak.core.problem.problem import Problem, TimeSettings

__all__ = ["fingerprint", "stale_reasons"]


def _digest(*arrays) -> str:
    h = hashlib.sha1()
    for a in arrays:
        a = np.ascontiguousarray(a)
        h.update(str(a.dtype).encode() + str(a.shape).encode())
        h.update(a.tobytes())
    return h.hexdigest()[:16]


#: id(mesh) -> (weak reference to the mesh, digest): an answer checks its mesh without hashing it again.
_MESH_DIGESTS: dict = {}


def _mesh_digest(m) -> str:
    known = _MESH_DIGESTS.get(id(m))
    if known is not None and known[0]() is m:
        return known[1]
    digest = _digest(m.points, m.cells, m.cell_region, m.faces, m.face_group) + f" ({m.n_nodes} nodes, {m.n_cells} cells)"
    key = id(m)
    _MESH_DIGESTS[key] = (weakref.ref(m, lambda _: _MESH_DIGESTS.pop(key, None)), digest)
    return digest


def _conductivity(k) -> object:
    k = np.asarray(k, dtype=float)
    return float(k) if k.ndim == 0 else [[float(x) for x in row] for row in k]


def fingerprint(problem: Problem, time: TimeSettings) -> dict:
    """Everything a model depends on that is not a schedule, keyed by case-file key.

    Returns
    -------
    dict of str to (float, str or list)
        Plain values where the case file has them (``material.NAME.density``,
        ``boundary.NAME.h``, ``time.step``); a short digest for the mesh and a
        nodal initial field.
    """
    m = problem.mesh
    fp = {"mesh": _mesh_digest(m), "mesh.unit": m.unit}
    for name in m.region_names:
        mat = problem.materials[name]
        fp[f"material.{name}.density"] = float(mat.density)
        fp[f"material.{name}.specific_heat"] = float(mat.specific_heat)
        fp[f"material.{name}.conductivity"] = _conductivity(mat.conductivity)
        fp[f"material.{name}.source"] = "none" if mat.source is None else "scheduled"
    for name in m.group_names:
        bc = problem.boundaries.get(name)
        fp[f"boundary.{name}.kind"] = "insulated" if bc is None else bc.kind
        if bc is not None and bc.kind == "convection":
            fp[f"boundary.{name}.h"] = float(bc.h)
    init = problem.initial
    nodal = not np.isscalar(init) and not isinstance(init, dict)
    fp["initial.file"] = _digest(np.asarray(init, dtype=float)) if nodal else "none"
    fp.update({"time.step": float(time.step), "time.theta": float(time.theta), "time.mass": time.mass,
               "time.start_steps": "default" if time.start_steps is None else int(time.start_steps)})
    return fp


def stale_reasons(model, problem: Problem, time: TimeSettings) -> list:
    """Why ``model`` does not fit this problem: one line per changed input (empty when it fits)."""
    now = fingerprint(problem, time)
    was = model.fingerprint
    out = []
    for key in list(was) + [k for k in now if k not in was]:
        if was.get(key) != now.get(key):
            out.append(f"{key} changed from {was.get(key, 'absent')!r} to {now.get(key, 'absent')!r}")
    return out
