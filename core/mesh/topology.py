"""Pure functions on tetrahedral connectivity: faces, orientation, order elevation."""

from __future__ import annotations

import numpy as np
from heatsoak.core.mesh.mesh import TET_EDGES, TET_FACES


def signed_volumes(points: np.ndarray, cells: np.ndarray) -> np.ndarray:
    """Signed volumes of the straight tetrahedra spanned by the cell vertices.

    Parameters
    ----------
    points : (n_nodes, 3) array
    cells : (n_cells, >=4) int array

    Returns
    -------
    (n_cells,) array, positive for positively oriented cells [unit**3].
    """
    x0 = points[cells[:, 0]]
    a, b, c = (points[cells[:, i]] - x0 for i in (1, 2, 3))
    # the triple product a . (b x c) written out: np.cross on (n, 3) arrays is several times slower
    return (a[:, 0] * (b[:, 1] * c[:, 2] - b[:, 2] * c[:, 1])
            + a[:, 1] * (b[:, 2] * c[:, 0] - b[:, 0] * c[:, 2])
            + a[:, 2] * (b[:, 0] * c[:, 1] - b[:, 1] * c[:, 0])) / 6.0


def reorient(cells: np.ndarray, negative: np.ndarray) -> np.ndarray:
    """Return a copy of ``cells`` with the ``negative`` cells made positive.

    Swapping vertices 1 and 2 flips the orientation; for tetra10 the
    mid-edge nodes are permuted to match (edge 0-1 <-> 0-2, 1-3 <-> 2-3).
    """
    out = cells.copy()
    if cells.shape[1] == 4:
        perm = [0, 2, 1, 3]
    else:
        perm = [0, 2, 1, 3, 6, 5, 4, 7, 9, 8]
    out[negative] = cells[negative][:, perm]
    return out


def all_faces(cells: np.ndarray):
    """Every local face of every cell, outward oriented.

    Returns
    -------
    faces : (4 * n_cells, 3 or 6) int array
        Face node indices (triangle or triangle6 order), cell-major.
    keys : (4 * n_cells, 3) int array
        Sorted vertex indices, for matching faces by node set.
    """
    nb = 3 if cells.shape[1] == 4 else 6
    faces = cells[:, TET_FACES[:, :nb]].reshape(-1, nb)
    keys = np.sort(faces[:, :3], axis=1)
    return faces, keys


def face_adjacency(cells: np.ndarray):
    """Pair up the local faces of the cells.

    Returns
    -------
    faces : (4 * n_cells, nb) int array
        All local faces (see :func:`all_faces`).
    count : (4 * n_cells,) int array
        How many cells share each local face's node set (1 on the boundary).
    inverse : (4 * n_cells,) int array
        Index of each local face's unique node set.
    """
    from heatsoak.core.mesh.surface import unique_rows  # packs the keys into one integer: about ten times faster

    faces, keys = all_faces(cells)
    _, inverse, counts = unique_rows(keys)
    return faces, counts[inverse], inverse


def boundary_faces(cells: np.ndarray):
    """Faces that belong to exactly one cell.

    Returns
    -------
    faces : (n_faces, 3 or 6) int array, outward oriented
    face_cell : (n_faces,) int array, the owning cell
    """
    faces, count, _ = face_adjacency(cells)
    on_boundary = np.flatnonzero(count == 1)
    return faces[on_boundary], on_boundary // 4


def elevate(points: np.ndarray, cells: np.ndarray):
    """Turn linear tetrahedra into straight-sided quadratic ones (tetra10).

    Returns
    -------
    points : (n_nodes + n_edges, 3) array with the edge midpoints appended
    cells : (n_cells, 10) int array in VTK order
    """
    edges = np.sort(cells[:, TET_EDGES].reshape(-1, 2), axis=1)
    unique, inverse = np.unique(edges, axis=0, return_inverse=True)
    mid = 0.5 * (points[unique[:, 0]] + points[unique[:, 1]])
    new_cells = np.hstack([cells, points.shape[0] + inverse.reshape(-1, 6)])
    return np.vstack([points, mid]), new_cells
