"""Hexahedron, wedge and pyramid meshes of known volume for the intake tests, node numbers shuffled
so that the diagonal each face is cut along differs from cell to cell."""

from __future__ import annotations

import numpy as np

#: VTK hexahedron corners as (i, j, k) offsets.
HEX_CORNERS = np.array([[0, 0, 0], [1, 0, 0], [1, 1, 0], [0, 1, 0], [0, 0, 1], [1, 0, 1], [1, 1, 1], [0, 1, 1]])
#: Quadrilateral faces of a VTK hexahedron.
HEX_FACES = np.array([[0, 3, 2, 1], [4, 5, 6, 7], [0, 1, 5, 4], [1, 2, 6, 5], [2, 3, 7, 6], [3, 0, 4, 7]])


def hex_grid(n, size=(1.0, 1.0, 1.0), seed=0):
    """Box [0, size] cut into n^3 hexahedra, node numbers shuffled by ``seed`` (None: lexicographic).

    Returns points (N, 3), hexahedra (n^3, 8) and the (i, j, k) index of each hexahedron.
    """
    ticks = [np.linspace(0.0, s, n + 1) for s in size]
    ijk = np.stack(np.meshgrid(*[np.arange(n + 1)] * 3, indexing="ij"), -1).reshape(-1, 3)
    points = np.stack([ticks[a][ijk[:, a]] for a in range(3)], axis=1)
    cell = np.stack(np.meshgrid(*[np.arange(n)] * 3, indexing="ij"), -1).reshape(-1, 3)
    corner = cell[:, None, :] + HEX_CORNERS[None]
    hexes = (corner[..., 0] * (n + 1) + corner[..., 1]) * (n + 1) + corner[..., 2]
    if seed is not None:
        perm = np.random.default_rng(seed).permutation(len(points))
        new = np.empty_like(perm)
        new[perm] = np.arange(len(perm))
        points, hexes = points[perm], new[hexes]
    return points, hexes, cell


def mixed_blocks(n=3, seed=1):
    """A unit cube of n^3 cells: hexahedra, each one of the column i == 0 cut into two wedges, each
    one of the column i == n - 1 into six pyramids around a node at its centre.

    Returns points and a list of (cell type, cells) blocks.
    """
    points, hexes, cell = hex_grid(n, seed=seed)
    wedge_col, pyr_col = cell[:, 0] == 0, cell[:, 0] == n - 1
    h = hexes[wedge_col]
    wedges = np.vstack([h[:, [0, 1, 2, 4, 5, 6]], h[:, [0, 2, 3, 4, 6, 7]]])
    h = hexes[pyr_col]
    centre = len(points) + np.arange(len(h))
    points = np.vstack([points, points[h].mean(axis=1)])
    pyramids = np.vstack([np.hstack([h[:, f], centre[:, None]]) for f in HEX_FACES])
    return points, [("hexahedron", hexes[~wedge_col & ~pyr_col]), ("wedge", wedges), ("pyramid", pyramids)]
