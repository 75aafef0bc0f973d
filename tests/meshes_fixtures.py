"""Small meshes made with gmsh for the intake tests (headless, deterministic)."""

from __future__ import annotations

from contextlib import contextmanager

import numpy as np
import pytest

gmsh = pytest.importorskip("gmsh")


@contextmanager
def _session(name: str):
    gmsh.initialize(["", "-nopopup"])
    try:
        gmsh.option.setNumber("General.Terminal", 0)
        gmsh.option.setNumber("General.NumThreads", 1)
        gmsh.option.setNumber("Mesh.Binary", 0)
        gmsh.model.add(name)
        yield gmsh
    finally:
        gmsh.finalize()


def _write(path, order, version, binary=False):
    if order == 2:
        gmsh.model.mesh.setOrder(2)
    gmsh.option.setNumber("Mesh.MshFileVersion", version)
    gmsh.option.setNumber("Mesh.Binary", int(binary))
    gmsh.write(str(path))


def two_boxes(path, version=4.1, order=1, size=0.4, binary=False):
    """Unit cubes [0,1]^3 "left" and [1,2]x[0,1]^2 "right", sharing the face x=1.

    Physical surfaces: "xmin" (x = 0) and "xmax" (x = 2); the other
    boundary faces carry no tag.
    """
    with _session("two_boxes"):
        occ = gmsh.model.occ
        a, b = occ.addBox(0, 0, 0, 1, 1, 1), occ.addBox(1, 0, 0, 1, 1, 1)
        occ.fragment([(3, a)], [(3, b)])
        occ.synchronize()
        gmsh.model.addPhysicalGroup(3, [a], name="left")
        gmsh.model.addPhysicalGroup(3, [b], name="right")
        for name, x in (("xmin", 0.0), ("xmax", 2.0)):
            tags = gmsh.model.getEntitiesInBoundingBox(x - 1e-6, -1, -1, x + 1e-6, 2, 2, 2)
            gmsh.model.addPhysicalGroup(2, [t for _, t in tags], name=name)
        gmsh.option.setNumber("Mesh.MeshSizeMax", size)
        gmsh.model.mesh.generate(3)
        _write(path, order, version, binary)
    return path


def sphere(path, size, order=1, radius=1.0):
    """A ball of ``radius`` centred at the origin, one physical volume "ball"."""
    with _session("sphere"):
        tag = gmsh.model.occ.addSphere(0, 0, 0, radius)
        gmsh.model.occ.synchronize()
        gmsh.model.addPhysicalGroup(3, [tag], name="ball")
        gmsh.model.addPhysicalGroup(2, [t for _, t in gmsh.model.getEntities(2)], name="skin")
        gmsh.option.setNumber("Mesh.MeshSizeMin", size)
        gmsh.option.setNumber("Mesh.MeshSizeMax", size)
        gmsh.model.mesh.generate(3)
        _write(path, order, 4.1)
    return path


def circumradii(points: np.ndarray, tri: np.ndarray) -> np.ndarray:
    """Circumradius of each triangle, R = abc / (4 area) (elementary geometry)."""
    p = points[tri[:, :3]]
    a = np.linalg.norm(p[:, 1] - p[:, 2], axis=1)
    b = np.linalg.norm(p[:, 2] - p[:, 0], axis=1)
    c = np.linalg.norm(p[:, 0] - p[:, 1], axis=1)
    area = 0.5 * np.linalg.norm(np.cross(p[:, 1] - p[:, 0], p[:, 2] - p[:, 0]), axis=1)
    return a * b * c / (4.0 * area)
