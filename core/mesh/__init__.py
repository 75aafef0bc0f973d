"""Meshes: the one mesh type, reading any file meshio reads, tags, topology, surfaces,
cell geometry (reference shape functions, Jacobians, volumes, areas), generated boxes and
the facts ``heatsoak inspect`` prints.

May import: :mod:`heatsoak.core.errors`, numpy, scipy, meshio. Nothing else of heatsoak.
"""

from heatsoak.core.mesh.mesh import TET_EDGES, TET_FACES, Mesh

__all__ = ["Mesh", "TET_EDGES", "TET_FACES"]
