"""Abaqus-style .inp decks written here by hand (numbers from generated boxes): continuation
lines, several node blocks, heat-transfer and unknown element types, set names shared by two
blocks, GENERATE ranges and sets of sets. Every deck read keeps the unit cube's volume."""

from __future__ import annotations

import numpy as np
import pytest
from heatsoak.core.errors import MeshError
from heatsoak.core.mesh.generate import box_mesh
from heatsoak.core.mesh.geometry import cell_volumes, face_areas
from heatsoak.core.mesh.read import read_mesh
from mixed_meshes import hex_grid


def _halves(c):
    return (c[:, 0] > 0.5).astype(int), ("left", "right")


def _rows(first_id, table, split_after=None):
    """Data lines 'id, n1, n2, ...' (1-based numbers), each cut after ``split_after`` entries with a
    trailing comma, as decks continue long element lines."""
    out = []
    for k, row in enumerate(table):
        items = [str(first_id + k), *(str(v + 1) for v in row)]
        if split_after:
            out += [", ".join(items[:split_after]) + ",", ", ".join(items[split_after:])]
        else:
            out.append(", ".join(items))
    return out


def _nodes(points, start=0, stop=None):
    stop = len(points) if stop is None else stop
    return [f"{i + 1}, {x:.17g}, {y:.17g}, {z:.17g}" for i, (x, y, z) in enumerate(points[start:stop], start)]


def _quadratic_deck(mesh):
    left = mesh.cells[mesh.cell_region == 0]
    right = mesh.cells[mesh.cell_region == 1]
    half = len(mesh.points) // 2
    lines = ["** a deck with what meshio alone does not read", "*HEADING", "cube",
             "*NODE, NSET=first", *_nodes(mesh.points, 0, half),
             "*NODE, NSET=second", *_nodes(mesh.points, half),
             "*ELEMENT, TYPE=DC3D10,", "  ELSET=left", *_rows(1, left, split_after=8),
             "*ELEMENT, TYPE=C3D10", *_rows(1 + len(left), right),
             "*ELEMENT, TYPE=CPS6, ELSET=plane", *_rows(9001, mesh.faces[:3]),
             "*ELSET, ELSET=right, GENERATE", f"{1 + len(left)}, {len(left) + len(right)}, 1",
             "*ELSET, ELSET=all", "left, right",
             "*MATERIAL, NAME=steel", "*CONDUCTIVITY", "45.0"]
    return "\n".join(lines) + "\n"


def test_a_deck_with_continuations_node_blocks_and_unknown_types_is_read_whole(tmp_path):
    box = box_mesh((2, 2, 2), order=2, regions=_halves)
    path = tmp_path / "cube.inp"
    path.write_text(_quadratic_deck(box))
    mesh = read_mesh(path)
    assert mesh.order == 2 and mesh.n_cells == box.n_cells and mesh.n_nodes == box.n_nodes
    assert mesh.region_names == ("left", "right")
    vol = np.bincount(mesh.cell_region, weights=cell_volumes(mesh.points, mesh.cells))
    np.testing.assert_allclose(vol, [0.5, 0.5], rtol=1e-12)
    assert any("skipped elements of types heatsoak does not read: CPS6 3" in w for w in mesh.warnings)


def test_one_set_over_a_tetra10_block_and_a_hexahedron20_block_is_refused_with_the_share(tmp_path):
    # meshio alone returns set indices past the first block's end here
    box = box_mesh((1, 1, 1), order=2)
    points, hexes, _ = hex_grid(1, seed=None)
    n = len(box.points)
    mid = np.zeros((1, 12), dtype=np.int64)  # hexahedron20 mid-edge nodes: any nodes will do for the refusal
    lines = ["*NODE", *_nodes(np.vstack([box.points, points + [1.0, 0, 0]])),
             "*ELEMENT, TYPE=C3D10, ELSET=solid", *_rows(1, box.cells),
             "*ELEMENT, TYPE=C3D20R, ELSET=solid", *_rows(100, np.hstack([hexes + n, mid]), split_after=16)]
    (tmp_path / "two.inp").write_text("\n".join(lines) + "\n")
    with pytest.raises(MeshError, match=r"two.inp: quadratic hexahedron20 1 cells hold 50% of the volume"):
        read_mesh(tmp_path / "two.inp")


def test_a_hexahedron_deck_is_split_and_keeps_its_sets(tmp_path):
    points, hexes, cell = hex_grid(3, seed=5)
    low = np.flatnonzero(cell[:, 2] == 0) + 1
    lines = ["*NODE", *_nodes(points), "*ELEMENT, TYPE=C3D8R, ELSET=block", *_rows(1, hexes),
             "*ELSET, ELSET=base", ", ".join(map(str, low))]
    (tmp_path / "hex.inp").write_text("\n".join(lines) + "\n")
    mesh = read_mesh(tmp_path / "hex.inp")
    vol = dict(zip(mesh.region_names, np.bincount(mesh.cell_region, weights=cell_volumes(mesh.points, mesh.cells))))
    np.testing.assert_allclose([vol["base"], vol["block"]], [1 / 3, 2 / 3], rtol=1e-12)
    assert mesh.splits[0].startswith("27 hexahedra split into")


