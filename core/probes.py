"""Probes: the temperature at given points, interpolated with the element's shape functions.

Each point is located in the cell that contains it: a k-d tree over cell
centroids proposes candidate cells, and a candidate contains the point when
all four barycentric coordinates of its vertex tetrahedron are >= -tol
(points on a shared face or edge are accepted by either cell).
Points the nearest candidates miss are searched among all cells whose
centroid lies within the largest centroid-to-vertex distance of the mesh,
which must include the containing cell.

Quadratic (tetra10) cells are located as straight-sided (by their four
vertices); the reference coordinates of the point are then refined by Newton
iterations on the cell's isoparametric map, so that curved cells interpolate
at the right place (a linear field is reproduced exactly on any cell, the
isoparametric property, common practice, no source).
"""

from __future__ import annotations

import numpy as np
from scipy.spatial import cKDTree

from .elements import tet_basis
from .errors import ProbeError
from .geometry import p1_gradients
from .mesh import Mesh
from .meshread import UNITS

#: Barycentric tolerance for points on faces, edges and vertices.
TOL = 1e-8


def _barycentric(mesh: Mesh, cells: np.ndarray, pts: np.ndarray) -> np.ndarray:
    """Barycentric coordinates (m, 4) of ``pts`` (m, 3) in the vertex tetrahedra of ``cells`` (m,)."""
    conn = mesh.cells[cells, :4]
    g, _ = p1_gradients(mesh.points, conn)
    d = pts - mesh.points[conn[:, 0]]
    lam = np.einsum("mij,mj->mi", g, d)
    lam[:, 0] += 1.0
    return lam


def isoparametric_xi(nodes: np.ndarray, pts: np.ndarray, xi: np.ndarray, iterations: int = 8) -> np.ndarray:
    """Reference coordinates of points in quadratic cells, by Newton iterations on the cell map.

    Parameters
    ----------
    nodes : (k, 10, 3) node coordinates of each point's cell [m]
    pts : (k, 3) the points [m]
    xi : (k, 3) starting reference coordinates (those of the straight-sided cell)

    Returns
    -------
    (k, 3) reference coordinates with x(xi) = pts to round-off where the map is
    invertible there; a point whose iteration does not settle keeps its start.
    """
    start = xi = np.array(xi, dtype=float)
    size = np.linalg.norm(nodes[:, 1] - nodes[:, 0], axis=1)[:, None]
    for _ in range(iterations):
        N, dN = tet_basis(2, xi)
        residual = np.einsum("ka,kad->kd", N, nodes) - pts
        J = np.einsum("kad,kae->kde", nodes, dN)  # dx_d / dxi_e
        try:
            xi = xi - np.linalg.solve(J, residual[..., None])[..., 0]
        except np.linalg.LinAlgError:  # a degenerate cell map: keep the straight-sided coordinates
            return start
    N, _ = tet_basis(2, xi)
    miss = np.linalg.norm(np.einsum("ka,kad->kd", N, nodes) - pts, axis=1)[:, None]
    settled = np.isfinite(xi).all(axis=1, keepdims=True) & (miss <= 1e-9 * size)
    return np.where(settled, xi, start)


def locate(mesh: Mesh, points, tol: float = TOL):
    """Find the cell containing each point.

    Parameters
    ----------
    mesh : Mesh
    points : (k, 3) array [m]

    Returns
    -------
    cells : (k,) int, -1 where the point is outside the mesh
    lam : (k, 4) barycentric coordinates in that cell's vertex tetrahedron
    """
    pts = np.asarray(points, dtype=float).reshape(-1, 3)
    k = len(pts)
    cells, lam = np.full(k, -1, dtype=np.int64), np.zeros((k, 4))
    if k == 0:
        return cells, lam
    centroids = mesh.points[mesh.cells[:, :4]].mean(axis=1)
    tree = cKDTree(centroids)
    nc = min(8, mesh.n_cells)
    cand = tree.query(pts, nc)[1].reshape(k, nc)
    cl = _barycentric(mesh, cand.ravel(), np.repeat(pts, nc, axis=0)).reshape(k, nc, 4)
    best = cl.min(axis=2).argmax(axis=1)
    rows = np.arange(k)
    hit = cl[rows, best].min(axis=1) >= -tol
    cells[hit], lam[hit] = cand[rows, best][hit], cl[rows, best][hit]
    if hit.all():
        return cells, lam
    radius = np.linalg.norm(mesh.points[mesh.cells[:, :4]] - centroids[:, None], axis=2).max()
    for i in np.flatnonzero(~hit):  # the few points the nearest candidates missed
        near = np.asarray(tree.query_ball_point(pts[i], radius * (1 + 1e-9)), dtype=np.int64)
        if near.size == 0:
            continue
        li = _barycentric(mesh, near, np.broadcast_to(pts[i], (near.size, 3)))
        j = li.min(axis=1).argmax()
        if li[j].min() >= -tol:
            cells[i], lam[i] = near[j], li[j]
    return cells, lam


