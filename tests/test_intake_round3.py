"""Meshes and cases from outside the project, third round: files as gmsh and meshio write them.

Each test is an input that once was misread silently or refused wrongly; the
expected answers are facts of geometry or of the heat equation named beside them.
"""

from __future__ import annotations

import json
from contextlib import contextmanager

import meshio
import numpy as np
import pytest
import tomli_w
from heatsoak.core.app.cli import main
from heatsoak.core.mesh.generate import box_mesh
from heatsoak.core.mesh.read import read_mesh
from heatsoak.core.mesh.shape import tet_basis
from heatsoak.core.mesh.topology import signed_volumes
from heatsoak.core.results.probes import ProbeSet, locate

gmsh = pytest.importorskip("gmsh")


def _cli(capsys, *argv):
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    assert "Traceback" not in out + err
    return code, out, err


@contextmanager
def _gmsh_model(name, path, version=4.1, size=0.5):
    """A gmsh session with model ``name``: build its geometry and groups in the block; on leaving, it is
    meshed (size ``size``) and written to ``path`` as ascii msh ``version`` (unless the block meshed
    it already, e.g. to raise the order), then gmsh is finalised."""
    gmsh.initialize(["", "-nopopup"])
    try:
        gmsh.option.setNumber("General.Terminal", 0)
        gmsh.option.setNumber("General.NumThreads", 1)
        gmsh.model.add(name)
        gmsh.option.setNumber("Mesh.MeshSizeMax", size)
        yield gmsh.model
        if gmsh.model.mesh.getNodes()[0].size == 0:
            gmsh.model.mesh.generate(3)
        gmsh.option.setNumber("Mesh.MshFileVersion", version)
        gmsh.option.setNumber("Mesh.Binary", 0)
        gmsh.write(str(path))
    finally:
        gmsh.finalize()


def _gmsh_box(path, version=2.2, size=0.5, physical=False, save_all=False):
    """A unit cube meshed by gmsh; optionally one physical volume "body" and surface "bottom" (z = 0)."""
    with _gmsh_model("box", path, version, size) as model:
        box = model.occ.addBox(0, 0, 0, 1, 1, 1)
        model.occ.synchronize()
        if physical:
            model.addPhysicalGroup(3, [box], name="body")
            bottom = model.getEntitiesInBoundingBox(-1, -1, -1e-6, 2, 2, 1e-6, dim=2)
            model.addPhysicalGroup(2, [t for _, t in bottom], name="bottom")
        gmsh.option.setNumber("Mesh.SaveAll", int(save_all))
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
    assert set(again.group_names) == {"bottom", *(f"untagged-{i}" for i in range(1, 6))}  # five sides apart
    assert again.region_names == ("body",)
    areas = _group_areas(again)
    np.testing.assert_allclose(list(areas.values()), np.ones(6), rtol=1e-12)


# ----------------------------------------------------------------------------- probes on curved surfaces


def _gmsh_cylinder(path, order, size):
    """Cylinder of radius 10 mm along x from 0 to 40 mm, coordinates in mm, one physical volume."""
    with _gmsh_model("rod", path, 4.1, size) as model:
        tag = model.occ.addCylinder(0, 0, 0, 40, 0, 0, 10)
        model.occ.synchronize()
        model.addPhysicalGroup(3, [tag], name="rod")
        model.mesh.generate(3)
        if order == 2:
            model.mesh.setOrder(2)
    return path


def _linear(x):
    return 20.0 + 300.0 * x[..., 0] - 200.0 * x[..., 1] + 100.0 * x[..., 2]


@pytest.mark.parametrize("order", [1, 2])
def test_a_probe_on_the_true_curved_surface_is_read_at_the_mesh_surface(tmp_path, order):
    mesh = read_mesh(_gmsh_cylinder(tmp_path / "rod.msh", order, 5.0), "mm")
    on_cylinder = np.array([[0.02, 0.01 * np.cos(a), 0.01 * np.sin(a)] for a in (0.1, 1.3, 2.9)])
    probes = ProbeSet(mesh, on_cylinder, ["a", "b", "c"], unit="mm")
    moved = np.linalg.norm(probes.points - on_cylinder, axis=1)
    # a faceted circle lies inside the true one by at most the sagitta h^2 / (8 R) (elementary
    # geometry): 0.31 mm at h = 5 mm, R = 10 mm; quadratic faces follow it far closer
    assert moved.max() <= (0.32e-3 if order == 1 else 0.02e-3)
    assert len(probes.notes) == int((moved > 0).sum()) and all("outside the mesh surface" in n for n in probes.notes)
    # the moved point is read exactly: a linear field is in both element spaces (common practice, no source)
    np.testing.assert_allclose(probes.values(_linear(mesh.points)), _linear(probes.points), atol=1e-9)


