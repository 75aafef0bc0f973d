"""Element geometry: Jacobians, volumes, areas, normals, for P1 and P2 cells.

Quadratic (tetra10) cells are isoparametric: their mid-edge nodes may lie off
the straight edges, and all geometric quantities are integrated with
quadrature exact for straight-sided cells.
"""

from __future__ import annotations

import numpy as np
from heatsoak.core.mesh.shape import tet_basis, tet_quadrature, tri_basis, tri_quadrature


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
