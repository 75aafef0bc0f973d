"""Linear hexahedra, wedges and pyramids split into tetrahedra that fit together.

Every quadrilateral face is cut along the diagonal through its vertex of smallest
global node index (Dompierre, Labbe, Vallet and Camarero, "How to subdivide
pyramids, prisms and hexahedra into tetrahedra", 8th International Meshing
Roundtable, 1999, from memory). A face shared by two cells has the same four
node numbers seen from both, so both cut it the same way and the tetrahedra are
conforming across it, also between a hexahedron and a wedge or pyramid.

Each cell is split by coning from its smallest-index vertex to the faces that do
not hold it (those faces cut by the same rule; the faces that hold it are cut
through it, which is what the rule says there too). A hexahedron whose three
faces at the opposite vertex are all cut away from that vertex gives the five
tetrahedra of Dompierre et al.'s first case, otherwise six; a wedge gives three,
a pyramid two. Node order follows VTK/meshio: hexahedron bottom 0-3, top 4-7
above them; wedge triangles 0-2 and 3-5 joined by 0-3, 1-4, 2-5; pyramid base
0-3 and apex 4. Orientation is not kept (the reader reorients every tetrahedron).
"""

from __future__ import annotations

import numpy as np

#: Cell types split here, their number of vertices and their name in messages (plural).
SPLIT_TYPES = {"hexahedron": (8, "hexahedra"), "wedge": (6, "wedges"), "pyramid": (5, "pyramids")}

#: Quadratic cells of those shapes, the number of their corner nodes (listed first).
QUADRATIC_TYPES = {
    "hexahedron20": 8, "hexahedron24": 8, "hexahedron27": 8,
    "wedge15": 6, "wedge18": 6, "pyramid13": 5, "pyramid14": 5,
}

# Hexahedron vertex k sits at the corner with coordinate bits _HEX_BITS[k] (x, y, z).
_HEX_BITS = np.array([[0, 0, 0], [1, 0, 0], [1, 1, 0], [0, 1, 0], [0, 0, 1], [1, 0, 1], [1, 1, 1], [0, 1, 1]])
_BIT_CODE = _HEX_BITS @ np.array([1, 2, 4])
_VERTEX_OF_CODE = np.argsort(_BIT_CODE)
#: Row k: the vertex order of a hexahedron mirrored so that vertex k comes first.
_HEX_MIRROR = _VERTEX_OF_CODE[(_BIT_CODE[None, :] ^ _BIT_CODE[:, None])]

# With vertex 0 the smallest, the faces away from it, each as (quad, its two cuts as triangle pairs).
# The first cut passes through vertex 6 (the corner opposite 0), the second does not.
_HEX_FAR_FACES = (
    ((1, 2, 6, 5), ((1, 2, 6), (1, 6, 5)), ((1, 2, 5), (2, 6, 5))),
    ((3, 7, 6, 2), ((2, 3, 6), (3, 7, 6)), ((2, 3, 7), (2, 7, 6))),
    ((4, 5, 6, 7), ((4, 5, 6), (4, 6, 7)), ((4, 5, 7), (5, 6, 7))),
)
#: Dompierre et al.'s five tetrahedra when no far face is cut through vertex 6.
_HEX_FIVE = np.array([[0, 1, 2, 5], [0, 2, 3, 7], [0, 4, 5, 7], [2, 5, 6, 7], [0, 2, 5, 7]])

# Wedge: row k is the vertex order that brings vertex k first (turn the triangles, swap them).
_WEDGE_TURN = np.array([[0, 1, 2, 3, 4, 5], [1, 2, 0, 4, 5, 3], [2, 0, 1, 5, 3, 4],
                        [3, 5, 4, 0, 2, 1], [4, 3, 5, 1, 0, 2], [5, 4, 3, 2, 1, 0]])


def quad_diagonal_first(quads: np.ndarray) -> np.ndarray:
    """Rotate quadrilaterals (n, 4) so their smallest node comes first: the cut runs 0-2."""
    start = np.argmin(quads, axis=1)
    return np.take_along_axis(quads, (start[:, None] + np.arange(4)) % 4, axis=1)


def split_quads(quads: np.ndarray) -> np.ndarray:
    """Triangles (2 n, 3) of quadrilaterals (n, 4) cut by the smallest-index rule, in pairs."""
    q = quad_diagonal_first(np.asarray(quads, dtype=np.int64))
    return np.stack([q[:, [0, 1, 2]], q[:, [0, 2, 3]]], axis=1).reshape(-1, 3)


