"""Lagrange shape functions and quadrature rules on the reference tetrahedron
and triangle, for linear (P1) and quadratic (P2) elements.

Reference tetrahedron: vertices (0,0,0), (1,0,0), (0,1,0), (0,0,1); node order
as in :mod:`heatsoak.core.mesh.mesh`. Barycentric coordinates are
L0 = 1 - x - y - z, L1 = x, L2 = y, L3 = z.
"""

from __future__ import annotations

from functools import cache

import numpy as np
from heatsoak.core.mesh.mesh import TET_EDGES
from scipy.special import roots_jacobi

#: Highest degree of the collapsed (conical product) rules.
MAX_DEGREE = 20

#: Edges of a triangle in triangle6 mid-node order.
TRI_EDGES = np.array([[0, 1], [1, 2], [2, 0]], dtype=np.int64)


def _barycentric(xi: np.ndarray) -> np.ndarray:
    """(n, d) reference coordinates -> (n, d + 1) barycentric coordinates."""
    xi = np.atleast_2d(np.asarray(xi, dtype=float))
    return np.hstack([1.0 - xi.sum(axis=1, keepdims=True), xi])


def _lagrange(order: int, xi: np.ndarray, edges: np.ndarray):
    """Values and reference gradients of P1/P2 Lagrange functions on a simplex.

    Returns
    -------
    values : (n, nb)
    grads : (n, nb, d)
    """
    lam = _barycentric(xi)
    n, nv = lam.shape
    d = nv - 1
    dlam = np.vstack([-np.ones(d), np.eye(d)])  # (nv, d)
    if order == 1:
        return lam, np.broadcast_to(dlam, (n, nv, d)).copy()
    if order != 2:
        raise ValueError(f"element order must be 1 or 2, got {order!r}")
    a, b = edges[:, 0], edges[:, 1]
    vals = np.hstack([lam * (2.0 * lam - 1.0), 4.0 * lam[:, a] * lam[:, b]])
    gv = (4.0 * lam - 1.0)[:, :, None] * dlam[None]
    ge = 4.0 * (lam[:, a, None] * dlam[None, b] + lam[:, b, None] * dlam[None, a])
    return vals, np.concatenate([gv, ge], axis=1)


def tet_basis(order: int, xi: np.ndarray):
    """Shape functions of the linear (4-node) or quadratic (10-node) tetrahedron.

    Parameters
    ----------
    order : 1 or 2
    xi : (n, 3) array
        Points in reference coordinates.

    Returns
    -------
    values : (n, 4 | 10)
    grads : (n, 4 | 10, 3)
        Gradients with respect to the reference coordinates.
    """
    return _lagrange(order, xi, TET_EDGES)


def tri_basis(order: int, xi: np.ndarray):
    """Shape functions of the linear (3-node) or quadratic (6-node) triangle.

    Parameters
    ----------
    order : 1 or 2
    xi : (n, 2) array

    Returns
    -------
    values : (n, 3 | 6)
    grads : (n, 3 | 6, 2)
    """
    return _lagrange(order, xi, TRI_EDGES)


