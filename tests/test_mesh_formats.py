"""A corpus the tests build: gmsh-written MSH 4.0/4.1/2.2 (ASCII and binary), meshio-written
MED/VTU/XDMF, hand-written .inp decks. Every accepted file keeps the whole body's volume (the
two unit cubes of :func:`meshes_fixtures.two_boxes`: 1 + 1 m^3, geometry) and its names."""

from __future__ import annotations

import sys
from pathlib import Path

import meshio
import numpy as np
import pytest
from heatsoak.core.errors import MeshError
from heatsoak.core.mesh.geometry import cell_volumes, face_areas
from heatsoak.core.mesh.read import read_mesh
from meshes_fixtures import two_boxes

NAMES = ("v4.0a", "v4.1a", "v4.1b", "v2.2a", "v2.2b")
SIDES = ("untagged-1", "untagged-2", "untagged-3", "untagged-4")


@pytest.fixture(scope="module")
def msh_dir(tmp_path_factory):
    d = tmp_path_factory.mktemp("msh")
    for name in NAMES:  # gmsh writes MSH 4.0 in ASCII only
        two_boxes(d / f"{name}.msh", float(name[1:4]), size=0.5, binary=name.endswith("b"))
    return d


def _volumes(mesh):
    return dict(zip(mesh.region_names, np.bincount(mesh.cell_region, weights=cell_volumes(mesh.points, mesh.cells))))


def _areas(mesh):
    return dict(zip(mesh.group_names, np.bincount(mesh.face_group, weights=face_areas(mesh.points, mesh.faces))))


@pytest.mark.parametrize("name", NAMES)
def test_every_msh_version_gmsh_writes_is_read_whole_with_its_names(msh_dir, name):
    mesh = read_mesh(msh_dir / f"{name}.msh")
    vol, area = _volumes(mesh), _areas(mesh)
    assert mesh.region_names == ("left", "right") and mesh.group_names == ("xmin", "xmax", *SIDES)
    np.testing.assert_allclose([vol["left"], vol["right"]], [1.0, 1.0], rtol=1e-12)
    np.testing.assert_allclose([area[n] for n in mesh.group_names], [1, 1, 2, 2, 2, 2], rtol=1e-12)
    assert mesh.n_cells == read_mesh(msh_dir / "v4.1a.msh").n_cells
    said = any("gmsh's own reader" in w for w in mesh.warnings)
    assert said == name.startswith("v4.0")  # meshio reads the others itself


def test_without_gmsh_an_msh_40_file_says_how_to_install_it(msh_dir, monkeypatch):
    monkeypatch.setitem(sys.modules, "gmsh", None)  # import gmsh now fails
    with pytest.raises(MeshError, match=r"v4.0a.msh.*pip install gmsh"):
        read_mesh(msh_dir / "v4.0a.msh")


def test_gmsh_reading_leaves_an_open_gmsh_session_as_it_was(msh_dir):
    gmsh = pytest.importorskip("gmsh")
    gmsh.initialize(["", "-nopopup"], interruptible=False)
    try:
        gmsh.model.add("callers-model")
        read_mesh(msh_dir / "v4.0a.msh")
        assert gmsh.isInitialized() and gmsh.model.getCurrent() == "callers-model"
    finally:
        gmsh.finalize()


def _reference(msh_dir):
    return read_mesh(msh_dir / "v4.1a.msh")


def test_med_group_names_are_read_and_family_0_is_no_group(msh_dir, tmp_path):
    ref = _reference(msh_dir)
    # MED keeps groups as families: cells carry a family number, each family lists its groups
    cell_fam = np.where(ref.cell_region == 0, -3, -4)
    face_fam = np.select([ref.face_group == 0, ref.face_group == 1], [-5, -6], 0)  # the sides: family 0
    out = meshio.Mesh(ref.points, [("tetra", ref.cells), ("triangle", ref.faces)],
                      cell_data={"cell_tags": [cell_fam, face_fam]})
    out.cell_tags = {-3: ["left"], -4: ["right"], -5: ["xmin"], -6: ["xmax"]}
    meshio.write(tmp_path / "m.med", out)
    mesh = read_mesh(tmp_path / "m.med")
    assert mesh.region_names == ("left", "right") and mesh.group_names == ("xmin", "xmax", *SIDES)
    np.testing.assert_allclose(list(_volumes(mesh).values()), [1.0, 1.0], rtol=1e-12)


def test_a_physical_array_is_preferred_to_a_geometrical_one_whatever_the_alphabet(msh_dir, tmp_path):
    ref = _reference(msh_dir)
    centre = ref.points[ref.faces[:, :3]].mean(axis=1)
    cad_face = 10 + np.argmax(np.abs(centre - 0.5 * np.array([2, 1, 1])), axis=1)  # several per named side
    data = {"physical": [ref.cell_region + 1, ref.face_group + 1],
            "geometrical": [np.arange(ref.n_cells) % 7, cad_face]}
    meshio.write(tmp_path / "m.vtu", meshio.Mesh(ref.points, [("tetra", ref.cells), ("triangle", ref.faces)],
                                                 cell_data=data))
    mesh = read_mesh(tmp_path / "m.vtu")
    assert mesh.region_names == ("region-1", "region-2")
    assert len(mesh.group_names) == 6 and np.array_equal(np.bincount(mesh.face_group), np.bincount(ref.face_group))


