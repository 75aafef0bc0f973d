"""Element geometry: Jacobians, volumes, areas, normals, for P1 and P2 cells.

Quadratic (tetra10) cells are isoparametric: their mid-edge nodes may lie off
the straight edges. Volumes are exact on any of them (det J is a cubic); the
assembly integrates curved cells and faces (:func:`curved_cells`,
:func:`curved_faces`) with a higher rule than straight ones.
"""

from __future__ import annotations

import numpy as np
from heatsoak.core.mesh.mesh import TET_EDGES
from heatsoak.core.mesh.shape import TRI_EDGES, tet_basis, tet_quadrature, tri_basis, tri_quadrature

#: A mid-edge node farther than this from its straight edge's midpoint, per edge length,
#: makes its cell or face curved (round-off in written coordinates stays far below it).
STRAIGHT = 1e-9

#: Degree of the rule whose points sample det J when a curved cell is checked.
SAMPLE_DEGREE = 8


def p1_gradients(points: np.ndarray, cells: np.ndarray):
    """Constant gradients of the vertex (barycentric) functions of straight tetrahedra.

    Parameters
    ----------
    points : (n_nodes, 3)
    cells : (n_cells, >=4) int

    Returns
    -------
    grads : (n_cells, 4, 3) [1/m]
    volumes : (n_cells,) signed volumes [m^3]
    """
    p = points[cells[:, :4]]
    a, b, c = p[:, 1] - p[:, 0], p[:, 2] - p[:, 0], p[:, 3] - p[:, 0]
    bc, ca, ab = np.cross(b, c), np.cross(c, a), np.cross(a, b)
    det = np.einsum("ij,ij->i", a, bc)
    g = np.empty((len(cells), 4, 3))
    g[:, 1], g[:, 2], g[:, 3] = bc, ca, ab
    g[:, 1:] /= det[:, None, None]
    g[:, 0] = -g[:, 1:].sum(axis=1)
    return g, det / 6.0


def isoparametric(points: np.ndarray, cells: np.ndarray, degree: int):
    """Physical shape-function gradients and weights at quadrature points.

    Parameters
    ----------
    points : (n_nodes, 3)
    cells : (n_cells, nb) int, nb = 4 or 10
    degree : int
        Polynomial degree the quadrature rule integrates exactly.

    Returns
    -------
    values : (nq, nb) shape function values at the quadrature points
    grads : (n_cells, nq, nb, 3) physical gradients [1/m]
    weights : (n_cells, nq) quadrature weights times |det J| [m^3]
    """
    order = 1 if cells.shape[1] == 4 else 2
    xi, w = tet_quadrature(degree)
    values, dref = tet_basis(order, xi)
    x = points[cells]  # (ne, nb, 3)
    jac = np.einsum("ebi,qbj->eqij", x, dref)  # dx_i / dxi_j
    det = np.linalg.det(jac)
    inv = np.linalg.inv(jac)  # dxi / dx
    grads = np.einsum("qbj,eqjk->eqbk", dref, inv)
    return values, grads, np.abs(det) * w[None, :]


def cell_volumes(points: np.ndarray, cells: np.ndarray) -> np.ndarray:
    """Volumes of P1 or P2 (possibly curved) tetrahedra, (n_cells,) [m^3]."""
    if cells.shape[1] == 4:
        return np.abs(p1_gradients(points, cells)[1])
    return isoparametric(points, cells, 4)[2].sum(axis=1)


def face_jacobians(points: np.ndarray, faces: np.ndarray, degree: int):
    """Area elements of P1/P2 triangles at quadrature points.

    Returns
    -------
    values : (nq, nb) shape function values at the quadrature points
    weights : (n_faces, nq) quadrature weights times the area element [m^2]
    normals : (n_faces, nq, 3) unit normals (right-hand rule of the node order)
    """
    order = 1 if faces.shape[1] == 3 else 2
    xi, w = tri_quadrature(degree)
    values, dref = tri_basis(order, xi)
    tangents = np.einsum("fbi,qbj->fqji", points[faces], dref)  # (nf, nq, 2, 3)
    n = np.cross(tangents[:, :, 0], tangents[:, :, 1])
    da = np.linalg.norm(n, axis=2)
    return values, da * w[None, :], n / np.where(da > 0, da, 1.0)[..., None]


def face_areas(points: np.ndarray, faces: np.ndarray) -> np.ndarray:
    """Areas of P1 or P2 (possibly curved) triangles, (n_faces,) [m^2]."""
    if faces.shape[1] == 3:
        p = points[faces]
        return 0.5 * np.linalg.norm(np.cross(p[:, 1] - p[:, 0], p[:, 2] - p[:, 0]), axis=1)
    return face_jacobians(points, faces, 4)[1].sum(axis=1)


def _mid_offsets(points: np.ndarray, cells: np.ndarray, edges: np.ndarray):
    """Distances (n, n_edges) of mid-edge nodes from their straight edges' midpoints, and edge lengths."""
    a, b = points[cells[:, edges[:, 0]]], points[cells[:, edges[:, 1]]]
    offset = np.linalg.norm(points[cells[:, cells.shape[1] - len(edges) :]] - 0.5 * (a + b), axis=2)
    return offset, np.linalg.norm(b - a, axis=2)


def curved_cells(points: np.ndarray, cells: np.ndarray) -> np.ndarray:
    """(n_cells,) bool: quadratic cells with a mid-edge node off its straight edge (all False for P1)."""
    if cells.shape[1] == 4:
        return np.zeros(len(cells), dtype=bool)
    offset, length = _mid_offsets(points, cells, TET_EDGES)
    return (offset > STRAIGHT * length).any(axis=1)


def curved_faces(points: np.ndarray, faces: np.ndarray) -> np.ndarray:
    """(n_faces,) bool: 6-node faces with a mid-edge node off its straight edge (all False for 3-node)."""
    if faces.shape[1] == 3:
        return np.zeros(len(faces), dtype=bool)
    offset, length = _mid_offsets(points, faces, TRI_EDGES)
    return (offset > STRAIGHT * length).any(axis=1)


def sampled_jacobians(points: np.ndarray, cells: np.ndarray, block: int = 2048):
    """Smallest det J of quadratic cells over sample points (the ten nodes and the points of a
    degree-:data:`SAMPLE_DEGREE` rule), relative to det J of the straight cell on the vertices.

    Returns
    -------
    ratio : (n_cells,) min det J / det J_straight; 1 for straight cells, <= 0 where the cell folds
    where : (n_cells, 3) reference coordinates of the sample point giving it
    """
    nodes = np.vstack([np.eye(4)[:, 1:], 0.5 * (np.eye(4)[TET_EDGES[:, 0], 1:] + np.eye(4)[TET_EDGES[:, 1], 1:])])
    xi = np.vstack([nodes, tet_quadrature(SAMPLE_DEGREE)[0]])
    _, dref = tet_basis(2, xi)
    ratio, where = np.empty(len(cells)), np.empty((len(cells), 3))
    for s in range(0, len(cells), block):
        x = points[cells[s : s + block]]
        det = np.linalg.det(np.einsum("ebi,qbj->eqij", x, dref))
        straight = np.linalg.det(np.swapaxes(x[:, 1:4] - x[:, :1], 1, 2))
        rel = det / straight[:, None]
        k = np.argmin(rel, axis=1)
        ratio[s : s + block], where[s : s + block] = rel[np.arange(len(k)), k], xi[k]
    return ratio, where