def _split_hexahedra(cells: np.ndarray):
    """(m, 4) tetrahedra and (m,) index of the hexahedron each came from."""
    first = np.argmin(cells, axis=1)
    c = np.take_along_axis(cells, _HEX_MIRROR[first], axis=1)
    through6 = []
    triangles = []
    for quad, cut6, cut_other in _HEX_FAR_FACES:
        face = c[:, quad]
        smallest = np.argmin(face, axis=1)
        hit = (smallest == 0) | (smallest == 2)  # the cut joins quad corners 0-2, the one through 6
        through6.append(hit)
        tri = np.where(hit[:, None, None], np.array(cut6)[None], np.array(cut_other)[None])
        triangles.append(tri)
    tri = np.concatenate(triangles, axis=1)  # (n, 6, 3) local vertex numbers
    six = np.concatenate([np.zeros((len(c), 6, 1), dtype=np.int64), tri], axis=2)
    five = ~np.any(through6, axis=0)
    tets = [np.take_along_axis(c[~five, None, :], six[~five], axis=2).reshape(-1, 4),
            c[five][:, _HEX_FIVE].reshape(-1, 4)]
    origin = [np.repeat(np.flatnonzero(~five), 6), np.repeat(np.flatnonzero(five), 5)]
    return np.concatenate(tets), np.concatenate(origin)


def _split_wedges(cells: np.ndarray):
    """Three tetrahedra per wedge: coned from its smallest vertex, which becomes vertex 0."""
    c = np.take_along_axis(cells, _WEDGE_TURN[np.argmin(cells, axis=1)], axis=1)
    quad = quad_diagonal_first(c[:, [1, 2, 5, 4]])
    zero = c[:, :1]
    tets = np.stack([np.hstack([zero, c[:, 3:6]]), np.hstack([zero, quad[:, :3]]),
                     np.hstack([zero, quad[:, [0, 2, 3]]])], axis=1)
    return tets.reshape(-1, 4), np.repeat(np.arange(len(c)), 3)


def _split_pyramids(cells: np.ndarray):
    """Two tetrahedra per pyramid: its base cut through the base's smallest vertex."""
    base = quad_diagonal_first(cells[:, :4])
    apex = cells[:, 4:5]
    tets = np.stack([np.hstack([base[:, :3], apex]), np.hstack([base[:, [0, 2, 3]], apex])], axis=1)
    return tets.reshape(-1, 4), np.repeat(np.arange(len(cells)), 2)


_SPLITTERS = {"hexahedron": _split_hexahedra, "wedge": _split_wedges, "pyramid": _split_pyramids}


def split_cells(kind: str, cells: np.ndarray):
    """Tetrahedra of linear ``kind`` cells.

    Parameters
    ----------
    kind : "hexahedron", "wedge" or "pyramid"
    cells : (n, 8 | 6 | 5) int, global node numbers, VTK order

    Returns
    -------
    tets : (m, 4) int, any orientation
    origin : (m,) int, the cell each tetrahedron came from
    """
    cells = np.asarray(cells, dtype=np.int64)
    if len(cells) == 0:
        return np.empty((0, 4), dtype=np.int64), np.empty(0, dtype=np.int64)
    return _SPLITTERS[kind](cells)


def corner_volume(kind: str, points: np.ndarray, cells: np.ndarray) -> float:
    """Volume [unit^3] of the straight cells on the corner nodes of ``kind`` cells (linear
    or quadratic), from their tetrahedra: for messages about cells heatsoak cannot use."""
    base = kind if kind in SPLIT_TYPES else next(k for k in SPLIT_TYPES if kind.startswith(k))
    corners = np.asarray(cells)[:, : SPLIT_TYPES[base][0]]
    tets, _ = split_cells(base, corners)
    return tet_volume(points, tets)


def tet_volume(points: np.ndarray, tets: np.ndarray) -> float:
    """Total unsigned volume [unit^3] of straight tetrahedra (n, >=4)."""
    p = points[np.asarray(tets)[:, :4]]
    a, b, c = p[:, 1] - p[:, 0], p[:, 2] - p[:, 0], p[:, 3] - p[:, 0]
    return float(np.abs(np.einsum("ij,ij->i", a, np.cross(b, c))).sum() / 6.0)
