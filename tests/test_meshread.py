"""Mesh intake: formats, tags, automatic surface groups, units, and bad files."""

from __future__ import annotations

import meshio
import numpy as np
import pytest
from heatsoak.core.errors import InputError, MeshError
from heatsoak.core.mesh.generate import box_mesh
from heatsoak.core.mesh.geometry import cell_volumes, face_areas
from heatsoak.core.mesh.read import build_mesh, read_mesh
from heatsoak.core.mesh.topology import signed_volumes
from meshes_fixtures import circumradii, sphere, two_boxes


@pytest.fixture(scope="module")
def gmsh_dir(tmp_path_factory):
    """Two-box meshes written by gmsh itself in MSH 4.1 and 2.2 (linear and quadratic)."""
    d = tmp_path_factory.mktemp("gmsh")
    two_boxes(d / "v41.msh", 4.1)
    two_boxes(d / "v22.msh", 2.2)
    two_boxes(d / "p2.msh", 2.2, order=2)
    return d


def _counts(mesh, names, labels):
    return {n: int(c) for n, c in zip(names, np.bincount(labels, minlength=len(names)))}


def _export(mesh, path):
    """Write ``mesh`` (read from the gmsh file) with meshio, tags as each format holds them."""
    kind = "tetra" if mesh.order == 1 else "tetra10"
    tri = "triangle" if mesh.order == 1 else "triangle6"
    cells = [(kind, mesh.cells), (tri, mesh.faces)]
    tags = [mesh.cell_region + 1, mesh.face_group + 1]
    ext = path.suffix
    if ext == ".inp":
        sets = {
            n: [np.flatnonzero(mesh.cell_region == i), np.empty(0, int)]
            for i, n in enumerate(mesh.region_names)
        }
        out = meshio.Mesh(mesh.points, cells[:1] + [(tri, np.empty((0, 3), int))], cell_sets=sets)
    else:
        key = {".mesh": "medit:ref", ".vtk": "CellEntityIds"}.get(ext, "region")
        out = meshio.Mesh(mesh.points, cells, cell_data={key: tags})
    meshio.write(path, out)
    return path


def test_gmsh_41_and_22_give_the_same_mesh_with_names(gmsh_dir):
    a, b = read_mesh(gmsh_dir / "v41.msh"), read_mesh(gmsh_dir / "v22.msh")
    for m in (a, b):
        assert m.region_names == ("left", "right")
        assert m.group_names == ("xmin", "xmax", "untagged-1", "untagged-2", "untagged-3", "untagged-4")  # four sides apart
        assert m.order == 1
    assert (a.n_nodes, a.n_cells, a.n_faces) == (b.n_nodes, b.n_cells, b.n_faces)
    assert _counts(a, a.group_names, a.face_group) == _counts(b, b.group_names, b.face_group)


@pytest.mark.parametrize("ext", [".vtu", ".vtk", ".inp", ".mesh", ".xdmf"])
def test_every_format_round_trips(gmsh_dir, tmp_path, ext):
    ref = read_mesh(gmsh_dir / "v22.msh")
    back = read_mesh(_export(ref, tmp_path / f"m{ext}"))
    assert (back.n_nodes, back.n_cells, back.n_faces) == (ref.n_nodes, ref.n_cells, ref.n_faces)
    assert sorted(np.bincount(back.cell_region)) == sorted(np.bincount(ref.cell_region))
    if ext == ".inp":  # element sets keep the region names; meshio drops the triangles' tags
        assert back.region_names == ref.region_names
        assert len(back.group_names) == 6  # untagged: split at edges, the six sides of the 2 x 1 x 1 box
    else:  # integer tags: names are "region-<tag>" / "group-<tag>"
        assert back.region_names == ("region-1", "region-2")
        assert back.group_names == tuple(f"group-{i}" for i in range(1, 7))
        assert sorted(np.bincount(back.face_group)) == sorted(np.bincount(ref.face_group))


def test_quadratic_mesh_stays_quadratic(gmsh_dir, tmp_path):
    m = read_mesh(gmsh_dir / "p2.msh")
    assert m.order == 2 and m.cells.shape[1] == 10 and m.faces.shape[1] == 6
    assert m.group_names == ("xmin", "xmax", "untagged-1", "untagged-2", "untagged-3", "untagged-4")
    back = read_mesh(_export(m, tmp_path / "p2.vtu"))
    assert back.order == 2 and back.n_nodes == m.n_nodes