def test_an_include_loop_is_refused_naming_the_file(tmp_path):
    (tmp_path / "loop.inp").write_text("*NODE\n1, 0, 0, 0\n*INCLUDE, INPUT=loop.inp\n")
    with pytest.raises(MeshError, match="loop.inp: \\*INCLUDE nested more than"):
        read_mesh(tmp_path / "loop.inp")


def _abaqus_faces(cells, faces, face_cell):
    """Face label (1-4: S1-S4 of the deck format's tetrahedron) of each boundary face in its cell."""
    table = np.array([[0, 1, 2], [0, 3, 1], [1, 3, 2], [2, 3, 0]])
    local = np.sort(cells[face_cell][:, table], axis=2)  # (n, 4, 3)
    return 1 + np.argmax((local == np.sort(faces[:, :3], axis=1)[:, None]).all(axis=2), axis=1)


def test_a_part_and_assembly_deck_gives_surfaces_from_element_faces_and_ignores_internal_sets(tmp_path):
    box = box_mesh((2, 2, 2))
    hot = np.flatnonzero(box.points[box.faces[:, :3], 0].max(axis=1) < 1e-12)  # the side x = 0
    label = _abaqus_faces(box.cells, box.faces[hot], box.face_cell[hot])
    lines = ["*Heading", "*Part, name=Part-1", "*Node", *_nodes(box.points),
             "*Element, type=C3D4", *_rows(1, box.cells),
             "*Elset, elset=Set-1, generate", f"1, {box.n_cells}, 1",
             "*Elset, elset=_PickedSet2, internal, generate", "1, 5, 1",
             "*Solid Section, elset=Set-1, material=steel", ",", "*End Part", "*Assembly, name=Assembly",
             "*Instance, name=Part-1-1, part=Part-1", "*End Instance"]
    for s in np.unique(label):
        lines += [f"*Elset, elset=_Hot_S{s}, internal, instance=Part-1-1",
                  ", ".join(str(c + 1) for c in box.face_cell[hot][label == s])]
    lines += ["*Surface, type=ELEMENT, name=Hot", *(f"_Hot_S{s}, S{s}" for s in np.unique(label)), "*End Assembly"]
    (tmp_path / "cae.inp").write_text("\n".join(lines) + "\n")
    mesh = read_mesh(tmp_path / "cae.inp")
    assert mesh.region_names == ("Set-1",)  # not the internal _PickedSet2
    areas = dict(zip(mesh.group_names, np.bincount(mesh.face_group, weights=face_areas(mesh.points, mesh.faces))))
    assert mesh.group_names[0] == "Hot" and len(mesh.group_names) == 6  # Hot and the five other sides
    np.testing.assert_allclose(areas["Hot"], 1.0, rtol=1e-12)


def test_a_surface_on_hexahedron_faces_names_the_split_triangles(tmp_path):
    points, hexes, cell = hex_grid(2, seed=3)
    bottom = np.flatnonzero(cell[:, 2] == 0) + 1
    lines = ["*NODE", *_nodes(points), "*ELEMENT, TYPE=C3D8", *_rows(1, hexes),
             "*ELSET, ELSET=low", ", ".join(map(str, bottom)), "*SURFACE, NAME=base", "low, S1"]
    (tmp_path / "hexs.inp").write_text("\n".join(lines) + "\n")
    mesh = read_mesh(tmp_path / "hexs.inp")
    areas = dict(zip(mesh.group_names, np.bincount(mesh.face_group, weights=face_areas(mesh.points, mesh.faces))))
    np.testing.assert_allclose(areas["base"], 1.0, rtol=1e-12)
    np.testing.assert_allclose(sum(areas.values()), 6.0, rtol=1e-12)


def test_a_file_that_is_no_deck_is_said_to_be_unrecognised(tmp_path):
    (tmp_path / "photo.inp").write_bytes(b"\x89PNG\r\n\x1a\n\x00\x00binary")
    with pytest.raises(MeshError, match="photo.inp: format not recognised: a deck should hold"):
        read_mesh(tmp_path / "photo.inp")


def test_two_parts_numbered_alike_are_refused_not_mixed_up(tmp_path):
    box = box_mesh((1, 1, 1))
    part = ["*Node", *_nodes(box.points), "*Element, type=C3D4", *_rows(1, box.cells)]
    lines = ["*Part, name=A", *part, "*End Part", "*Part, name=B", *part, "*End Part"]
    (tmp_path / "parts.inp").write_text("\n".join(lines) + "\n")
    with pytest.raises(MeshError, match="parts.inp: 8 node numbers are defined more than once .*2 parts"):
        read_mesh(tmp_path / "parts.inp")