def tet_quadrature(degree: int):
    """Quadrature on the reference tetrahedron exact for polynomials of ``degree``.

    Returns
    -------
    points : (nq, 3), weights : (nq,) summing to 1/6.

    Rules: centroid (degree 1), the symmetric 4-point rule (degree 2), and
    the 11-point rule of Keast (degree 4; Keast, Comput. Methods Appl. Mech.
    Eng. 55 (1986), from memory, with its weights checked by the unit tests
    against exact monomial integrals); above degree 4, up to :data:`MAX_DEGREE`,
    the collapsed Gauss-Jacobi product rule (:func:`collapsed_rule`).
    """
    if degree <= 1:
        return np.array([[0.25, 0.25, 0.25]]), np.array([1.0 / 6.0])
    if degree == 2:
        a, b = 0.5854101966249685, 0.1381966011250105
        pts = np.array([[b, b, b], [a, b, b], [b, a, b], [b, b, a]])
        return pts, np.full(4, 1.0 / 24.0)
    if degree <= 4:
        a1, b1 = 0.7857142857142857, 0.0714285714285714
        a2, b2 = 0.3994035761667992, 0.1005964238332008
        pts = [[0.25, 0.25, 0.25]]
        pts += [[b1, b1, b1], [a1, b1, b1], [b1, a1, b1], [b1, b1, a1]]
        pts += [[a2, a2, b2], [a2, b2, a2], [a2, b2, b2], [b2, a2, a2], [b2, a2, b2], [b2, b2, a2]]
        w = [-0.0131555555555556] + [0.0076222222222222] * 4 + [0.0248888888888889] * 6
        return np.array(pts), np.array(w)
    if degree <= MAX_DEGREE:
        return collapsed_rule(3, degree)
    raise ValueError(f"no tetrahedron quadrature of degree {degree}; the highest is {MAX_DEGREE}")


def tri_quadrature(degree: int):
    """Quadrature on the reference triangle exact for polynomials of ``degree``.

    Returns
    -------
    points : (nq, 2), weights : (nq,) summing to 1/2.

    Rules: centroid (1), 3-point interior (2), Strang-Fix 6-point (4,
    from memory; checked by the unit tests against exact integrals); above
    degree 4, up to :data:`MAX_DEGREE`, the collapsed Gauss-Jacobi rule.
    """
    if degree <= 1:
        return np.array([[1 / 3, 1 / 3]]), np.array([0.5])
    if degree == 2:
        return np.array([[1 / 6, 1 / 6], [2 / 3, 1 / 6], [1 / 6, 2 / 3]]), np.full(3, 1 / 6)
    if degree <= 4:
        a, b = 0.445948490915965, 0.091576213509771
        pts = [[a, a], [1 - 2 * a, a], [a, 1 - 2 * a], [b, b], [1 - 2 * b, b], [b, 1 - 2 * b]]
        w = [0.223381589678011] * 3 + [0.109951743655322] * 3
        return np.array(pts), 0.5 * np.array(w)
    if degree <= MAX_DEGREE:
        return collapsed_rule(2, degree)
    raise ValueError(f"no triangle quadrature of degree {degree}; the highest is {MAX_DEGREE}")


@cache
def _collapsed(dim: int, degree: int):
    m = (degree + 2) // 2  # Gauss points per direction: exact to degree 2 m - 1 >= degree
    axes = []
    for k in range(dim):
        a = dim - 1 - k  # weight (1 - u)^a of the collapse in direction k
        t, w = roots_jacobi(m, a, 0)
        axes.append(((t + 1.0) / 2.0, w / 2.0 ** (a + 1)))
    grids = np.meshgrid(*[u for u, _ in axes], indexing="ij")
    weight = np.prod(np.meshgrid(*[w for _, w in axes], indexing="ij"), axis=0).ravel()
    u = [g.ravel() for g in grids]
    pts = np.empty((len(weight), dim))
    scale = np.ones(len(weight))
    for k in range(dim):
        pts[:, k] = scale * u[k]
        scale = scale * (1.0 - u[k])
    return pts, weight


def collapsed_rule(dim: int, degree: int):
    """Quadrature on the reference triangle (``dim`` 2) or tetrahedron (3) exact for
    polynomials of ``degree``: Gauss-Jacobi points on the unit square or cube mapped by the
    collapse x = u, y = (1 - u) v, z = (1 - u)(1 - v) w, whose Jacobian (1 - u)^2 (1 - v)
    is taken into the Jacobi weights (Stroud's conical product rule; Karniadakis and
    Sherwin, "Spectral/hp element methods", from memory). All points inside, weights positive.

    Returns
    -------
    points : (m^dim, dim), weights : (m^dim,) summing to the cell's volume (1/2 or 1/6)
    """
    pts, w = _collapsed(dim, int(degree))
    return pts.copy(), w.copy()