def test_mixed_linear_and_quadratic_cells_are_refused(tmp_path):
    p2 = box_mesh((1, 1, 1), order=2)
    p1 = box_mesh((1, 1, 1))
    path = tmp_path / "mixed.vtu"
    meshio.write(path, meshio.Mesh(p2.points, [("tetra10", p2.cells), ("tetra", p1.cells)]))
    with pytest.raises(MeshError, match="mixed.vtu.*linear and quadratic"):
        read_mesh(path)


def test_tetra10_in_another_node_order_is_refused(tmp_path):
    m = box_mesh((2, 2, 2), order=2)
    cells = m.cells[:, [0, 1, 2, 3, 4, 5, 6, 7, 9, 8]]  # gmsh's own order of the last two edges
    with pytest.raises(MeshError, match="node order"):
        build_mesh(m.points, cells, m.cell_region, m.region_names, None)


def _box_tags(m, names):
    return {n: m.faces[m.face_group == m.group_index(n)] for n in names}


def test_tagged_triangles_match_by_node_set_in_any_order():
    rng = np.random.default_rng(1)
    m = box_mesh((3, 3, 3))
    tags = {
        n: rng.permuted(f[rng.permutation(len(f))], axis=1) for n, f in _box_tags(m, m.group_names).items()
    }
    built = build_mesh(m.points, m.cells, m.cell_region, m.region_names, tags)
    assert built.group_names == m.group_names
    np.testing.assert_array_equal(built.face_group, m.face_group)


def test_faces_without_tag_are_split_at_sharp_edges_like_an_untagged_boundary():
    m = box_mesh((3, 3, 3))
    built = build_mesh(m.points, m.cells, m.cell_region, m.region_names, _box_tags(m, ["xmin", "zmax"]))
    assert built.group_names == ("xmin", "zmax", "untagged-1", "untagged-2", "untagged-3", "untagged-4")
    assert np.bincount(built.face_group).tolist() == [18] * 6  # the cube's other four sides


def test_a_remainder_in_one_smooth_piece_keeps_the_name_untagged():
    m = box_mesh((3, 3, 3))
    tags = _box_tags(m, ["xmin", "xmax", "ymin", "ymax", "zmin"])
    built = build_mesh(m.points, m.cells, m.cell_region, m.region_names, tags)
    assert built.group_names[-1] == "untagged" and np.bincount(built.face_group)[-1] == 18


def test_interfaces_between_regions_are_not_boundary():
    m = box_mesh((4, 4, 4), regions=lambda c: ((c[:, 0] > 0.5).astype(int), ("a", "b")))
    built = build_mesh(m.points, m.cells, m.cell_region, m.region_names, None)
    assert built.n_faces == 6 * 4 * 4 * 2
    assert len(built.interfaces) == 4 * 4 * 2
    assert np.allclose(m.points[built.interfaces[:, :3], 0], 0.5)


@pytest.mark.parametrize(("angle", "n_groups"), [(30.0, 6), (89.0, 6), (91.0, 1), (179.0, 1)])
def test_untagged_box_splits_at_its_edges(angle, n_groups):
    m = box_mesh((3, 3, 3))
    built = build_mesh(m.points, m.cells, m.cell_region, m.region_names, None, feature_angle=angle)
    assert built.group_names == tuple(f"surface-{i + 1}" for i in range(n_groups))
    area = np.bincount(built.face_group, weights=face_areas(built.points, built.faces))
    assert np.allclose(area, 6.0 / n_groups)


def test_automatic_group_names_do_not_depend_on_element_order():
    m = box_mesh((3, 3, 3))
    a = build_mesh(m.points, m.cells, m.cell_region, m.region_names, None)
    b = build_mesh(m.points, m.cells[::-1], m.cell_region, m.region_names, None)
    for built in (a, b):  # equal areas: ordered by centroid x, then y, then z
        first = built.faces[built.face_group == 0]
        assert np.allclose(built.points[first, 0], 0.0)
    assert sorted(map(tuple, np.sort(a.faces[a.face_group == 5], axis=1))) == sorted(
        map(tuple, np.sort(b.faces[b.face_group == 5], axis=1))
    )


