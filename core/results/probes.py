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
isoparametric property, common practice, no source). A point in the bulge of a
curved boundary cell, outside its straight-sided tetrahedron, is found the same
way from the nearest boundary face.

A mesh of a curved part is faceted: a point on the part's true surface may lie
a little outside the mesh. :func:`place` moves a point outside by at most
:data:`SNAP` of the nearest boundary face's longest edge onto that face and
says so; farther points are outside.
"""

from __future__ import annotations

import weakref

import numpy as np
from heatsoak.core.errors import ProbeError
from heatsoak.core.mesh.geometry import p1_gradients
from heatsoak.core.mesh.mesh import Mesh
from heatsoak.core.mesh.read import UNITS
from heatsoak.core.mesh.shape import tet_basis
from scipy.spatial import cKDTree

#: Barycentric tolerance for points on faces, edges and vertices.
TOL = 1e-8

#: Points outside the mesh by at most this fraction of the nearest boundary face's
#: longest edge are moved onto that face (the sagitta of a faceted circle is
#: under 0.14 of the facet for facets up to the radius, elementary geometry).
SNAP = 0.25


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


#: Search tree of each mesh's cell centroids, kept while the mesh lives: the UI checks probes on
#: every edit, and building the tree of a 1.1M-cell mesh takes seconds.
_TREES: weakref.WeakKeyDictionary = weakref.WeakKeyDictionary()


def _cell_tree(mesh: Mesh):
    """KD-tree of the cell centroids and the largest centroid-to-vertex distance [m] of ``mesh``."""
    found = _TREES.get(mesh)
    if found is None:
        corners = [mesh.points[mesh.cells[:, j]] for j in range(4)]
        centroids = (corners[0] + corners[1] + corners[2] + corners[3]) / 4.0
        radius = float(np.sqrt(max(np.einsum("ij,ij->i", c - centroids, c - centroids).max() for c in corners)))
        # an unbalanced tree builds about 3x faster on a million cells; a query of a few probes does not notice
        found = _TREES[mesh] = (cKDTree(centroids, balanced_tree=False, compact_nodes=False), radius)
    return found


def prepare_search(mesh: Mesh) -> None:
    """Build the probe search tree of ``mesh`` now (it is kept while the mesh lives): a caller
    with a core to spare builds it while doing other work."""
    _cell_tree(mesh)


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
    lo, hi = mesh.points.min(axis=0), mesh.points.max(axis=0)
    pad = 1e-6 * float(np.linalg.norm(hi - lo))
    in_box = np.all((pts >= lo - pad) & (pts <= hi + pad), axis=1)  # others are outside; far ones (1e300) overflow
    if not in_box.all():
        cells, lam = np.full(len(pts), -1, dtype=np.int64), np.zeros((len(pts), 4))
        cells[in_box], lam[in_box] = locate(mesh, pts[in_box], tol)
        return cells, lam
    k = len(pts)
    cells, lam = np.full(k, -1, dtype=np.int64), np.zeros((k, 4))
    if k == 0:
        return cells, lam
    tree, radius = _cell_tree(mesh)
    nc = min(8, mesh.n_cells)
    cand = tree.query(pts, nc)[1].reshape(k, nc)
    cl = _barycentric(mesh, cand.ravel(), np.repeat(pts, nc, axis=0)).reshape(k, nc, 4)
    best = cl.min(axis=2).argmax(axis=1)
    rows = np.arange(k)
    hit = cl[rows, best].min(axis=1) >= -tol
    cells[hit], lam[hit] = cand[rows, best][hit], cl[rows, best][hit]
    if hit.all():
        return cells, lam
    for i in np.flatnonzero(~hit):  # the few points the nearest candidates missed
        near = np.asarray(tree.query_ball_point(pts[i], radius * (1 + 1e-9)), dtype=np.int64)
        if near.size == 0:
            continue
        li = _barycentric(mesh, near, np.broadcast_to(pts[i], (near.size, 3)))
        j = li.min(axis=1).argmax()
        if li[j].min() >= -tol:
            cells[i], lam[i] = near[j], li[j]
    if mesh.order == 2 and (cells < 0).any():
        miss = np.flatnonzero(cells < 0)
        cells[miss], lam[miss] = _in_curved_cells(mesh, pts[miss], tol)
    return cells, lam


def _curved_reference(mesh: Mesh, pts: np.ndarray, cell: np.ndarray) -> np.ndarray:
    """Reference coordinates (k, 4), ``[1 - sum(xi), xi]``, of points (k, 3) under the isoparametric
    maps of quadratic cells (k,); the straight-sided ones where Newton does not settle."""
    lam = _barycentric(mesh, cell, pts)
    xi = isoparametric_xi(mesh.points[mesh.cells[cell]], pts, lam[:, 1:])
    return np.column_stack([1.0 - xi.sum(axis=1), xi])


def _in_curved_cells(mesh: Mesh, pts: np.ndarray, tol: float):
    """Cells (k,) and vertex barycentrics (k, 4) of points in the bulge of curved boundary cells
    (outside their straight-sided tetrahedra), -1 where the point is not in the cell of its
    nearest boundary face."""
    cell = mesh.face_cell[closest_boundary_points(mesh, pts)[1]]
    inside = _curved_reference(mesh, pts, cell).min(axis=1) >= -tol
    return np.where(inside, cell, -1), _barycentric(mesh, cell, pts)


def _segment_closest(p, a, b):
    """Closest points (n, 3) to point p (3,) on segments a-b (n, 3)."""
    ab = b - a
    s = np.clip(np.einsum("ij,ij->i", p - a, ab) / np.maximum(np.einsum("ij,ij->i", ab, ab), 1e-300), 0, 1)
    return a + s[:, None] * ab


def closest_boundary_points(mesh: Mesh, points):
    """The nearest point on the boundary of the mesh to each point (k, 3) [m].

    Faces are taken as flat triangles through their three vertices.

    Returns
    -------
    closest : (k, 3) the nearest boundary points [m]
    face : (k,) int, index of the boundary face each lies on
    distance : (k,) [m]
    """
    pts = np.asarray(points, dtype=float).reshape(-1, 3)
    a, b, c = (mesh.points[mesh.faces[:, i]] for i in range(3))
    n = np.cross(b - a, c - a)
    n2 = np.maximum(np.einsum("ij,ij->i", n, n), 1e-300)
    closest, face, dist = np.empty((len(pts), 3)), np.empty(len(pts), np.int64), np.empty(len(pts))
    for i, p in enumerate(pts):  # one vectorised pass over the faces per point
        h = np.einsum("ij,ij->i", p - a, n) / n2
        q = p - h[:, None] * n  # projection onto each face's plane
        w0 = np.einsum("ij,ij->i", np.cross(b - q, c - q), n) / n2
        w1 = np.einsum("ij,ij->i", np.cross(c - q, a - q), n) / n2
        inside = (w0 >= 0) & (w1 >= 0) & (1 - w0 - w1 >= 0)
        cand = np.stack([q, _segment_closest(p, a, b), _segment_closest(p, b, c), _segment_closest(p, c, a)])
        d = np.linalg.norm(cand - p, axis=2)
        d[0, ~inside] = np.inf
        j, f = np.unravel_index(np.argmin(d), d.shape)
        closest[i], face[i], dist[i] = cand[j, f], f, d[j, f]
    return closest, face, dist


def distance_to_boundary(mesh: Mesh, points) -> np.ndarray:
    """Distance [m] from each point (k, 3) to the nearest boundary face of the mesh, (k,).

    Faces are taken as flat triangles through their three vertices.
    """
    return closest_boundary_points(mesh, points)[2]


def place(mesh: Mesh, points, snap: float = SNAP):
    """Locate points, moving those just outside a faceted surface onto it.

    Parameters
    ----------
    mesh : Mesh
    points : (k, 3) array [m]
    snap : float
        A point outside by at most ``snap`` times the longest edge of its nearest
        boundary face is moved onto that face.

    Returns
    -------
    points : (k, 3) the points used [m] (moved ones on the boundary)
    cells : (k,) int, -1 for points outside (not moved)
    lam : (k, 4) barycentric coordinates in each cell's vertex tetrahedron
    distance : (k,) how far each point is outside the mesh [m]: 0 inside, the
        distance moved for moved points, the distance to the surface for points outside
    """
    pts = np.array(points, dtype=float).reshape(-1, 3)
    cells, lam = locate(mesh, pts)
    distance = np.zeros(len(pts))
    out = np.flatnonzero(cells < 0)
    if out.size == 0:
        return pts, cells, lam, distance
    q, face, distance[out] = closest_boundary_points(mesh, pts[out])
    if mesh.order == 2:  # the nearest point of the curved cell: its reference coordinates clipped
        ref = np.clip(_curved_reference(mesh, pts[out], mesh.face_cell[face]), 0.0, None)
        ref /= ref.sum(axis=1, keepdims=True)
        q = np.einsum("ka,kad->kd", tet_basis(2, ref[:, 1:])[0], mesh.points[mesh.cells[mesh.face_cell[face]]])
        distance[out] = np.linalg.norm(q - pts[out], axis=1)
    v = mesh.points[mesh.faces[face][:, :3]]
    edge = np.linalg.norm(v - np.roll(v, 1, axis=1), axis=2).max(axis=1)
    near = distance[out] <= snap * edge
    moved = out[near]
    pts[moved] = q[near]
    cells[moved] = mesh.face_cell[face[near]]
    lam[moved] = _barycentric(mesh, cells[moved], pts[moved])
    return pts, cells, lam, distance


def moved_note(distance: float, point, unit: str) -> str:
    """What is said of a probe :func:`place` moved ``distance`` [m] onto the surface at ``point`` (3,) [m],
    lengths written in ``unit``."""
    return (f"lies {distance / UNITS[unit]:.3g} {unit} outside the mesh surface; it is read at the nearest "
            f"surface point {_fmt_point(point, unit)}")


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

    Attributes
    ----------
    points : (k, 3) the points sampled [m]; a point just outside a faceted
        surface is moved onto it (:func:`place`)
    notes : list of str, one per moved point, saying how far it was moved

    Raises
    ------
    ProbeError
        Listing every point outside the mesh with its distance to the
        nearest boundary face; attribute ``outside`` is a list of
        (index, distance [m]).
    """

    def __init__(self, mesh: Mesh, points, names, unit: str = "m"):
        given = np.asarray(points, dtype=float).reshape(-1, 3)
        self.names = list(names)
        if len(self.names) != len(given):
            raise ValueError(f"{len(self.names)} names for {len(given)} probe points")
        self.points, self.cells, lam, dist = place(mesh, given)
        out = np.flatnonzero(self.cells < 0)
        s = UNITS[unit]
        if out.size:
            lines = [f"probe {self.names[i]!r} at {_fmt_point(given[i], unit)} is outside the mesh, "
                     f"{dist[i] / s:.4g} {unit} from its surface" for i in out]
            err = ProbeError("; ".join(lines))
            err.outside = list(zip(out.tolist(), dist[out].tolist()))
            raise err
        self.notes = [f"probe {self.names[i]!r} at {_fmt_point(given[i], unit)} {moved_note(dist[i], self.points[i], unit)}"
                      for i in np.flatnonzero(dist > 0)]
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
