"""The one mesh type used inside heatsoak.

A :class:`Mesh` is plain data: arrays in SI units, validated once when it is
built from a file (:mod:`heatsoak.core.mesh.read`) or generated
(:mod:`heatsoak.core.mesh.generate`); everything downstream trusts it.

Node order of cells and faces is the VTK/meshio order:

* tetra (4 nodes): vertices 0-3, positively oriented (det J > 0);
* tetra10: vertices 0-3, then mid-edge nodes of edges
  (0,1), (1,2), (0,2), (0,3), (1,3), (2,3);
* triangle (3) and triangle6: vertices 0-2 then edges (0,1), (1,2), (2,0).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

#: Local faces of a tetrahedron, outward oriented for a positively oriented
#: cell; row i is the face opposite vertex i. Columns 3-5 are the tetra10
#: mid-edge nodes of the face's edges, in triangle6 order.
TET_FACES = np.array(
    [
        [1, 2, 3, 5, 9, 8],
        [0, 3, 2, 7, 9, 6],
        [0, 1, 3, 4, 8, 7],
        [0, 2, 1, 6, 5, 4],
    ],
    dtype=np.int64,
)

#: Edges of a tetrahedron in tetra10 mid-node order (node 4 + row index).
TET_EDGES = np.array([[0, 1], [1, 2], [0, 2], [0, 3], [1, 3], [2, 3]], dtype=np.int64)


@dataclass(frozen=True, eq=False)
class Mesh:
    """A tetrahedral mesh with volume regions and boundary surface groups.

    Attributes
    ----------
    points : ndarray, shape (n_nodes, 3)
        Node coordinates in metres.
    cells : ndarray of int64, shape (n_cells, 4) or (n_cells, 10)
        Element connectivity, VTK order, positively oriented.
    cell_region : ndarray of int64, shape (n_cells,)
        Index of each cell's region in ``region_names``.
    region_names : tuple of str
        Names of the volume regions.
    faces : ndarray of int64, shape (n_faces, 3) or (n_faces, 6)
        Boundary faces, oriented so the right-hand normal points out of
        the body.
    face_group : ndarray of int64, shape (n_faces,)
        Index of each boundary face's surface group in ``group_names``.
    group_names : tuple of str
        Names of the surface groups; every boundary face is in exactly one.
    face_cell : ndarray of int64, shape (n_faces,)
        The cell each boundary face belongs to.
    interfaces : ndarray of int64, shape (n_interfaces, 3 or 6)
        Internal faces shared by cells of two different regions.
    warnings : tuple of str
        What intake noticed and repaired or ignored, for the user.
    source : str
        The file the mesh came from ("" when generated).
    unit : str
        The length unit of the file; ``points`` are already in metres.
    splits : tuple of str
        Cells of other shapes split into tetrahedra on reading
        ("648 hexahedra split into 3240 tetrahedra").
    """

    points: np.ndarray
    cells: np.ndarray
    cell_region: np.ndarray
    region_names: tuple
    faces: np.ndarray
    face_group: np.ndarray
    group_names: tuple
    face_cell: np.ndarray
    interfaces: np.ndarray = field(default_factory=lambda: np.empty((0, 3), dtype=np.int64))
    warnings: tuple = ()
    source: str = ""
    unit: str = "m"
    splits: tuple = ()

    @property
    def order(self) -> int:
        """Polynomial order of the elements: 1 (tetra) or 2 (tetra10)."""
        return 1 if self.cells.shape[1] == 4 else 2

    @property
    def n_nodes(self) -> int:
        return self.points.shape[0]

    @property
    def n_cells(self) -> int:
        return self.cells.shape[0]

    @property
    def n_faces(self) -> int:
        return self.faces.shape[0]

    def region_index(self, name: str) -> int:
        """Index of region ``name``; KeyError naming the valid regions."""
        try:
            return self.region_names.index(name)
        except ValueError:
            raise KeyError(f"no region {name!r}; regions are {list(self.region_names)}") from None

    def group_index(self, name: str) -> int:
        """Index of surface group ``name``; KeyError naming the valid groups."""
        try:
            return self.group_names.index(name)
        except ValueError:
            raise KeyError(f"no surface group {name!r}; groups are {list(self.group_names)}") from None

    def group_nodes(self, name: str) -> np.ndarray:
        """Sorted unique node indices of the faces of surface group ``name``."""
        g = self.group_index(name)
        return np.unique(self.faces[self.face_group == g])

    def vertex_nodes(self) -> np.ndarray:
        """Sorted indices of the nodes that are cell vertices (not mid-edge nodes)."""
        return np.unique(self.cells[:, :4])