def test_a_point_in_the_bulge_of_a_curved_cell_is_found_without_moving_it(tmp_path):
    mesh = read_mesh(_gmsh_cylinder(tmp_path / "rod.msh", 2, 6.0), "mm")
    # a point just inside the curved face of each boundary cell, through the cell's own map
    cell = mesh.face_cell
    opposite = ~(mesh.cells[cell, :4][:, :, None] == mesh.faces[:, None, :3]).any(axis=2)  # vertex off the face
    lam = np.where(opposite, 0.01, 0.33)  # reference coordinates [1 - sum(xi), xi], 1% off the face
    pts = np.einsum("ka,kad->kd", tet_basis(2, lam[:, 1:])[0], mesh.points[mesh.cells[cell]])
    found, _ = locate(mesh, pts)
    assert (found >= 0).all()
    probes = ProbeSet(mesh, pts, [f"p{i}" for i in range(len(pts))])
    assert probes.notes == [] and np.array_equal(probes.points, pts)
    np.testing.assert_allclose(probes.values(_linear(mesh.points)), _linear(pts), atol=1e-9)


def test_check_and_run_say_where_a_moved_probe_is_read(tmp_path, capsys):
    _gmsh_cylinder(tmp_path / "rod.msh", 1, 5.0)
    case = {
        "mesh": {"file": "rod.msh", "unit": "mm"},
        "material": {"rod": {"density": 1000, "specific_heat": 1000, "conductivity": 10}},
        "initial": {"temperature": 20},
        "time": {"end": 10, "step": 5},
        "probe": [{"name": "skin", "at": [20, 7.648, 6.442]}, {"name": "away", "at": [20, 0, 13]}],
    }
    path = tmp_path / "case.toml"
    path.write_text(tomli_w.dumps(case), encoding="utf-8")
    code, _, err = _cli(capsys, "check", path)
    assert code == 2 and "probe[1].at" in err and "outside the mesh, 3" in err and "probe[0]" not in err
    case["probe"].pop()
    path.write_text(tomli_w.dumps(case), encoding="utf-8")
    code, out, _ = _cli(capsys, "check", path)
    assert code == 0 and "note      probe 'skin' at (20, 7.648, 6.442) mm lies" in out
    code, out, _ = _cli(capsys, "run", path, "--out", tmp_path / "res", "--quiet")
    summary = json.loads((tmp_path / "res" / "summary.json").read_text())
    assert code == 0 and any(w.startswith("probe 'skin'") for w in summary["warnings"])


# ----------------------------------------------------------------------------- overlapping physical groups


def _overlapping_groups(path, version):
    """Unit boxes [0,1] and [1,2] along x; physical volumes "all" (both) and "insert" (the second),
    physical surfaces "ends" (x = 0 and x = 2) and "left" (x = 0): groups that share entities."""
    with _gmsh_model("bar", path, version, 0.5) as model:
        a, b = model.occ.addBox(0, 0, 0, 1, 1, 1), model.occ.addBox(1, 0, 0, 1, 1, 1)
        model.occ.fragment([(3, a)], [(3, b)])
        model.occ.synchronize()
        model.addPhysicalGroup(3, [a, b], name="all")
        model.addPhysicalGroup(3, [b], name="insert")
        x0, x2 = ([t for _, t in model.getEntitiesInBoundingBox(x - 1e-6, -1, -1, x + 1e-6, 2, 2, dim=2)]
                  for x in (0.0, 2.0))
        model.addPhysicalGroup(2, x0 + x2, name="ends")
        model.addPhysicalGroup(2, x0, name="left")
    return path


