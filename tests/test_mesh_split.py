"""Hexahedra, wedges and pyramids split into conforming tetrahedra; quadratic ones refused.

Checks: the split keeps the volume exactly (the cells here are straight boxes and their parts:
geometry); a conforming split leaves no unmatched face inside the body, so the faces met once
are exactly the box's surface (area 6 for the unit cube); every tetrahedron has positive volume.
"""

from __future__ import annotations

import meshio
import numpy as np
import pytest
from heatsoak.core.errors import MeshError
from heatsoak.core.mesh.geometry import cell_volumes, face_areas
from heatsoak.core.mesh.inspect import format_summary, summarize
from heatsoak.core.mesh.read import read_mesh
from heatsoak.core.mesh.split import split_cells, split_quads
from heatsoak.core.mesh.surface import unique_rows
from heatsoak.core.mesh.topology import all_faces, signed_volumes
from mixed_meshes import hex_grid, mixed_blocks


def _faces_met(tets):
    """How many tetrahedra hold each distinct face, and those faces."""
    faces, keys = all_faces(np.asarray(tets))
    first, inverse, count = unique_rows(keys)
    return count, faces[first]


@pytest.mark.parametrize("seed", [None, 0, 1, 2])
def test_split_hexahedra_are_conforming_and_keep_the_volume(seed):
    points, hexes, _ = hex_grid(4, seed=seed)
    tets, origin = split_cells("hexahedron", hexes)
    vol = signed_volumes(points, tets)
    assert np.abs(vol).min() > 0.9 / (6 * 64)  # the smallest piece of a cube of side 1/4 is 1/6 of it
    np.testing.assert_allclose(np.bincount(origin, weights=np.abs(vol)), np.full(64, 1 / 64), rtol=1e-12)
    count, faces = _faces_met(tets)
    assert count.max() == 2
    np.testing.assert_allclose(face_areas(points, faces[count == 1]).sum(), 6.0, rtol=1e-12)
    assert set(np.bincount(origin)) <= {5, 6}


def test_a_hexahedron_with_no_cut_through_the_corner_opposite_its_smallest_gives_five():
    # global numbers: corner 0 smallest; the three faces at corner 6 have their smallest at 2, 2, 5,
    # so none is cut through 6: Dompierre et al.'s five-tetrahedron case
    numbers = np.array([0, 4, 1, 5, 6, 2, 7, 3])
    points = np.empty((8, 3))
    from mixed_meshes import HEX_CORNERS

    points[numbers] = HEX_CORNERS
    tets, _ = split_cells("hexahedron", numbers[None])
    assert len(tets) == 5
    np.testing.assert_allclose(np.abs(signed_volumes(points, tets)).sum(), 1.0, rtol=1e-12)


def test_wedges_and_pyramids_split_into_three_and_two():
    points, blocks = mixed_blocks(2)
    kinds = dict(blocks)
    for kind, per in (("wedge", 3), ("pyramid", 2)):
        tets, origin = split_cells(kind, kinds[kind])
        assert np.array_equal(np.bincount(origin), np.full(len(kinds[kind]), per))
        assert np.abs(signed_volumes(points, tets)).min() > 1e-6


def test_a_mixed_mesh_of_hexahedra_wedges_and_pyramids_conforms_and_keeps_the_cube():
    points, blocks = mixed_blocks(3)
    tets = np.vstack([split_cells(kind, cells)[0] for kind, cells in blocks])
    np.testing.assert_allclose(np.abs(signed_volumes(points, tets)).sum(), 1.0, rtol=1e-12)
    count, faces = _faces_met(tets)
    assert count.max() == 2
    np.testing.assert_allclose(face_areas(points, faces[count == 1]).sum(), 6.0, rtol=1e-12)


def test_quads_are_cut_through_their_smallest_node():
    tri = split_quads(np.array([[7, 3, 9, 8]]))
    assert np.array_equal(tri, [[3, 9, 8], [3, 8, 7]])