def _segment_distance(p, a, b):
    """Distance from point p (3,) to segments a-b (n, 3)."""
    ab = b - a
    s = np.clip(np.einsum("ij,ij->i", p - a, ab) / np.maximum(np.einsum("ij,ij->i", ab, ab), 1e-300), 0, 1)
    return np.linalg.norm(a + s[:, None] * ab - p, axis=1)


def distance_to_boundary(mesh: Mesh, points) -> np.ndarray:
    """Distance [m] from each point (k, 3) to the nearest boundary face of the mesh, (k,).

    Faces are taken as flat triangles through their three vertices.
    """
    pts = np.asarray(points, dtype=float).reshape(-1, 3)
    a, b, c = (mesh.points[mesh.faces[:, i]] for i in range(3))
    n = np.cross(b - a, c - a)
    n2 = np.maximum(np.einsum("ij,ij->i", n, n), 1e-300)
    out = np.empty(len(pts))
    for i, p in enumerate(pts):  # one vectorised pass over the faces per point
        h = np.einsum("ij,ij->i", p - a, n) / n2
        q = p - h[:, None] * n  # projection onto each face's plane
        w0 = np.einsum("ij,ij->i", np.cross(b - q, c - q), n) / n2
        w1 = np.einsum("ij,ij->i", np.cross(c - q, a - q), n) / n2
        inside = (w0 >= 0) & (w1 >= 0) & (1 - w0 - w1 >= 0)
        plane = np.abs(h) * np.sqrt(n2)
        edge = np.minimum.reduce([_segment_distance(p, a, b), _segment_distance(p, b, c), _segment_distance(p, c, a)])
        out[i] = np.where(inside, plane, edge).min()
    return out


def _fmt_point(p, unit: str) -> str:
    s = UNITS[unit]
    return "(" + ", ".join(f"{x / s:g}" for x in p) + f") {unit}"


class ProbeSet:
    """Named points where the temperature field is sampled.

    Parameters
    ----------
    mesh : Mesh
    points : (k, 3) array
        Probe positions [m].
    names : sequence of k str
    unit : str
        Length unit the user gave the points in, for messages only.

    Raises
    ------
    ProbeError
        Listing every point outside the mesh with its distance to the
        nearest boundary face; attribute ``outside`` is a list of
        (index, distance [m]).
    """

    def __init__(self, mesh: Mesh, points, names, unit: str = "m"):
        self.points = np.asarray(points, dtype=float).reshape(-1, 3)
        self.names = list(names)
        if len(self.names) != len(self.points):
            raise ValueError(f"{len(self.names)} names for {len(self.points)} probe points")
        self.cells, lam = locate(mesh, self.points)
        out = np.flatnonzero(self.cells < 0)
        if out.size:
            dist = distance_to_boundary(mesh, self.points[out])
            s = UNITS[unit]
            lines = [f"probe {self.names[i]!r} at {_fmt_point(self.points[i], unit)} is outside the mesh, "
                     f"{d / s:.4g} {unit} from its surface" for i, d in zip(out, dist)]
            err = ProbeError("; ".join(lines))
            err.outside = list(zip(out.tolist(), dist.tolist()))
            raise err
        self.nodes = mesh.cells[self.cells] if len(self.points) else np.zeros((0, mesh.cells.shape[1]), np.int64)
        xi = lam[:, 1:]
        if mesh.order == 2 and len(self.points):
            xi = isoparametric_xi(mesh.points[self.nodes], self.points, xi)
        self.weights = tet_basis(mesh.order, xi)[0] if len(self.points) else np.zeros(self.nodes.shape)

    def __len__(self) -> int:
        return len(self.names)

    def values(self, T: np.ndarray) -> np.ndarray:
        """Interpolated temperatures (k,) from nodal temperatures ``T`` (n_nodes,)."""
        return np.einsum("kb,kb->k", self.weights, np.asarray(T)[self.nodes])