def test_untagged_l_block_demo_has_eight_flat_groups():
    from pathlib import Path

    m = read_mesh(Path(__file__).parent.parent / "meshes" / "lblock.vtu")
    assert m.region_names == ("region",)
    assert len(m.group_names) == 8
    area = np.bincount(m.face_group, weights=face_areas(m.points, m.faces))
    # Faces of the 0.10 x 0.06 x 0.04 m block less its 0.05 x 0.03 notch [m^2]: top and bottom
    # 0.006 - 0.0015, y = 0 side 0.10 * 0.04, x = 0 side 0.06 * 0.04, y = 0.06 side and notch wall
    # y = 0.03 0.05 * 0.04, x = 0.10 end and notch wall x = 0.05 0.03 * 0.04.
    expected = [0.0045, 0.0045, 0.004, 0.0024, 0.002, 0.002, 0.0012, 0.0012]
    np.testing.assert_allclose(sorted(area), sorted(expected), rtol=1e-12)


@pytest.mark.parametrize(("unit", "scale"), [("m", 1.0), ("cm", 0.01), ("mm", 0.001), ("in", 0.0254)])
def test_units_scale_points_to_metres(gmsh_dir, unit, scale):
    ref = read_mesh(gmsh_dir / "v22.msh")
    m = read_mesh(gmsh_dir / "v22.msh", unit=unit)
    assert m.unit == unit
    np.testing.assert_allclose(m.points, ref.points * scale)


def test_unknown_unit_names_the_allowed_ones(gmsh_dir):
    with pytest.raises(InputError, match="'ft'.*m, cm, mm, in"):
        read_mesh(gmsh_dir / "v22.msh", unit="ft")


def _write_box(path, points=None, cells=None, extra=()):
    m = box_mesh((2, 2, 2))
    points = m.points if points is None else points
    cells = m.cells if cells is None else cells
    meshio.write(path, meshio.Mesh(points, [("tetra", cells), *extra]))
    return path


def test_file_without_tetrahedra_says_what_it_found(tmp_path):
    m = box_mesh((2, 2, 2))
    path = tmp_path / "skin.vtu"
    meshio.write(path, meshio.Mesh(m.points, [("triangle", m.faces), ("line", m.faces[:12, :2])]))
    with pytest.raises(MeshError, match=r"no tetrahedra in .*skin.vtu; found: triangle 48, line 12"):
        read_mesh(path)


def test_nan_coordinates_are_refused(tmp_path):
    points = box_mesh((2, 2, 2)).points.copy()
    points[5, 1] = np.nan
    with pytest.raises(MeshError, match=r"1 nodes of .*nan.vtu have NaN"):
        read_mesh(_write_box(tmp_path / "nan.vtu", points=points))


def test_zero_volume_element_is_refused_with_its_place(tmp_path):
    m = box_mesh((2, 2, 2))
    flat = m.cells.copy()
    flat[7] = [0, 1, 2, 2]  # nodes 0, 1, 2 lie on one grid line: zero volume
    with pytest.raises(MeshError, match=r"1 elements of zero volume in .*flat.vtu \(worst: element 7 near"):
        read_mesh(_write_box(tmp_path / "flat.vtu", cells=flat))


def test_inverted_elements_are_reoriented_and_reported(tmp_path):
    m = box_mesh((2, 2, 2))
    cells = m.cells.copy()
    cells[:5] = cells[:5][:, [1, 0, 2, 3]]
    got = read_mesh(_write_box(tmp_path / "inv.vtu", cells=cells))
    assert (signed_volumes(got.points, got.cells) > 0).all()
    assert any("reoriented 5 inverted" in w for w in got.warnings)


def test_unused_nodes_are_dropped_and_reported(tmp_path):
    m = box_mesh((2, 2, 2))
    points = np.vstack([m.points[:3] + 5.0, m.points])
    got = read_mesh(_write_box(tmp_path / "unused.vtu", points=points, cells=m.cells + 3))
    np.testing.assert_array_equal(got.points, m.points)
    np.testing.assert_array_equal(got.cells, m.cells)
    assert any("dropped 3 nodes" in w for w in got.warnings)


