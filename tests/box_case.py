"""A small box mesh written to a file and a case file around it, for the case and runner tests."""

from __future__ import annotations

import copy

import meshio
import numpy as np
from heatsoak.core.case.casefile import save_case
from heatsoak.core.mesh.generate import box_mesh


def _halves(c):
    return (c[:, 0] > 0.02).astype(int), ("left", "right")


def write_box_msh(path, shape=(4, 3, 2), order=1, size=(0.04, 0.03, 0.02)):
    """A 40 x 30 x 20 mm box (or ``size`` [m]) with regions "left"/"right" (split at x = 20 mm)
    and surface groups xmin, xmax, ymin, ymax, zmin, zmax, as an MSH 2.2 file in mm.

    Returns the Mesh (in metres) that was written.
    """
    mesh = box_mesh(shape, size=size, order=order, regions=_halves)
    ng = len(mesh.group_names)
    tags_f, tags_c = mesh.face_group + 1, mesh.cell_region + ng + 1
    field = {n: np.array([i + 1, 2]) for i, n in enumerate(mesh.group_names)}
    field.update({n: np.array([ng + 1 + i, 3]) for i, n in enumerate(mesh.region_names)})
    blocks = [("triangle" if order == 1 else "triangle6", mesh.faces), ("tetra" if order == 1 else "tetra10", mesh.cells)]
    out = meshio.Mesh(mesh.points * 1000.0, blocks,
                      cell_data={"gmsh:physical": [tags_f, tags_c], "gmsh:geometrical": [tags_f, tags_c]},
                      field_data=field)
    meshio.write(path, out, file_format="gmsh22", binary=False)
    return mesh


BASE = {
    "title": "box heated from one side",
    "mesh": {"file": "box.msh", "unit": "mm"},
    "material": {"*": {"density": 7900, "specific_heat": 500, "conductivity": 15, "label": "steel"},
                 "right": {"density": 2700, "specific_heat": 900, "conductivity": 200.0}},
    "initial": {"temperature": 20},
    "boundary": {
        "xmin": {"kind": "temperature", "ramp": {"start": 20, "end": 180, "at": 0, "over": 60}},
        "xmax": {"kind": "convection", "h": 15, "ambient": 20},
        "zmin": {"kind": "heat_flux", "value": 500},
    },
    "time": {"end": 120, "step": 10, "theta": 1.0, "mass": "consistent"},
    "probe": [{"name": "core", "at": [20.0, 15.0, 10.0], "threshold": 30},
              {"name": "far", "at": [39.0, 15.0, 10.0]}],
    "output": {"every": 2},
}


def make_case(tmp_path, changes=None, order=1, shape=(4, 3, 2)):
    """Write box.msh and case.toml (BASE updated by ``changes(data)``) into tmp_path; return the case path."""
    write_box_msh(tmp_path / "box.msh", shape=shape, order=order)
    data = copy.deepcopy(BASE)
    if changes is not None:
        changes(data)
    path = tmp_path / "case.toml"
    save_case(data, path)
    return path
