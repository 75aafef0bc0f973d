"""Element block names and side sets of Exodus II files, which meshio's reader leaves out.

In an Exodus file each element block is one material region, and side sets (element,
side) name the boundary. meshio returns the blocks without their names and drops the
side sets; this reads both with netCDF4 (which meshio needs for Exodus anyway): a
block's name from ``eb_names``, else "block-<number>" from ``eb_prop1``; a side set's
from ``ss_names``, else "sideset-<number>". Element results are not tags and are dropped.

Side numbering (1-based node lists) from the Exodus element-type documentation of
Sandia's SEACAS project.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

# Sides of each solid by the corner nodes of the cell (0-based, VTK/meshio corner order).
_TET = ((0, 1, 3), (1, 2, 3), (0, 3, 2), (0, 2, 1))
_HEX = ((0, 1, 5, 4), (1, 2, 6, 5), (2, 3, 7, 6), (0, 4, 7, 3), (0, 3, 2, 1), (4, 5, 6, 7))
_WEDGE = ((0, 1, 4, 3), (1, 2, 5, 4), (0, 3, 5, 2), (0, 2, 1), (3, 4, 5))
_PYRAMID = ((0, 1, 4), (1, 2, 4), (2, 3, 4), (3, 0, 4), (0, 3, 2, 1))
SIDES = {"tetra": _TET, "hexahedron": _HEX, "wedge": _WEDGE, "pyramid": _PYRAMID}


def _text(rows) -> list:
    """Strings of a netCDF character array (n, length)."""
    rows = np.asarray(rows)
    return [b"".join(r.tolist()).decode("utf-8", errors="replace").strip("\x00 ") for r in rows]


def _names(nc, names_key: str, ids_key: str, prefix: str, count: int) -> list:
    """Names of ``count`` entities: the file's names, else "<prefix>-<id>"."""
    names, ids = [], []
    if names_key in nc.variables:
        nc.variables[names_key].set_auto_mask(False)
        names = _text(nc.variables[names_key][:])
    if ids_key in nc.variables:
        ids = np.asarray(nc.variables[ids_key][:]).tolist()
    return [(names[k] if k < len(names) else "") or f"{prefix}-{ids[k] if k < len(ids) else k + 1}"
            for k in range(count)]


def _read(path: Path):
    """Block names in meshio's block order, and side sets as (name, element indices, sides)."""
    import netCDF4

    with netCDF4.Dataset(str(path)) as nc:
        keys = [k for k in nc.variables if k.startswith("connect")]
        order = [int(k[7:]) - 1 if k[7:].isdigit() else i for i, k in enumerate(keys)]
        blocks = _names(nc, "eb_names", "eb_prop1", "block", max(order, default=-1) + 1)
        n_sets = len(nc.dimensions["num_side_sets"]) if "num_side_sets" in nc.dimensions else 0
        set_names = _names(nc, "ss_names", "ss_prop1", "sideset", n_sets)
        sides = [(set_names[k], np.asarray(nc.variables[f"elem_ss{k + 1}"][:], dtype=np.int64) - 1,
                  np.asarray(nc.variables[f"side_ss{k + 1}"][:], dtype=np.int64) - 1)
                 for k in range(n_sets) if f"elem_ss{k + 1}" in nc.variables]
    return [blocks[i] for i in order], sides


def _side_faces(raw, elements: np.ndarray, side: np.ndarray) -> list:
    """(cell type, corner nodes) blocks of the given sides of the given elements (global, 0-based)."""
    sizes = [len(b.data) for b in raw.cells]
    start = np.concatenate([[0], np.cumsum(sizes)])
    block = np.searchsorted(start, elements, side="right") - 1
    out = []
    for b in np.unique(block[(block >= 0) & (block < len(sizes))]):
        kind = next((k for k in SIDES if raw.cells[b].type.startswith(k)), None)
        if kind is None:
            continue
        mine = block == b
        rows, s = elements[mine] - start[b], side[mine]
        for k, corners in enumerate(SIDES[kind]):
            pick = s == k
            if pick.any():
                out.append(("triangle" if len(corners) == 3 else "quad",
                            np.asarray(raw.cells[b].data)[rows[pick]][:, list(corners)]))
    return out


def name_blocks(raw, path: Path):
    """``raw`` rebuilt with one named cell set per element block and per side set (its faces as
    triangles and quadrilaterals), and notes; ``raw`` as it was when the names cannot be read."""
    import meshio

    try:
        names, side_sets = _read(path)
    except (KeyError, ValueError, IndexError, OSError) as exc:  # names are a bonus: keep the mesh
        return raw, (f"{path}: element block and side set names not read ({type(exc).__name__}: {exc})",)
    if len(names) != len(raw.cells):
        return raw, ()
    cells = [(b.type, b.data) for b in raw.cells]
    members = [(name, k) for k, name in enumerate(names)]
    for name, elements, side in side_sets:
        for kind, faces in _side_faces(raw, elements, side):
            cells.append((kind, faces))
            members.append((name, len(cells) - 1))
    sets = {}
    for name, k in members:
        sets.setdefault(name, [None] * len(cells))[k] = np.arange(len(cells[k][1]))
    return meshio.Mesh(raw.points, cells, cell_sets=sets), ()
