"""Element geometry: Jacobians, volumes, areas, normals, for P1 and P2 cells.

Quadratic (tetra10) cells are isoparametric: their mid-edge nodes may lie off
the straight edges. Volumes are exact on any of them (det J is a cubic); the
assembly integrates curved cells and faces (:func:`curved_cells`,
:func:`curved_faces`) with a higher rule than straight ones.
"""

from __future__ import annotations

import weakref

import numpy as np
from heatsoak.core.mesh.mesh import TET_EDGES
from heatsoak.core.mesh.shape import TRI_EDGES, tet_basis, tet_quadrature, tri_basis, tri_quadrature
from heatsoak.core.mesh.topology import signed_volumes

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


def _cofactors(jac: np.ndarray):
    """Entries (3 x 3 lists of (...) arrays) of the cofactor matrix of each of a stack of
    3 x 3 matrices (..., 3, 3), and the determinants."""
    j = [[jac[..., r, c] for c in range(3)] for r in range(3)]
    cof = [[j[(r + 1) % 3][(c + 1) % 3] * j[(r + 2) % 3][(c + 2) % 3]
            - j[(r + 1) % 3][(c + 2) % 3] * j[(r + 2) % 3][(c + 1) % 3] for c in range(3)] for r in range(3)]
    return cof, j[0][0] * cof[0][0] + j[0][1] * cof[0][1] + j[0][2] * cof[0][2]


def det3(jac: np.ndarray) -> np.ndarray:
    """Determinants of a stack of 3 x 3 matrices (..., 3, 3), by cofactors (faster than LAPACK's loop)."""
    j = [[jac[..., r, c] for c in range(3)] for r in range(3)]
    return (j[0][0] * (j[1][1] * j[2][2] - j[1][2] * j[2][1]) + j[0][1] * (j[1][2] * j[2][0] - j[1][0] * j[2][2])
            + j[0][2] * (j[1][0] * j[2][1] - j[1][1] * j[2][0]))


def inverse3(jac: np.ndarray):
    """Inverses and determinants of a stack of 3 x 3 matrices (..., 3, 3), by cofactors
    computed entry by entry over the whole stack (batched LAPACK or cross products on
    small matrices are several times slower).

    Returns
    -------
    inv : (..., 3, 3), det : (...)
    """
    cof, det = _cofactors(jac)
    inv = np.empty(jac.shape)
    scale = 1.0 / det
    for r in range(3):
        for c in range(3):
            np.multiply(cof[c][r], scale, out=inv[..., r, c])
    return inv, det


def reference_jacobians(points: np.ndarray, cells: np.ndarray, degree: int, inverse: bool = True):
    """The cells' isoparametric maps at the points of the degree-``degree`` rule.

    Parameters
    ----------
    points : (n_nodes, 3)
    cells : (n_cells, nb) int, nb = 4 or 10
    degree : int
        Polynomial degree the quadrature rule integrates exactly.
    inverse : bool
        False skips the inverse Jacobians (None is returned for them).

    Returns
    -------
    values : (nq, nb) shape function values at the quadrature points
    dref : (nq, nb, 3) their gradients in reference coordinates
    inv : (n_cells, nq, 3, 3) inverse Jacobians dxi_j / dx_k [1/m], or None
    weights : (n_cells, nq) quadrature weights times |det J| [m^3]
    """
    order = 1 if cells.shape[1] == 4 else 2
    xi, w = tet_quadrature(degree)
    values, dref = tet_basis(order, xi)
    jac = _jacobians(points, cells, dref)
    if inverse:
        inv, det = inverse3(jac)
    else:
        inv, det = None, det3(jac)
    return values, dref, inv, np.abs(det) * w[None, :]


def isoparametric(points: np.ndarray, cells: np.ndarray, degree: int):
    """Physical shape-function gradients and weights at quadrature points (arguments as
    :func:`reference_jacobians`).

    Returns
    -------
    values : (nq, nb) shape function values at the quadrature points
    grads : (n_cells, nq, nb, 3) physical gradients [1/m]
    weights : (n_cells, nq) quadrature weights times |det J| [m^3]
    """
    values, dref, inv, weights = reference_jacobians(points, cells, degree)
    # sum over j of dref[q, b, j] inv[e, q, j, k], as three products (tiny matmuls are slow)
    grads = dref[None, :, :, 0, None] * inv[:, :, None, 0, :]
    for j in (1, 2):
        grads += dref[None, :, :, j, None] * inv[:, :, None, j, :]
    return values, grads, weights


def _jacobians(points: np.ndarray, cells: np.ndarray, dref: np.ndarray) -> np.ndarray:
    """dx_i / dxi_j, (n_cells, nq, 3, 3), of the cells' maps at the points where ``dref``
    (nq, nb, 3) holds the reference shape-function gradients: one matrix product."""
    nq, nb, _ = dref.shape
    x = np.swapaxes(points[cells], 1, 2)  # (ne, 3, nb)
    jac = x @ np.swapaxes(dref, 0, 1).reshape(nb, nq * 3)  # (ne, 3, nq * 3)
    return np.swapaxes(jac.reshape(len(cells), 3, nq, 3), 1, 2)


#: Cell volumes of each P1 mesh read, kept while the mesh lives (its reader computed them already).
_VOLUMES: weakref.WeakKeyDictionary = weakref.WeakKeyDictionary()


def remember_volumes(mesh, volumes: np.ndarray) -> None:
    """Keep the cell volumes (n_cells,) [m^3] of a mesh just built, for :func:`mesh_cell_volumes`."""
    _VOLUMES[mesh] = volumes


def mesh_cell_volumes(mesh) -> np.ndarray:
    """Cell volumes (n_cells,) [m^3] of ``mesh``: the ones its reader kept, or computed."""
    found = _VOLUMES.get(mesh)
    return cell_volumes(mesh.points, mesh.cells) if found is None else found


def cell_volumes(points: np.ndarray, cells: np.ndarray) -> np.ndarray:
    """Volumes of P1 or P2 (possibly curved) tetrahedra, (n_cells,) [m^3]."""
    if cells.shape[1] == 4:
        return np.abs(signed_volumes(points, cells))
    return reference_jacobians(points, cells, 4, inverse=False)[3].sum(axis=1)


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
        det = det3(_jacobians(points, cells[s : s + block], dref))
        straight = np.linalg.det(np.swapaxes(x[:, 1:4] - x[:, :1], 1, 2))
        rel = det / straight[:, None]
        k = np.argmin(rel, axis=1)
        ratio[s : s + block], where[s : s + block] = rel[np.arange(len(k)), k], xi[k]
    return ratio, where
