"""Unusual but realistic meshes and case files through the public command line.

Each input here once gave a traceback, a silent misreading or a misleading
message; a user must see exit code 2 and a message naming the input, or a
physically right result.
"""

from __future__ import annotations

import json

import meshio
import numpy as np
import pytest
import tomli_w
from heatsoak.core.app.cli import main
from heatsoak.core.errors import MeshError
from heatsoak.core.mesh.generate import box_mesh
from heatsoak.core.mesh.read import read_mesh

RHO, C, K = 1000.0, 1000.0, 1.0


def _box(shape=(3, 3, 3)):
    return box_mesh(shape, size=(10.0, 10.0, 10.0))


def _case(tmp_path, mesh_file, boundary, **changes):
    data = {
        "mesh": {"file": mesh_file, "unit": "mm"},
        "material": {"*": {"density": RHO, "specific_heat": C, "conductivity": K}},
        "initial": {"temperature": 20},
        "boundary": boundary,
        "time": {"end": 100, "step": 10, "theta": 0.5},
    }
    for section, table in changes.items():
        data[section] = table
    path = tmp_path / "case.toml"
    path.write_text(tomli_w.dumps(data), encoding="utf-8")
    return path


def _cli(capsys, *argv):
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    assert "Traceback" not in out + err
    return code, out, err


# ----------------------------------------------------------------------------- meshes

def test_float_valued_region_and_group_tags_are_read_as_tags(tmp_path):
    m = _box()
    right = (m.points[m.cells].mean(axis=1)[:, 0] > 5).astype(float) + 1
    blocks = [("tetra", m.cells), ("triangle", m.faces)]
    data = {"RegionId": [right, (m.face_group + 10).astype(float)]}
    meshio.write(tmp_path / "f.vtk", meshio.Mesh(m.points, blocks, cell_data=data), binary=False)
    mesh = read_mesh(tmp_path / "f.vtk")
    assert mesh.region_names == ("region-1", "region-2")
    assert np.bincount(mesh.cell_region).tolist() == [int((right == 1).sum()), int((right == 2).sum())]
    assert mesh.group_names == tuple(f"group-{10 + i}" for i in range(6))


def test_float_arrays_that_are_not_whole_numbers_are_not_tags(tmp_path):
    m = _box()
    data = {"quality": [np.linspace(0.1, 0.9, len(m.cells))]}
    meshio.write(tmp_path / "q.vtu", meshio.Mesh(m.points, [("tetra", m.cells)], cell_data=data))
    assert read_mesh(tmp_path / "q.vtu").region_names == ("region",)


def _cracked(partial: bool):
    """The box with the nodes of the plane x = 10/3 duplicated for the cells on its right
    (for y < 5 only when ``partial``): a slit the mesher left unmerged."""
    m = _box()
    x0 = 10.0 / 3.0
    on = np.isclose(m.points[:, 0], x0) & ((m.points[:, 1] < 5) if partial else True)
    new = np.arange(len(m.points))
    new[on] = len(m.points) + np.arange(on.sum())
    cells = m.cells.copy()
    right = m.points[m.cells].mean(axis=1)[:, 0] > x0
    cells[right] = new[m.cells[right]]
    return np.vstack([m.points, m.points[on]]), cells


def test_boundary_faces_on_coincident_unmerged_nodes_are_reported(tmp_path):
    points, cells = _cracked(partial=True)
    meshio.write(tmp_path / "slit.vtu", meshio.Mesh(points, [("tetra", cells)]))
    mesh = read_mesh(tmp_path / "slit.vtu", "mm")
    # faces touching a duplicated node are unmatched up to the first shared row (y = 6.67 mm):
    # 2 (y) x 3 (z) grid squares of 2 triangles on each side of the slit
    notes = [w for w in mesh.warnings if "coincident but unmerged" in w]
    assert len(notes) == 1 and notes[0].startswith("24 boundary faces")
    assert not any("disconnected" in w for w in mesh.warnings)


