"""Meshes and cases from outside the project, third round: files as gmsh and meshio write them.

Each test is an input that once was misread silently or refused wrongly; the
expected answers are facts of geometry or of the heat equation named beside them.
"""

from __future__ import annotations

import meshio
import numpy as np
import pytest
from heatsoak.core.cli import main
from heatsoak.core.meshread import read_mesh

gmsh = pytest.importorskip("gmsh")


def _cli(capsys, *argv):
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    assert "Traceback" not in out + err
    return code, out, err


def _gmsh_box(path, version=2.2, size=0.5, physical=False, save_all=False):
    """A unit cube meshed by gmsh; optionally one physical volume "body" and surface "bottom" (z = 0)."""
    gmsh.initialize(["", "-nopopup"])
    try:
        gmsh.option.setNumber("General.Terminal", 0)
        gmsh.option.setNumber("General.NumThreads", 1)
        gmsh.model.add("box")
        box = gmsh.model.occ.addBox(0, 0, 0, 1, 1, 1)
        gmsh.model.occ.synchronize()
        if physical:
            gmsh.model.addPhysicalGroup(3, [box], name="body")
            bottom = gmsh.model.getEntitiesInBoundingBox(-1, -1, -1e-6, 2, 2, 1e-6, dim=2)
            gmsh.model.addPhysicalGroup(2, [t for _, t in bottom], name="bottom")
        gmsh.option.setNumber("Mesh.MeshSizeMax", size)
        gmsh.option.setNumber("Mesh.SaveAll", int(save_all))
        gmsh.model.mesh.generate(3)
        gmsh.option.setNumber("Mesh.MshFileVersion", version)
        gmsh.option.setNumber("Mesh.Binary", 0)
        gmsh.write(str(path))
    finally:
        gmsh.finalize()
    return path


def _group_areas(mesh):
    p = mesh.points[mesh.faces[:, :3]]
    area = 0.5 * np.linalg.norm(np.cross(p[:, 1] - p[:, 0], p[:, 2] - p[:, 0]), axis=1)
    return dict(zip(mesh.group_names, np.bincount(mesh.face_group, weights=area)))


# ----------------------------------------------------------------------------- gmsh physical tag 0


@pytest.mark.parametrize("version", [2.2, 4.1])
def test_a_gmsh_file_without_physical_groups_keeps_the_six_faces_of_a_cube_apart(tmp_path, version):
    # gmsh writes physical tag 0 on every element of a msh 2.2 file without physical groups;
    # 0 is "no group", so the cube's six faces (area 1 each, geometry) must stay six groups
    mesh = read_mesh(_gmsh_box(tmp_path / f"box{version}.msh", version))
    areas = _group_areas(mesh)
    assert len(areas) == 6
    np.testing.assert_allclose(sorted(areas.values()), np.ones(6), rtol=1e-12)
    assert len(mesh.region_names) == 1 and mesh.region_names[0] != "region-0"


def test_save_all_in_msh22_says_the_physical_names_were_lost(tmp_path):
    mesh = read_mesh(_gmsh_box(tmp_path / "box.msh", 2.2, physical=True, save_all=True))
    assert len(mesh.group_names) == 6  # split by gmsh's surfaces, not one lump
    assert any("names physical groups (body, bottom) but no element carries them" in w for w in mesh.warnings)


def test_cells_with_physical_tag_0_beside_tagged_ones_are_untagged(tmp_path):
    mesh = read_mesh(_gmsh_box(tmp_path / "box.msh", 4.1, physical=True))
    tri = mesh.faces[:, :3]
    bottom = mesh.face_group == mesh.group_names.index("bottom")
    # the same cube written with tag 0 on every triangle but the bottom's
    tags = np.where(bottom, 5, 0)
    raw = meshio.Mesh(
        mesh.points,
        [("triangle", tri), ("tetra", mesh.cells)],
        cell_data={"gmsh:physical": [tags, np.full(mesh.n_cells, 7)],
                   "gmsh:geometrical": [np.ones(len(tri), int), np.ones(mesh.n_cells, int)]},
        field_data={"bottom": np.array([5, 2]), "body": np.array([7, 3])},
    )
    path = tmp_path / "mixed.msh"
    meshio.write(path, raw, file_format="gmsh22", binary=False)
    again = read_mesh(path)
    assert set(again.group_names) == {"bottom", "untagged"} and again.region_names == ("body",)
    areas = _group_areas(again)
    np.testing.assert_allclose([areas["bottom"], areas["untagged"]], [1.0, 5.0], rtol=1e-12)