def test_a_mixed_file_is_read_whole_with_its_regions_and_inspect_says_what_was_split(tmp_path):
    points, blocks = mixed_blocks(3)
    x = [points[c].mean(axis=1)[:, 0] for _, c in blocks]
    tags = [np.where(xc < 0.4, 1, 2) for xc in x]
    path = tmp_path / "mixed.vtu"
    meshio.write(path, meshio.Mesh(points, blocks, cell_data={"physical": tags}))
    mesh = read_mesh(path)
    vol = np.bincount(mesh.cell_region, weights=cell_volumes(mesh.points, mesh.cells))
    np.testing.assert_allclose(vol, [1 / 3, 2 / 3], rtol=1e-12)  # x < 1/3 and the rest
    np.testing.assert_allclose(face_areas(mesh.points, mesh.faces).sum(), 6.0, rtol=1e-12)
    assert len(mesh.group_names) == 6  # untagged: the cube's sides
    text = format_summary(summarize(mesh))
    assert "9 hexahedra split into" in text and "18 wedges split into 54 tetrahedra" in text
    assert "54 pyramids split into 108 tetrahedra" in text


def test_tagged_quadrilaterals_name_the_faces_of_a_hexahedron_mesh(tmp_path):
    points, hexes, cell = hex_grid(3, seed=4)
    from mixed_meshes import HEX_FACES

    bottom = hexes[cell[:, 2] == 0][:, HEX_FACES[0]]
    path = tmp_path / "hex.msh"
    tags = [np.full(len(hexes), 1), np.full(len(bottom), 2)]
    meshio.write(path, meshio.Mesh(points, [("hexahedron", hexes), ("quad", bottom)],
                                   cell_data={"gmsh:physical": tags, "gmsh:geometrical": tags},
                                   field_data={"body": np.array([1, 3]), "bottom": np.array([2, 2])}),
                 file_format="gmsh22", binary=False)
    mesh = read_mesh(path)
    areas = dict(zip(mesh.group_names, np.bincount(mesh.face_group, weights=face_areas(mesh.points, mesh.faces))))
    assert mesh.splits == ("27 hexahedra split into " + str(mesh.n_cells) + " tetrahedra",)
    np.testing.assert_allclose(areas["bottom"], 1.0, rtol=1e-12)
    np.testing.assert_allclose(sum(areas.values()), 6.0, rtol=1e-12)


@pytest.mark.parametrize(("kind", "share"), [("hexahedron20", 1 / 8), ("wedge18", (1 / 16) / (7 / 8 + 1 / 16))])
def test_quadratic_cells_other_than_tetra10_are_refused_with_their_share_of_the_volume(tmp_path, kind, share):
    points, hexes, _ = hex_grid(2, seed=None)
    one = hexes[:1]  # a cube of side 1/2 beside seven others: the whole of it, or half as a wedge
    corners = one if kind == "hexahedron20" else one[:, [0, 1, 2, 4, 5, 6]]
    mid = np.zeros((1, int(kind[-2:]) - corners.shape[1]), dtype=np.int64)  # mid-nodes: not looked at
    blocks = [("hexahedron", hexes[1:]), (kind, np.hstack([corners, mid]))]
    meshio.write(tmp_path / "q.msh", meshio.Mesh(points, blocks), file_format="gmsh22", binary=False)
    with pytest.raises(MeshError, match=rf"q.msh: quadratic {kind} 1 cells hold {100 * share:.3g}% of the volume"):
        read_mesh(tmp_path / "q.msh")


