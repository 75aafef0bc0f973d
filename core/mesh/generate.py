"""Structured tetrahedral meshes of boxes, for benchmarks, tests and demos."""

from __future__ import annotations

from itertools import permutations

import numpy as np
from heatsoak.core.mesh.mesh import Mesh
from heatsoak.core.mesh.read import build_mesh
from heatsoak.core.mesh.topology import boundary_faces, elevate, reorient, signed_volumes

#: Names of the six sides of a box, in the order (axis, low/high).
BOX_SIDES = ("xmin", "xmax", "ymin", "ymax", "zmin", "zmax")


def _kuhn_cells(nx: int, ny: int, nz: int) -> np.ndarray:
    """Six tetrahedra per grid cube, all sharing the cube's main diagonal."""
    i, j, k = np.meshgrid(np.arange(nx), np.arange(ny), np.arange(nz), indexing="ij")
    base = np.stack([i.ravel(), j.ravel(), k.ravel()], axis=1)
    step = np.eye(3, dtype=np.int64)
    tets = []
    for perm in permutations(range(3)):
        c0 = base
        c1 = c0 + step[perm[0]]
        c2 = c1 + step[perm[1]]
        c3 = c0 + 1
        tets.append(np.stack([c0, c1, c2, c3], axis=1))
    ijk = np.concatenate(tets, axis=0)  # (6 * ncubes, 4, 3)
    return (ijk[..., 0] * (ny + 1) + ijk[..., 1]) * (nz + 1) + ijk[..., 2]


def box_mesh(
    shape=(4, 4, 4),
    size=(1.0, 1.0, 1.0),
    origin=(0.0, 0.0, 0.0),
    order: int = 1,
    regions=None,
    grading=None,
) -> Mesh:
    """A box ``origin + [0, size]`` cut into ``6 * nx * ny * nz`` tetrahedra.

    Parameters
    ----------
    shape : (3,) ints
        Number of grid cubes along x, y, z.
    size, origin : (3,) floats
        Box edge lengths and lower corner [m].
    order : 1 or 2
        Linear (tetra) or straight-sided quadratic (tetra10) elements.
    regions : callable, optional
        ``regions(centroids) -> (labels, names)`` with ``centroids`` of shape
        (n_cells, 3) and ``labels`` (n_cells,) indices into ``names``. One
        region named "box" when omitted.
    grading : (3,) callables, optional
        Maps of [0, 1] onto itself applied to the grid along each axis, to
        refine towards a side.

    Returns
    -------
    Mesh
        Surface groups are the six sides, named as in :data:`BOX_SIDES`.
    """
    nx, ny, nz = (int(n) for n in shape)
    axes = []
    for a, n in enumerate((nx, ny, nz)):
        s = np.linspace(0.0, 1.0, n + 1)
        if grading is not None and grading[a] is not None:
            s = grading[a](s)
        axes.append(origin[a] + size[a] * s)
    X, Y, Z = np.meshgrid(*axes, indexing="ij")
    points = np.stack([X.ravel(), Y.ravel(), Z.ravel()], axis=1)
    cells = _kuhn_cells(nx, ny, nz).astype(np.int64)
    cells = reorient(cells, signed_volumes(points, cells) < 0)
    if order == 2:
        points, cells = elevate(points, cells)
    elif order != 1:
        raise ValueError(f"order must be 1 or 2, got {order!r}")

    centroids = points[cells[:, :4]].mean(axis=1)
    if regions is None:
        labels, names = np.zeros(len(cells), dtype=np.int64), ("box",)
    else:
        labels, names = regions(centroids)
        labels, names = np.asarray(labels, dtype=np.int64), tuple(names)

    faces, _ = boundary_faces(cells)
    fc = points[faces[:, :3]].mean(axis=1)
    lo = np.asarray(origin, float)
    hi = lo + np.asarray(size, float)
    tol = 1e-9 * max(size)
    tagged = {}
    for a in range(3):
        tagged[BOX_SIDES[2 * a]] = faces[np.abs(fc[:, a] - lo[a]) < tol]
        tagged[BOX_SIDES[2 * a + 1]] = faces[np.abs(fc[:, a] - hi[a]) < tol]
    return build_mesh(points, cells, labels, names, tagged_faces=tagged)