def test_a_negative_gmsh_physical_tag_is_the_same_group(msh_dir, tmp_path):
    ref = _reference(msh_dir)
    xmin = ref.face_group == 0
    tag = np.where(xmin, np.where(np.arange(ref.n_faces) % 2 == 0, 5, -5), 6)  # half of xmin written -5
    raw = meshio.Mesh(ref.points, [("tetra", ref.cells), ("triangle", ref.faces)],
                      cell_data={"gmsh:physical": [ref.cell_region + 1, tag],
                                 "gmsh:geometrical": [np.ones(ref.n_cells, int), np.ones(ref.n_faces, int)]},
                      field_data={"left": np.array([1, 3]), "right": np.array([2, 3]),
                                  "hot": np.array([5, 2]), "rest": np.array([6, 2])})
    meshio.write(tmp_path / "neg.msh", raw, file_format="gmsh22", binary=False)
    mesh = read_mesh(tmp_path / "neg.msh")
    assert mesh.group_names == ("hot", "rest")
    np.testing.assert_allclose(_areas(mesh)["hot"], 1.0, rtol=1e-12)


def test_xdmf_written_by_meshio_keeps_the_volume(msh_dir, tmp_path):
    ref = _reference(msh_dir)
    meshio.write(tmp_path / "m.xdmf", meshio.Mesh(ref.points, [("tetra", ref.cells)],
                                                  cell_data={"region": [ref.cell_region]}))
    mesh = read_mesh(tmp_path / "m.xdmf")
    np.testing.assert_allclose(sorted(_volumes(mesh).values()), [1.0, 1.0], rtol=1e-12)


def test_a_file_that_cannot_be_opened_says_permission_denied(msh_dir, monkeypatch):
    target = msh_dir / "v4.1a.msh"
    real_open = Path.open

    def refuse(self, *args, **kwargs):
        if self == target:
            raise PermissionError(13, "Permission denied", str(self))
        return real_open(self, *args, **kwargs)

    monkeypatch.setattr(Path, "open", refuse)
    with pytest.raises(MeshError, match="v4.1a.msh: permission denied"):
        read_mesh(target)


def test_a_negative_node_index_is_named_as_such(tmp_path):
    ref = meshio.Mesh(np.eye(4)[:, :3], [("tetra", np.array([[0, 1, 2, -1]]))])
    meshio.write(tmp_path / "neg.vtu", ref)
    with pytest.raises(MeshError, match="neg.vtu: element 0 refers to node index -1: node indices cannot be negative"):
        read_mesh(tmp_path / "neg.vtu")


def test_a_file_of_another_format_is_said_to_be_unrecognised(tmp_path):
    (tmp_path / "a.vtk").write_text("$MeshFormat\n4.1 0 8\n$EndMeshFormat\n")
    with pytest.raises(MeshError, match="a.vtk: format not recognised.*begins '\\$MeshFormat"):
        read_mesh(tmp_path / "a.vtk")


def test_exodus_element_blocks_are_the_regions_with_their_names(tmp_path):
    netCDF4 = pytest.importorskip("netCDF4")
    ref = read_mesh(two_boxes(tmp_path / "two.msh", 4.1, size=0.5))
    blocks = [("tetra", ref.cells[ref.cell_region == k]) for k in (0, 1)]
    meshio.write(tmp_path / "two.e", meshio.Mesh(ref.points, blocks))
    with netCDF4.Dataset(tmp_path / "two.e", "a") as nc:  # meshio writes no block names: add them
        nc.createDimension("len_name", 33)
        names = nc.createVariable("eb_names", "S1", ("num_el_blk", "len_name"))
        names[:] = netCDF4.stringtochar(np.array(["copper", ""], dtype="S33"))
    mesh = read_mesh(tmp_path / "two.e")
    assert mesh.region_names[0] == "copper" and mesh.region_names[1].startswith("block-")
    np.testing.assert_allclose(list(_volumes(mesh).values()), [1.0, 1.0], rtol=1e-12)


def test_a_reader_needing_a_missing_package_names_it(tmp_path, monkeypatch):
    box = meshio.Mesh(np.eye(4)[:, :3], [("tetra", np.array([[0, 1, 2, 3]]))])
    pytest.importorskip("netCDF4")
    meshio.write(tmp_path / "one.exo", box)
    monkeypatch.setitem(sys.modules, "netCDF4", None)
    with pytest.raises(MeshError, match=r"one.exo.*needs the Python package 'netCDF4'.*pip install netCDF4"):
        read_mesh(tmp_path / "one.exo")