def test_disconnected_bodies_are_reported(tmp_path):
    m = box_mesh((2, 2, 2))
    points = np.vstack([m.points, m.points + [3.0, 0, 0]])
    cells = np.vstack([m.cells, m.cells + len(m.points)])
    got = read_mesh(_write_box(tmp_path / "two.vtu", points=points, cells=cells))
    assert any(w.startswith("2 disconnected bodies (elements per body: 48, 48)") for w in got.warnings)


def test_duplicate_elements_are_dropped_and_reported(tmp_path):
    m = box_mesh((2, 2, 2))
    cells = np.vstack([m.cells, m.cells[:4, ::-1]])  # same node sets, other order
    got = read_mesh(_write_box(tmp_path / "dup.vtu", cells=cells))
    assert got.n_cells == m.n_cells and got.n_faces == m.n_faces
    assert any("dropped 4 duplicate elements" in w for w in got.warnings)


@pytest.mark.parametrize("fraction", [0.3, 0.6, 0.95])
def test_truncated_file_is_a_mesh_error_naming_it(gmsh_dir, tmp_path, fraction):
    data = (gmsh_dir / "v41.msh").read_bytes()
    path = tmp_path / "cut.msh"
    path.write_bytes(data[: int(fraction * len(data))])
    with pytest.raises(MeshError, match="cut.msh"):
        read_mesh(path)


@pytest.mark.parametrize(
    ("name", "content", "cause"),
    [("junk.vtu", b"\x00\x01garbage", "junk.vtu: format not recognised: a .vtu file should be vtu"),
     ("junk.msh", b"$MeshFormat\nx\n", "cannot read mesh file .*junk.msh")],
)
def test_corrupt_file_is_a_mesh_error_naming_it(tmp_path, name, content, cause):
    path = tmp_path / name
    path.write_bytes(content)
    with pytest.raises(MeshError, match=cause):
        read_mesh(path)


def test_missing_file_and_unknown_extension(tmp_path):
    with pytest.raises(MeshError, match="nothere.msh not found"):
        read_mesh(tmp_path / "nothere.msh")
    (tmp_path / "a.foo").write_text("1")
    with pytest.raises(MeshError, match=r"a.foo: unknown mesh file extension '.foo'; readable: .*\.msh"):
        read_mesh(tmp_path / "a.foo")


def test_gmsh_box_regions_and_groups_are_exact(gmsh_dir):
    m = read_mesh(gmsh_dir / "v41.msh")
    vol = np.bincount(m.cell_region, weights=cell_volumes(m.points, m.cells))
    area = np.bincount(m.face_group, weights=face_areas(m.points, m.faces))
    np.testing.assert_allclose(vol, [1.0, 1.0], rtol=1e-12)  # two unit cubes
    np.testing.assert_allclose(area, [1.0, 1.0, 2.0, 2.0, 2.0, 2.0], rtol=1e-12)  # two ends, four 2 x 1 sides


@pytest.fixture(scope="module")
def balls(tmp_path_factory):
    d = tmp_path_factory.mktemp("ball")
    return {(h, o): read_mesh(sphere(d / f"b{h}_{o}.msh", h, o)) for h in (0.3, 0.15) for o in (1, 2)}


def test_faceted_ball_volume_lies_within_its_geometric_bound(balls):
    # All boundary vertices lie on the unit sphere, so every straight tetrahedron is inside the
    # ball and the deficit lies in the shell between the sphere and the nearest face plane,
    # at distance sqrt(R^2 - rho^2) for a face of circumradius rho (elementary geometry).
    exact = 4.0 / 3.0 * np.pi
    for h in (0.3, 0.15):
        m = balls[h, 1]
        deficit = exact - cell_volumes(m.points, m.cells).sum()
        d_min = np.sqrt(1.0 - circumradii(m.points, m.faces).max() ** 2)
        assert 0.0 <= deficit <= exact * (1.0 - d_min**3)
        # Projecting the faces onto the sphere from the centre covers it (area ratio <= 1 / d^2).
        rho = circumradii(m.points, m.faces)
        assert face_areas(m.points, m.faces) @ (1.0 / (1.0 - rho**2)) >= 4.0 * np.pi