@pytest.mark.parametrize("version", [2.2, 4.1])
def test_overlapping_physical_groups_give_each_shared_cell_to_the_smaller_group(tmp_path, version):
    # msh 2.2 repeats an element once per group, meshio's msh 4.1 reading tags an entity with its
    # first group only: both must give the same mesh, with no group silently lost
    mesh = read_mesh(_overlapping_groups(tmp_path / "bar.msh", version))
    volume = np.bincount(mesh.cell_region, weights=signed_volumes(mesh.points, mesh.cells))
    regions = dict(zip(mesh.region_names, volume))
    np.testing.assert_allclose([regions["all"], regions["insert"]], [1.0, 1.0], rtol=1e-12)  # unit boxes
    areas = _group_areas(mesh)
    rest = sum(a for n, a in areas.items() if n.startswith("untagged-"))
    np.testing.assert_allclose([areas["left"], areas["ends"], rest], [1.0, 1.0, 8.0], rtol=1e-12)
    assert any("overlap (" in w and "ends" in w and "left" in w for w in mesh.warnings)


# ----------------------------------------------------------------------------- cell sets through meshio


@pytest.mark.parametrize("suffix", [".vtu", ".vtk"])
def test_cell_sets_written_by_meshio_to_a_format_without_sets_keep_their_names(tmp_path, suffix):
    # meshio writes named cell sets to VTU/VTK as one integer array named by the joined set
    # names ("-" is taken by the names here, so it joins with "_"), -1 for cells in no set
    box = box_mesh((2, 2, 2), size=(2.0, 1.0, 1.0))
    tri = box.faces[:, :3]
    x = box.points[tri].mean(axis=1)[:, 0]
    sets = {"hot-end": [np.flatnonzero(x < 1e-9), None], "cold-end-face": [np.flatnonzero(x > 2 - 1e-9), None],
            "body": [None, np.arange(box.n_cells)]}
    path = tmp_path / f"box{suffix}"
    meshio.write(path, meshio.Mesh(box.points, [("triangle", tri), ("tetra", box.cells)], cell_sets=sets))
    mesh = read_mesh(path)
    assert mesh.region_names == ("body",)
    areas = _group_areas(mesh)
    # faces of a 2 x 1 x 1 box: two ends of area 1, four sides of area 2 (geometry)
    assert set(areas) == {"hot-end", "cold-end-face", *(f"untagged-{i}" for i in range(1, 5))}
    np.testing.assert_allclose([areas["hot-end"], areas["cold-end-face"]], [1, 1], rtol=1e-12)
    np.testing.assert_allclose([areas[f"untagged-{i}"] for i in range(1, 5)], [2] * 4, rtol=1e-12)


@pytest.mark.parametrize(("key", "tags"), [("zone-id", (3, 4)), ("a-b_c", (0, 1))])
def test_an_integer_array_whose_name_only_looks_joined_keeps_numbered_names(tmp_path, key, tags):
    # values that are not set indices, and a name that splits into two names at "-" and at "_"
    box = box_mesh((2, 2, 2))
    path = tmp_path / "box.vtu"
    cell_tags = np.where(box.points[box.cells].mean(axis=1)[:, 0] < 0.5, *tags)
    meshio.write(path, meshio.Mesh(box.points, [("tetra", box.cells)], cell_data={key: [cell_tags]}))
    assert read_mesh(path).region_names == tuple(f"region-{t}" for t in tags)


def test_a_msh4_file_saved_with_save_all_beside_physical_groups_is_read_by_gmsh_itself(tmp_path):
    # meshio cannot read it; gmsh's own reader can: the named groups and the untagged rest
    mesh = read_mesh(_gmsh_box(tmp_path / "box.msh", 4.1, physical=True, save_all=True))
    assert mesh.region_names == ("body",) and mesh.group_names[0] == "bottom"
    assert len(mesh.group_names) == 6  # bottom and the five other sides of the cube, split at the edges
    assert any("read with gmsh's own reader" in w and "Mesh.SaveAll" in w for w in mesh.warnings)


def test_a_misspelt_theta_name_lists_the_names_allowed(tmp_path, capsys):
    box = box_mesh((1, 1, 1))
    meshio.write(tmp_path / "box.vtu", meshio.Mesh(box.points, [("tetra", box.cells)]))
    case = {"mesh": {"file": "box.vtu"}, "material": {"*": {"density": 1, "specific_heat": 1, "conductivity": 1}},
            "initial": {"temperature": 0}, "time": {"end": 1, "step": 1, "theta": "crank-nicholson"}}
    path = tmp_path / "case.toml"
    path.write_text(tomli_w.dumps(case), encoding="utf-8")
    code, _, err = _cli(capsys, "check", path)
    assert code == 2 and "time.theta: 'crank-nicholson' is not allowed" in err and "'crank-nicolson'" in err