def test_a_partition_array_comes_after_a_zone_array_though_it_sorts_first(msh_dir, tmp_path):
    ref = _reference(msh_dir)
    data = {"zone": [ref.cell_region + 3], "partition": [np.arange(ref.n_cells) % 2]}
    meshio.write(tmp_path / "p.vtu", meshio.Mesh(ref.points, [("tetra", ref.cells)], cell_data=data))
    assert read_mesh(tmp_path / "p.vtu").region_names == ("region-3", "region-4")


@pytest.mark.parametrize(("version", "node"), [(2.2, "0"), (2.2, "-3"), (4.1, "0"), (4.1, "-7")])
def test_an_msh_element_on_node_zero_or_below_is_named_not_called_zero_volume(tmp_path, version, node):
    path = two_boxes(tmp_path / "box.msh", version, size=0.8)
    lines = path.read_text().splitlines()
    last = lines.index("$EndElements") - 1  # the last element: a tetrahedron (gmsh writes volumes last)
    parts = lines[last].split()
    parts[-2] = node
    lines[last] = " ".join(parts)
    path.write_text("\n".join(lines) + "\n")
    with pytest.raises(MeshError, match=f"box.msh: element {parts[0]} refers to node {node}: node numbers start at 1"):
        read_mesh(path)


def test_an_msh_version_1_file_is_read_by_gmsh_itself(tmp_path):
    # version 1 has physical numbers but no names: the regions are numbered
    mesh = read_mesh(two_boxes(tmp_path / "v1.msh", 1.0, size=0.5))
    assert len(mesh.region_names) == 2 and any("gmsh's own reader" in w for w in mesh.warnings)
    np.testing.assert_allclose(sorted(_volumes(mesh).values()), [1.0, 1.0], rtol=1e-12)


#: Tetrahedron sides as 1-based node lists, as the Exodus element-type documentation (SEACAS) gives them.
EXODUS_TET_SIDES = {1: (1, 2, 4), 2: (2, 3, 4), 3: (1, 4, 3), 4: (1, 3, 2)}


def test_exodus_side_sets_name_the_boundary_faces_they_list(tmp_path):
    netCDF4 = pytest.importorskip("netCDF4")
    ref = read_mesh(two_boxes(tmp_path / "two.msh", 4.1, size=0.5))
    order = np.argsort(ref.cell_region, kind="stable")  # blocks: left cells, then right cells
    cells = ref.cells[order]
    blocks = [("tetra", cells[ref.cell_region[order] == k]) for k in (0, 1)]
    meshio.write(tmp_path / "two.e", meshio.Mesh(ref.points, blocks))
    at_end = np.flatnonzero(ref.points[ref.faces[:, :3], 0].min(axis=1) > 2 - 1e-9)  # the side x = 2
    element = np.argsort(order)[ref.face_cell[at_end]]  # 0-based, numbered across the blocks
    face = np.sort(ref.faces[at_end, :3], axis=1)
    side = [next(s for s, nodes in EXODUS_TET_SIDES.items()
                 if np.array_equal(np.sort(cells[e][np.array(nodes) - 1]), f)) for e, f in zip(element, face)]
    with netCDF4.Dataset(tmp_path / "two.e", "a") as nc:
        nc.createDimension("num_side_sets", 1)
        nc.createDimension("num_side_ss1", len(side))
        nc.createDimension("len_name", 33)
        nc.createVariable("ss_prop1", "i4", ("num_side_sets",))[:] = [7]
        nc.createVariable("ss_names", "S1", ("num_side_sets", "len_name"))[:] = netCDF4.stringtochar(
            np.array(["outlet"], dtype="S33"))
        nc.createVariable("elem_ss1", "i4", ("num_side_ss1",))[:] = element + 1
        nc.createVariable("side_ss1", "i4", ("num_side_ss1",))[:] = side
    mesh = read_mesh(tmp_path / "two.e")
    assert len(mesh.region_names) == 2 and mesh.group_names[0] == "outlet"  # blocks named by their ids
    np.testing.assert_allclose(_areas(mesh)["outlet"], 1.0, rtol=1e-12)
    np.testing.assert_allclose(mesh.points[mesh.group_nodes("outlet"), 0], 2.0)


def test_a_negative_physical_tag_in_an_msh41_entity_list_is_the_same_group(tmp_path):
    path = two_boxes(tmp_path / "n41.msh", 4.1, size=0.8)
    lines = path.read_text().splitlines()
    at = lines.index("$Entities")
    n_points, n_curves, n_surfaces, _ = map(int, lines[at + 1].split())
    first = at + 2 + n_points + n_curves
    tagged = [k for k in range(first, first + n_surfaces) if int(lines[k].split()[7])]
    parts = lines[tagged[0]].split()  # tag, bounding box (6), number of physical tags, the tags, ...
    parts[8] = str(-int(parts[8]))
    lines[tagged[0]] = " ".join(parts)
    path.write_text("\n".join(lines) + "\n")
    mesh = read_mesh(path)
    assert mesh.group_names[:2] == ("xmin", "xmax") and len(mesh.group_names) == 6
    np.testing.assert_allclose([_areas(mesh)[n] for n in ("xmin", "xmax")], [1.0, 1.0], rtol=1e-12)