def test_ball_volume_error_converges_at_second_order_and_quadratic_elements_do_better(balls):
    exact = 4.0 / 3.0 * np.pi
    err = {k: abs(cell_volumes(m.points, m.cells).sum() - exact) for k, m in balls.items()}
    order_p1 = np.log(err[0.3, 1] / err[0.15, 1]) / np.log(2.0)
    order_p2 = np.log(err[0.3, 2] / err[0.15, 2]) / np.log(2.0)
    assert 1.5 < order_p1 < 2.7  # faceting error O(h^2), common practice, no source
    assert order_p2 > 3.0  # curved quadratic elements: geometric error O(h^4) (measured 4.4)
    assert err[0.15, 2] < err[0.15, 1] / 100.0


def test_cells_of_lower_dimension_are_ignored_and_listed(tmp_path):
    m = box_mesh((2, 2, 2))
    path = _write_box(tmp_path / "lines.vtu", extra=[("line", m.faces[:2, :2]), ("vertex", np.array([[0]]))])
    got = read_mesh(path)
    assert got.n_cells == m.n_cells
    assert "ignored cells that are neither solid cells nor surface faces: line 2, vertex 1" in got.warnings


def test_overlapping_element_sets_put_each_element_in_the_smallest(tmp_path):
    m = box_mesh((2, 2, 2), regions=lambda c: ((c[:, 2] > 0.5).astype(int), ("low", "high")))
    sets = {
        "ALL": [np.arange(m.n_cells)],
        **{n: [np.flatnonzero(m.cell_region == i)] for i, n in enumerate(m.region_names)},
    }
    path = tmp_path / "sets.inp"
    meshio.write(path, meshio.Mesh(m.points, [("tetra", m.cells)], cell_sets=sets))
    got = read_mesh(path)
    assert got.region_names == ("low", "high")
    np.testing.assert_array_equal(got.cell_region, m.cell_region)
    assert any(w.startswith("element sets overlap (ALL, low, high)") for w in got.warnings)


def test_packed_row_keys_agree_with_numpy_unique():
    from heatsoak.core.mesh.surface import unique_rows

    rng = np.random.default_rng(2)
    for high in (50, 2**40):  # packed into one integer, and too large to pack
        keys = rng.integers(0, high, size=(400, 3))
        keys = np.vstack([keys, keys[:100]])
        got = unique_rows(keys)
        _, *ref = np.unique(keys, axis=0, return_index=True, return_inverse=True, return_counts=True)
        for a, b in zip(got, ref):  # packing keeps the lexicographic order of the rows
            np.testing.assert_array_equal(a, b.ravel())


def test_nearly_flat_element_is_reported_not_refused():
    m = box_mesh((2, 2, 2))
    sliver = np.array(
        [[5, 0, 0], [6, 0, 0], [5, 1, 0], [5.5, 0.5, 1e-11]]
    )  # height 1e-11 over a 0.5 m^2 base
    points = np.vstack([m.points, sliver])
    cells = np.vstack([m.cells, len(m.points) + np.arange(4)])
    got = build_mesh(points, cells, np.zeros(len(cells), int), ("body",), None)
    assert got.n_cells == m.n_cells + 1
    assert any("1 elements of nearly zero volume (worst: element 48" in w for w in got.warnings)


def test_a_part_of_an_unlikely_size_gets_a_note_that_doubts_the_unit(tmp_path):
    from heatsoak.core.mesh.read import unit_doubt

    assert unit_doubt(0.12, "m") is None and unit_doubt(15.0, "m") is None
    note = unit_doubt(120.0, "m")  # a 120 mm part read in metres
    assert "120 m across read in 'm'" in note and "read in 'mm' 0.12 m or in 'in' 3.048 m" in note
    assert "read in 'm' 0.12 m" in unit_doubt(1.2e-4, "mm")  # metres read as millimetres
    mesh = box_mesh((2, 2, 2), size=(120.0, 80.0, 20.0))
    path = tmp_path / "plate.vtu"
    meshio.write(path, meshio.Mesh(mesh.points, [("tetra", mesh.cells)]))
    assert any("unit is wrong" in w for w in read_mesh(path, unit="m").warnings)
    assert not any("unit is wrong" in w for w in read_mesh(path, unit="mm").warnings)
