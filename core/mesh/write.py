"""A :class:`~heatsoak.core.mesh.mesh.Mesh` written back to a file other programs and heatsoak read.

Written as gmsh MSH 2.2 text: surface triangles carry their group as the
physical tag, cells their region, and ``$PhysicalNames`` names both, so
reading the file back gives the same regions and surface groups.
"""

from __future__ import annotations

from pathlib import Path

import meshio
import numpy as np
from heatsoak.core.mesh.mesh import Mesh

__all__ = ["write_msh22"]

_TYPES = {1: ("triangle", "tetra"), 2: ("triangle6", "tetra10")}


def write_msh22(mesh: Mesh, path, scale: float = 1.0) -> Path:
    """Write ``mesh`` to ``path`` as MSH 2.2 text with named regions and surface groups.

    Parameters
    ----------
    mesh : Mesh
        Points in metres.
    path : path
    scale : float
        Length of one file unit in metres (0.001 writes millimetres); read the
        file back with the matching unit.
    """
    path = Path(path)
    ng = len(mesh.group_names)
    face_tags, cell_tags = mesh.face_group + 1, mesh.cell_region + ng + 1
    names = {n: np.array([i + 1, 2]) for i, n in enumerate(mesh.group_names)}
    names.update({n: np.array([ng + 1 + i, 3]) for i, n in enumerate(mesh.region_names)})
    face_type, cell_type = _TYPES[mesh.order]
    out = meshio.Mesh(mesh.points / scale, [(face_type, mesh.faces), (cell_type, mesh.cells)],
                      cell_data={"gmsh:physical": [face_tags, cell_tags], "gmsh:geometrical": [face_tags, cell_tags]},
                      field_data=names)
    meshio.write(path, out, file_format="gmsh22", binary=False)
    return path
