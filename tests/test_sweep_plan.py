"""The variants of a sweep (no engine needed): factorial, list files, names, file names moved, the table."""

from __future__ import annotations

import pytest
from box_case import make_case
from heatsoak.core.app.sweep.plan import plan_sweep
from heatsoak.core.app.sweep.table import Row, columns, write_table
from heatsoak.core.case.casefile import load_case, save_case
from heatsoak.core.case.relocate import file_keys, relocate_files
from heatsoak.core.errors import CaseError
from sweep_fixtures import read_table


def test_several_vary_make_the_full_factorial_first_key_slowest(tmp_path):
    case = make_case(tmp_path)
    plan = plan_sweep(case, ["boundary.xmax.h=[5, 50]", "time.theta=[1.0, 0.5, \"crank-nicolson\"]"], out_dir=tmp_path)
    assert plan.keys == ["boundary.xmax.h", "time.theta"]
    assert [tuple(v.values.values()) for v in plan.variants] == [
        (5, 1.0), (5, 0.5), (5, "crank-nicolson"), (50, 1.0), (50, 0.5), (50, "crank-nicolson")]
    assert len({v.name for v in plan.variants}) == 6
    assert [v.data["boundary"]["xmax"]["h"] for v in plan.variants] == [5, 5, 5, 50, 50, 50]
    assert plan.variants[2].data["time"]["theta"] == "crank-nicolson"


def test_a_list_file_gives_named_variants_and_combines_with_vary(tmp_path):
    case = make_case(tmp_path)
    listing = tmp_path / "variants.csv"
    listing.write_text("variant,material.right.conductivity,boundary.xmax.kind\n"
                       "alu,200.0,convection\nsteel,15.0,insulated\n")
    plan = plan_sweep(case, list_file=listing, out_dir=tmp_path)
    assert [v.name for v in plan.variants] == ["alu", "steel"]
    assert plan.variants[1].data["boundary"]["xmax"]["kind"] == "insulated"  # a plain word needs no quotes
    listing.write_text("variant,time.step\nplots,5\n../up,10\nvariants,20\n")  # no name leaves or hides in DIR
    assert [v.name for v in plan_sweep(case, list_file=listing, out_dir=tmp_path).variants] == [
        "plots_", "up", "variants_"]
    listing.write_text("variant,material.right.conductivity,boundary.xmax.kind\n"
                       "alu,200.0,convection\nsteel,15.0,insulated\n")
    both = plan_sweep(case, ["time.step=[5, 10]"], list_file=listing, out_dir=tmp_path)
    assert len(both.variants) == 4 and both.keys == ["material.right.conductivity", "boundary.xmax.kind", "time.step"]


@pytest.mark.parametrize("vary, message", [
    (["time.step=5"], "TOML array"),
    (["time.step=[]"], "TOML array"),
    (["time.step=[1, 2]", "time.step=[3]"], "more than once"),
    (["time.step"], "KEY=VALUE"),
    ([], "--vary"),
])
def test_bad_vary_names_what_is_wrong(tmp_path, vary, message):
    case = make_case(tmp_path)
    with pytest.raises(CaseError, match=message):
        plan_sweep(case, vary, out_dir=tmp_path)


def test_a_moved_case_reaches_the_same_mesh_and_table_files(tmp_path):
    case = make_case(tmp_path)
    (tmp_path / "base.csv").write_text("0, 20\n60, 90\n120, 90\n")
    (tmp_path / "air.csv").write_text("0, 20\n120, 40\n")
    data = {**load_case(case).data}
    data["boundary"] = {**data["boundary"], "xmin": {"kind": "temperature", "table": "base.csv"},
                        "xmax": {"kind": "convection", "h": 15, "ambient": {"table": "air.csv"}}}
    far = tmp_path / "a" / "b"
    far.mkdir(parents=True)
    moved = relocate_files(data, tmp_path, far)
    assert sorted(file_keys(moved)) == ["boundary.xmax.ambient.table", "boundary.xmin.table", "mesh.file"]
    assert moved["mesh"]["file"] == "../../box.msh" and data["mesh"]["file"] == "box.msh"  # input unchanged
    save_case(moved, far / "v.toml")
    there, here = load_case(far / "v.toml"), load_case(case)
    assert there.mesh.n_nodes == here.mesh.n_nodes
    assert there.problem.boundaries["xmin"].value(120.0) == pytest.approx(90.0)
    absolute = relocate_files({**data, "mesh": {"file": str(tmp_path / "box.msh")}}, tmp_path, far)
    assert absolute["mesh"]["file"] == str(tmp_path / "box.msh")


def test_the_table_has_the_promised_columns_and_blank_missing_values(tmp_path):
    rows = [Row("v1", {"time.step": 5}, "complete", probes={"core": {"end": 40.5, "max": 41.0, "crossing": None}},
                regions={"body": 90.0}, wall_s=1.5),
            Row("v2", {"time.step": 10}, "failed", error="CaseError: time.step: bad\nsecond line")]
    assert columns(["time.step"], rows) == ["variant", "time.step", "status", "core.end", "core.max", "core.crossing",
                                            "region.body.max", "wall_s", "model", "error"]
    table = read_table(write_table(tmp_path / "sweep.csv", ["time.step"], rows))
    assert table[0]["core.crossing"] == "" and table[0]["core.max"] == "41.0" and table[0]["model"] == "full"
    assert table[1]["core.end"] == "" and table[1]["error"] == "CaseError: time.step: bad | second line"


def test_a_case_given_as_data_plans_the_same_variants_as_its_file(tmp_path):
    from heatsoak.core.app.sweep.plan import plan_from_data
    from heatsoak.core.case.casefile import read_case_toml

    case = make_case(tmp_path)
    out = tmp_path / "sweeps" / "one"
    from_file = plan_sweep(case, ["boundary.xmax.h=[5, 50]"], out_dir=out)
    from_data = plan_from_data(read_case_toml(case), tmp_path, ["boundary.xmax.h=[5, 50]"], out_dir=out)
    assert from_data.case_path is None and from_data.keys == from_file.keys
    assert [(v.name, v.data) for v in from_data.variants] == [(v.name, v.data) for v in from_file.variants]
    assert from_data.variants[0].data["mesh"]["file"] == "../../../box.msh"
