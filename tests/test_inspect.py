"""``heatsoak inspect``: the summary of a mesh, as text and JSON, and its exit codes."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
from heatsoak.core.app.cli import main
from heatsoak.core.mesh.generate import box_mesh
from heatsoak.core.mesh.inspect import format_summary, shape_ratio, summarize
from heatsoak.core.mesh.read import build_mesh, read_mesh

MESHES = Path(__file__).resolve().parent.parent / "meshes"
KEYS = {
    "file", "unit", "nodes", "elements", "element_order", "regions", "surface_groups",
    "interfaces", "bounding_box", "quality", "warnings",
}  # fmt: skip


def test_shape_ratio_is_one_for_a_regular_and_zero_for_a_flat_tetrahedron():
    regular = np.array([[1, 1, 1], [1, -1, -1], [-1, 1, -1], [-1, -1, 1]], float)  # alternate cube corners
    flat = np.array([[0, 0, 0], [1, 0, 0], [0, 1, 0], [1, 1, 0]], float)
    cell = np.array([[0, 1, 2, 3]])
    assert shape_ratio(regular, cell) == pytest.approx([1.0])
    assert shape_ratio(flat, cell) == pytest.approx([0.0])


def test_summary_of_a_two_region_box():
    m = box_mesh((4, 2, 2), size=(2.0, 1.0, 0.5), regions=lambda c: ((c[:, 0] > 1.0).astype(int), ("a", "b")))
    tags = {n: m.faces[m.face_group == i] for i, n in enumerate(m.group_names)}
    d = summarize(build_mesh(m.points, m.cells, m.cell_region, m.region_names, tags))
    assert KEYS <= set(d)
    assert (d["nodes"], d["elements"], d["element_order"]) == (5 * 3 * 3, 6 * 16, 1)
    assert [r["name"] for r in d["regions"]] == ["a", "b"]
    assert [r["volume"] for r in d["regions"]] == pytest.approx([0.5, 0.5])  # 1 x 1 x 0.5 halves
    areas = {g["name"]: g["area"] for g in d["surface_groups"]}
    assert areas == pytest.approx(
        {"xmin": 0.5, "xmax": 0.5, "ymin": 1.0, "ymax": 1.0, "zmin": 2.0, "zmax": 2.0}
    )
    assert d["interfaces"] == 2 * 2 * 2
    assert d["bounding_box"] == {"min": [0.0, 0.0, 0.0], "max": [2.0, 1.0, 0.5]}
    assert (
        d["quality"]["poor"] == 0
        and 0 < d["quality"]["min"] <= d["quality"]["median"] <= d["quality"]["max"] <= 1
    )


def test_text_summary_lists_regions_and_groups_in_aligned_columns():
    text = format_summary(summarize(box_mesh((2, 2, 2), order=2)))
    assert "quadratic (tetra10)" in text
    rows = [line for line in text.splitlines() if line.startswith(("  x", "  y"))]
    assert len(rows) == 4 and len({len(r) for r in rows}) == 1


def test_platen_demo_has_the_documented_regions_groups_and_size():
    d = summarize(read_mesh(MESHES / "platen.msh", "mm"))
    assert [r["name"] for r in d["regions"]] == ["platen", "sleeve"]
    assert [g["name"] for g in d["surface_groups"]] == ["bore", "rim", "top", "base", "bolt-holes"]
    assert d["bounding_box"]["max"] == pytest.approx([0.06, 0.06, 0.02])
    assert 2000 < d["elements"] < 20000 and d["interfaces"] > 0
    # Flat faces through nodes on the circles: an inscribed n-gon lacks 1 - n sin(2 pi / n) / (2 pi)
    # of its circle's area, 4.5 % at the 12 segments per circle the mesh has at least (elementary
    # geometry). For the top that is at most 0.4 % net; the rim is below its exact area.
    top = np.pi * (60.0**2 - 12.0**2 - 4 * 4.0**2) * 1e-6
    rim = 2 * np.pi * 60.0 * 20.0 * 1e-6
    areas = {g["name"]: g["area"] for g in d["surface_groups"]}
    assert areas["top"] == pytest.approx(top, rel=4e-3) and areas["base"] == pytest.approx(top, rel=4e-3)
    assert 0.99 * rim < areas["rim"] <= rim


def test_quadratic_platen_is_order_two_with_the_same_names():
    d = summarize(read_mesh(MESHES / "platen_p2.msh", "mm"))
    assert d["element_order"] == 2
    assert [r["name"] for r in d["regions"]] == ["platen", "sleeve"]
    assert {g["name"] for g in d["surface_groups"]} == {"bore", "rim", "top", "base", "bolt-holes"}
    # Curved quadratic faces: the bore area 2 pi r h is met far closer than by flat triangles.
    bore = next(g["area"] for g in d["surface_groups"] if g["name"] == "bore")
    assert bore == pytest.approx(2 * np.pi * 12.0 * 20.0 * 1e-6, rel=1e-4)


def test_cli_json_has_the_required_keys(capsys):
    assert main(["inspect", str(MESHES / "lblock.vtu"), "--json"]) == 0
    d = json.loads(capsys.readouterr().out)
    assert KEYS <= set(d)
    assert [g["name"] for g in d["surface_groups"]] == [f"surface-{i}" for i in range(1, 9)]


def test_cli_feature_angle_and_unit_reach_the_reader(capsys):
    assert (
        main(["inspect", str(MESHES / "lblock.vtu"), "--json", "--feature-angle", "179", "--unit", "mm"]) == 0
    )
    d = json.loads(capsys.readouterr().out)
    assert len(d["surface_groups"]) == 1
    assert d["bounding_box"]["max"] == pytest.approx([1e-4, 6e-5, 4e-5])


def test_cli_text_output(capsys):
    assert main(["inspect", str(MESHES / "platen.msh"), "--unit", "mm"]) == 0
    out = capsys.readouterr().out
    assert "platen" in out and "bolt-holes" in out and "unit mm" in out


@pytest.mark.parametrize("content", [b"", b"$MeshFormat\n4.1 0 8\n$EndMeshFormat\n$Nodes\n1 2"])
def test_cli_bad_file_exits_2_with_a_message_and_no_traceback(tmp_path, capsys, content):
    path = tmp_path / "broken.msh"
    path.write_bytes(content)
    assert main(["inspect", str(path)]) == 2
    captured = capsys.readouterr()
    assert captured.out == ""
    assert captured.err.startswith("heatsoak inspect: ") and "broken.msh" in captured.err
    assert "Traceback" not in captured.err


def test_cli_missing_file_exits_2(tmp_path, capsys):
    assert main(["inspect", str(tmp_path / "none.vtu")]) == 2
    assert "none.vtu not found" in capsys.readouterr().err