def test_a_mesh_without_unmerged_nodes_gets_no_crack_warning(tmp_path):
    m = _box()
    meshio.write(tmp_path / "box.vtu", meshio.Mesh(m.points, [("tetra", m.cells)]))
    assert not any("unmerged" in w for w in read_mesh(tmp_path / "box.vtu").warnings)


def test_a_mesh_whose_nodes_lie_in_one_plane_is_refused_naming_the_plane(tmp_path):
    m = _box()
    meshio.write(tmp_path / "flat.mesh", meshio.Mesh(m.points[:, :2], [("tetra", m.cells)]))
    with pytest.raises(MeshError, match=r"flat\.mesh lies in one plane \(every z is 0\).*x, y and z"):
        read_mesh(tmp_path / "flat.mesh")


def test_inspect_of_a_flat_mesh_exits_2(tmp_path, capsys):
    m = _box()
    meshio.write(tmp_path / "flat.vtu", meshio.Mesh(m.points[:, :2], [("tetra", m.cells)]))
    code, _, err = _cli(capsys, "inspect", tmp_path / "flat.vtu", "--unit", "mm")
    assert code == 2 and "one plane" in err


def test_an_element_on_a_node_the_file_does_not_define_is_named(tmp_path, capsys):
    path = tmp_path / "broken.inp"
    path.write_text("*NODE\n1, 0, 0, 0\n2, 1, 0, 0\n3, 0, 1, 0\n4, 0, 0, 1\n"
                    "*ELEMENT, TYPE=C3D4\n1, 1, 2, 3, 5\n")
    code, _, err = _cli(capsys, "inspect", path, "--unit", "mm")
    assert code == 2 and "broken.inp" in err
    assert "refers to a node, element or set 5 that it does not define" in err


def test_tetra_with_a_distant_hexahedron_keeps_both_as_two_bodies(tmp_path):
    m = _box()
    hexa = np.array([[20, 0, 0], [21, 0, 0], [21, 1, 0], [20, 1, 0], [20, 0, 1], [21, 0, 1], [21, 1, 1], [20, 1, 1]])
    n = len(m.points)
    raw = meshio.Mesh(np.vstack([m.points, hexa]), [("tetra", m.cells), ("hexahedron", np.arange(n, n + 8)[None])])
    meshio.write(tmp_path / "th.vtu", raw)
    mesh = read_mesh(tmp_path / "th.vtu")
    assert mesh.n_nodes == n + 8 and mesh.splits == ("1 hexahedron split into 6 tetrahedra",)
    assert any("2 disconnected bodies" in w for w in mesh.warnings)


# ----------------------------------------------------------------------------- case files

def test_a_step_giving_too_many_steps_is_refused_at_time_step(tmp_path, capsys):
    m = _box()
    meshio.write(tmp_path / "box.vtu", meshio.Mesh(m.points, [("tetra", m.cells)]))
    path = _case(tmp_path, "box.vtu", {}, time={"end": 1.0, "step": 1e-300})
    for argv in (("check", path), ("run", path, "--out", tmp_path / "r", "--quiet")):
        code, _, err = _cli(capsys, *argv)
        assert code == 2 and "time.step: 1e-300" in err and "1e+300 steps" in err


def test_a_boundary_that_is_not_a_table_is_named_as_such(tmp_path, capsys):
    m = _box()
    meshio.write(tmp_path / "box.vtu", meshio.Mesh(m.points, [("tetra", m.cells)]))
    path = _case(tmp_path, "box.vtu", {"surface-1": "hot"})
    code, _, err = _cli(capsys, "check", path)
    assert code == 2 and "boundary.surface-1: 'hot' is not allowed; expected a table" in err


def test_a_case_file_saved_with_a_byte_order_mark_reads(tmp_path, capsys):
    m = _box()
    meshio.write(tmp_path / "box.vtu", meshio.Mesh(m.points, [("tetra", m.cells)]))
    path = _case(tmp_path, "box.vtu", {})
    path.write_bytes(b"\xef\xbb\xbf" + path.read_bytes())
    code, out, _ = _cli(capsys, "check", path)
    assert code == 0 and out.startswith("ok:")