def _gmsh_hex_and_wedge_box(path):
    """gmsh's own mesh of two unit cubes side by side: one of hexahedra (transfinite, recombined), one
    of wedges (a triangulated face extruded in layers); physical volumes and the far end x = 2 named."""
    gmsh = pytest.importorskip("gmsh")
    gmsh.initialize(["", "-nopopup"], interruptible=False)
    try:
        gmsh.option.setNumber("General.Terminal", 0)
        geo = gmsh.model.geo
        p = [geo.addPoint(x, y, 0) for x, y in ((0, 0), (1, 0), (1, 1), (0, 1), (2, 0), (2, 1))]
        lines = [geo.addLine(p[a], p[b]) for a, b in ((0, 1), (1, 2), (2, 3), (3, 0), (1, 4), (4, 5), (5, 2))]
        left = geo.addPlaneSurface([geo.addCurveLoop([lines[0], lines[1], lines[2], lines[3]])])
        right = geo.addPlaneSurface([geo.addCurveLoop([lines[4], lines[5], lines[6], -lines[1]])])
        for c in lines:
            geo.mesh.setTransfiniteCurve(c, 4)
        geo.mesh.setTransfiniteSurface(left)
        geo.mesh.setRecombine(2, left)
        out = geo.extrude([(2, left), (2, right)], 0, 0, 1, numElements=[3], recombine=True)
        geo.synchronize()
        vols = [t for d, t in out if d == 3]
        gmsh.model.addPhysicalGroup(3, vols[:1], name="hexes")
        gmsh.model.addPhysicalGroup(3, vols[1:], name="wedges")
        end = gmsh.model.getEntitiesInBoundingBox(2 - 1e-6, -1, -1, 2 + 1e-6, 2, 2, dim=2)
        gmsh.model.addPhysicalGroup(2, [t for _, t in end], name="far-end")
        gmsh.model.mesh.generate(3)
        gmsh.write(str(path))
    finally:
        gmsh.finalize()
    return path


def test_a_gmsh_mesh_of_hexahedra_and_wedges_is_read_whole(tmp_path):
    mesh = read_mesh(_gmsh_hex_and_wedge_box(tmp_path / "hw.msh"))
    vol = dict(zip(mesh.region_names, np.bincount(mesh.cell_region, weights=cell_volumes(mesh.points, mesh.cells))))
    np.testing.assert_allclose([vol["hexes"], vol["wedges"]], [1.0, 1.0], rtol=1e-12)
    areas = dict(zip(mesh.group_names, np.bincount(mesh.face_group, weights=face_areas(mesh.points, mesh.faces))))
    np.testing.assert_allclose(areas["far-end"], 1.0, rtol=1e-12)
    np.testing.assert_allclose(sum(areas.values()), 10.0, rtol=1e-12)  # no face inside left unmatched
    assert any(s.startswith("27 hexahedra split into") for s in mesh.splits)
    assert any("wedges split into" in s for s in mesh.splits)


def test_hexahedra_written_with_repeated_nodes_keep_the_volume_of_their_true_shape(tmp_path):
    # some writers store wedges and pyramids as hexahedra with repeated nodes; the column i == 0
    # of wedges and the pyramids of mixed_blocks are written that way here
    points, blocks = mixed_blocks(2)
    kinds = dict(blocks)
    w, p = kinds["wedge"], kinds["pyramid"]
    as_hex = np.vstack([kinds["hexahedron"], w[:, [0, 1, 2, 2, 3, 4, 5, 5]], p[:, [0, 1, 2, 3, 4, 4, 4, 4]]])
    meshio.write(tmp_path / "collapsed.vtu", meshio.Mesh(points, [("hexahedron", as_hex)]))
    mesh = read_mesh(tmp_path / "collapsed.vtu")
    np.testing.assert_allclose(cell_volumes(mesh.points, mesh.cells).sum(), 1.0, rtol=1e-12)
    np.testing.assert_allclose(face_areas(mesh.points, mesh.faces).sum(), 6.0, rtol=1e-12)
    assert f"({len(w) + len(p)} of them with repeated nodes: collapsed shapes)" in mesh.splits[0]


def test_a_hexahedron_collapsed_to_a_face_is_refused(tmp_path):
    points, hexes, _ = hex_grid(1, seed=None)
    flat = hexes[:, [0, 1, 2, 3, 0, 1, 2, 3]]
    meshio.write(tmp_path / "flat.vtu", meshio.Mesh(points, [("hexahedron", np.vstack([hexes, flat]))]))
    with pytest.raises(MeshError, match="flat.vtu: 1 hexahedron cells have so many repeated nodes that they hold no volume"):
        read_mesh(tmp_path / "flat.vtu")
