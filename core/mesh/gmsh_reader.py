"""MSH files that meshio cannot read (MSH 4.0, ASCII or binary, and others), read
through gmsh's own Python API into the meshio layout the rest of intake reads.

One cell block per (entity, element type), as meshio gives MSH 4.1: cell arrays
``gmsh:physical`` (the entity's first physical group, 0 for none) and
``gmsh:geometrical`` (the entity), ``field_data`` {name: [tag, dim]} and one named
cell set per physical group (so an entity in several groups is seen in each).
gmsh is optional: without it, the message says how to install it.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
from heatsoak.core.errors import MeshError

#: meshio's name of gmsh element types by (dimension, number of nodes).
CELL_TYPES = {
    (3, 4): "tetra", (3, 10): "tetra10", (3, 8): "hexahedron", (3, 6): "wedge", (3, 5): "pyramid",
    (3, 20): "hexahedron20", (3, 27): "hexahedron27", (3, 15): "wedge15", (3, 18): "wedge18",
    (3, 13): "pyramid13", (3, 14): "pyramid14",
    (2, 3): "triangle", (2, 6): "triangle6", (2, 4): "quad", (2, 8): "quad8", (2, 9): "quad9",
}

#: gmsh's node order -> VTK's, where they differ: gmsh lists the tetra10 edges
#: 0-1, 1-2, 2-0, 3-0, 3-2, 3-1, VTK 0-1, 1-2, 0-2, 0-3, 1-3, 2-3.
TO_VTK = {"tetra10": [0, 1, 2, 3, 4, 5, 6, 7, 9, 8]}

INSTALL = "pip install gmsh"


class _Session:
    """gmsh initialised for one reading: a model of its own, the caller's model and gmsh
    state left as they were (the UI or a test may hold gmsh open)."""

    def __init__(self, gmsh):
        self.gmsh = gmsh

    def __enter__(self):
        gmsh = self.gmsh
        self.started = not gmsh.isInitialized()
        if self.started:
            gmsh.initialize(["", "-nopopup"], interruptible=False)  # no signal handler: any thread
        else:
            self.previous = gmsh.model.getCurrent()
        gmsh.option.setNumber("General.Terminal", 0)
        gmsh.model.add("heatsoak-read")
        return gmsh

    def __exit__(self, *exc):
        gmsh = self.gmsh
        if self.started:
            gmsh.finalize()
        else:
            gmsh.model.remove()
            gmsh.model.setCurrent(self.previous)
        return False


def read_with_gmsh(path: Path, why: str = ""):
    """Read ``path`` with gmsh's API.

    Parameters
    ----------
    path : Path
    why : str, why meshio could not read it, for the message when gmsh is missing

    Returns
    -------
    meshio.Mesh

    Raises
    ------
    MeshError
        gmsh not installed (saying how to install it), or gmsh cannot read the file.
    """
    try:
        import gmsh
    except ImportError:
        raise MeshError(f"cannot read mesh file {path}{': ' + why if why else ''}; gmsh's own reader reads "
                        f"every MSH version: install it with `{INSTALL}`") from None
    try:
        with _Session(gmsh):
            gmsh.merge(str(path))
            return _model_mesh(gmsh)
    except MeshError:
        raise
    except Exception as exc:  # noqa: BLE001 - gmsh raises a bare Exception with its log line
        meshio_said = f"{why}; " if why else ""
        raise MeshError(f"cannot read mesh file {path} (corrupt or truncated?): {meshio_said}"
                        f"gmsh's own reader: {exc}") from None


def _model_mesh(gmsh):
    """The current gmsh model's nodes, 2-D and 3-D elements and physical groups as a meshio.Mesh."""
    import meshio

    tags, coords, _ = gmsh.model.mesh.getNodes()
    tags = np.asarray(tags, dtype=np.int64)
    index = np.full(int(tags.max()) + 1 if len(tags) else 1, -1, dtype=np.int64)
    index[tags] = np.arange(len(tags))
    groups = {(d, t): gmsh.model.getPhysicalName(d, t) or f"{'region' if d == 3 else 'group'}-{t}"
              for d, t in gmsh.model.getPhysicalGroups()}
    blocks, physical, entity, members = [], [], [], []
    for dim, ent in gmsh.model.getEntities():
        if dim < 2:
            continue
        phys = [int(t) for t in gmsh.model.getPhysicalGroupsForEntity(dim, ent)]
        for etype, _, nodes in zip(*gmsh.model.mesh.getElements(dim, ent)):
            _, edim, _, n_nodes, *_ = gmsh.model.mesh.getElementProperties(etype)
            kind = CELL_TYPES.get((edim, n_nodes), f"gmsh-type-{etype}")
            cells = index[np.asarray(nodes, dtype=np.int64).reshape(-1, n_nodes)]
            blocks.append((kind, cells[:, TO_VTK[kind]] if kind in TO_VTK else cells))
            physical.append(np.full(len(cells), phys[0] if phys else 0, dtype=np.int64))
            entity.append(np.full(len(cells), ent, dtype=np.int64))
            members.append({groups[dim, t] for t in phys})
    names = sorted(set().union(*members)) if members else []
    sets = {n: [np.arange(len(b[1])) if n in m else None for b, m in zip(blocks, members)] for n in names}
    field = {name: np.array([t, d]) for (d, t), name in groups.items()}
    return meshio.Mesh(np.asarray(coords, dtype=float).reshape(-1, 3), blocks,
                       cell_data={"gmsh:physical": physical, "gmsh:geometrical": entity},
                       field_data=field, cell_sets=sets)