def test_a_results_folder_that_is_a_file_exits_2_naming_it(tmp_path, capsys):
    m = _box()
    meshio.write(tmp_path / "box.vtu", meshio.Mesh(m.points, [("tetra", m.cells)]))
    path = _case(tmp_path, "box.vtu", {})
    (tmp_path / "taken").write_text("")
    code, _, err = _cli(capsys, "run", path, "--out", tmp_path / "taken", "--quiet")
    assert code == 2 and "results folder" in err and "taken" in err and "a file of that name exists" in err


# ----------------------------------------------------------------------------- physics on odd meshes

def _run(tmp_path, capsys, path):
    code, _, _ = _cli(capsys, "run", path, "--out", tmp_path / "out", "--quiet")
    assert code == 0
    return json.loads((tmp_path / "out" / "summary.json").read_text())


def test_a_single_tetrahedron_stores_exactly_the_heat_put_in(tmp_path, capsys):
    # energy conservation (common practice, no source): insulated body, flux q on one face of area A,
    # stored heat = q A t for any theta and mesh.
    pts = np.array([[0, 0, 0], [10, 0, 0], [0, 10, 0], [0, 0, 10]], float)
    meshio.write(tmp_path / "one.vtu", meshio.Mesh(pts, [("tetra", np.array([[0, 1, 2, 3]]))]))
    mesh = read_mesh(tmp_path / "one.vtu", "mm")
    big = mesh.group_names[0]  # the slanted face, area sqrt(3)/2 (10 mm)^2, listed first (largest)
    path = _case(tmp_path, "one.vtu", {big: {"kind": "heat_flux", "value": 500.0}})
    s = _run(tmp_path, capsys, path)
    expected = 500.0 * np.sqrt(3) / 2 * 1e-4 * 100.0
    assert s["energy"]["stored_J"] == pytest.approx(expected, rel=1e-10)
    assert s["energy"]["relative_imbalance"] < 1e-10


def test_two_disconnected_bodies_heat_only_the_one_given_heat(tmp_path, capsys):
    # energy conservation (common practice, no source): the heat q A t stays in body A; body B, with
    # no heat path to A, stays at its initial temperature exactly.
    m = _box((2, 2, 2))
    pts = np.vstack([m.points, m.points + [30.0, 0, 0]])
    meshio.write(tmp_path / "two.vtu", meshio.Mesh(pts, [("tetra", np.vstack([m.cells, m.cells + len(m.points)]))]))
    mesh = read_mesh(tmp_path / "two.vtu", "mm")
    assert any("2 disconnected bodies" in w for w in mesh.warnings)
    xmin = mesh.points[mesh.faces].mean(axis=1)[:, 0].argmin()
    group = mesh.group_names[mesh.face_group[xmin]]  # the face x = 0 of body A
    path = _case(tmp_path, "two.vtu", {group: {"kind": "heat_flux", "value": 500.0}},
                 probe=[{"name": "a", "at": [5, 5, 5]}, {"name": "b", "at": [35, 5, 5]}])
    s = _run(tmp_path, capsys, path)
    assert s["energy"]["stored_J"] == pytest.approx(500.0 * 1e-4 * 100.0, rel=1e-10)
    probes = np.loadtxt(tmp_path / "out" / "probes.csv", delimiter=",", skiprows=1)
    assert probes[-1, 1] > 20.0 + 1e-3
    assert np.all(probes[:, 2] == 20.0)


def test_an_initial_field_with_three_components_per_node_is_refused(tmp_path, capsys):
    m = _box()
    field = {"temperature": np.ones((len(m.points), 3))}
    meshio.write(tmp_path / "box.vtu", meshio.Mesh(m.points, [("tetra", m.cells)], point_data=field))
    path = _case(tmp_path, "box.vtu", {}, initial={"file": "box.vtu"})
    code, _, err = _cli(capsys, "check", path)
    assert code == 2 and "initial.file" in err and "'temperature' has 3 components" in err
