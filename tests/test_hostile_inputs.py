"""A corpus of hostile and broken case files and meshes, made at test time from the box case.

Each entry is a change to the case text (or the mesh), the exit code of ``heatsoak check`` and
words its message must hold (the key, the value, what is allowed); nothing may end in a traceback.
"""

from __future__ import annotations

import json

import meshio
import pytest
from box_case import make_case
from heatsoak.core.app import runner
from heatsoak.core.app.cli import main


def deep(n: int, open_: str = "[", close: str = "]") -> str:
    return open_ * n + close * n


CASES = {  # name -> (text replaced, replacement, exit code of check, words in the message)
    "flux 1e300": ("value = 500", "value = 1e300", 2, ["boundary.zmin", "possible range of a heat flux"]),
    "flux -1e300": ("value = 500", "value = -1e300", 2, ["boundary.zmin", "heat flux"]),
    "flux table 1e300": ("value = 500", "table = [[0, 0], [10, 1e300]]", 2, ["boundary.zmin", "heat flux"]),
    "h 1e300": ("h = 15", "h = 1e300", 2, ["boundary.xmax.h", "convection coefficient"]),
    "source 1e300": ('label = "steel"', 'label = "steel"\nsource = 1e300', 2, ["material.*.source", "heat source"]),
    "source ramp 1e300": ('label = "steel"', 'label = "steel"\nsource = { ramp = { start = 0, end = 1e300, over = 5 } }',
                          2, ["material.*.source"]),
    "ramp to 1e7 degC": ("end = 180", "end = 1e7", 2, ["boundary.xmin", "possible range of a temperature"]),
    "ambient 1e6 degC": ("ambient = 20", "ambient = 1e6", 2, ["boundary.xmax.ambient", "temperature"]),
    "initial 1e9 degC": ("temperature = 20\n", "temperature = 1e9\n", 2, ["initial", "temperature"]),
    "density 1e-9": ("density = 7900", "density = 1e-9", 2, ["material.*.density", "density"]),
    "density 1e9": ("density = 7900", "density = 1e9", 2, ["material.*.density"]),
    "conductivity 1e9": ("conductivity = 15", "conductivity = 1e9", 2, ["material.*.conductivity"]),
    "specific heat 1e-5": ("specific_heat = 500", "specific_heat = 1e-5", 2, ["material.*.specific_heat"]),
    "nested 500 in h": ("h = 15", f"h = {deep(500)}", 2, ["nested too deeply"]),
    "nested 300 in title": ('title = "box heated from one side"', f"title = {deep(300)}", 2, ["title"]),
    "nested 400 tables": ("h = 15", "h = " + "{a = " * 400 + "1" + "}" * 400, 2, ["nested too deeply"]),
    "nested 200 in probe": ("at = [20.0, 15.0, 10.0]", f"at = {deep(200)}", 2, ["probe[0].at"]),
    "NUL in table name": ("value = 500", 'table = "a\\u0000b.csv"', 2, ["boundary.zmin.table", "NUL"]),
    "NUL in mesh name": ('file = "box.msh"', 'file = "bo\\u0000x.msh"', 2, ["mesh.file", "NUL"]),
    "NUL in region": ("[material.right]", '[material."ri\\u0000ght"]', 2, ["material.ri"]),
    "NUL in probe name": ('name = "core"', 'name = "co\\u0000re"', 2, ["probe[0].name"]),
    "huge integer": ("h = 15", "h = 99999999999999999999999999999999999999", 2, ["boundary.xmax.h"]),
    "probe at 1e308": ("at = [20.0, 15.0, 10.0]", "at = [1e308, 1e308, 1e308]", 2, ["probe[0].at", "far outside"]),
    "probe at 1e160": ("at = [20.0, 15.0, 10.0]", "at = [1e160, 0, 0]", 2, ["probe[0].at", "far outside"]),
    "step 1e-300": ("step = 10", "step = 1e-300", 2, ["time.step"]),
    "end 1e300": ("end = 120", "end = 1e300", 2, ["time.step"]),
    "theta nan": ("theta = 1.0", "theta = nan", 2, ["time.theta"]),
    "table absolute device": ("value = 500", 'table = "/dev/zero"', 2, ["boundary.zmin.table", "character device"]),
    "mesh is a folder": ('file = "box.msh"', 'file = "."', 2, ["mesh.file", "a folder"]),
    "h 1e6, usual range": ("h = 15", "h = 1e6", 0, ["warning", "boundary.xmax.h", "usual range"]),
    "flux 1e9, usual range": ("value = 500", "value = 1e9", 0, ["warning", "boundary.zmin", "usual range"]),
    "conductivity 1e4, usual range": ("conductivity = 15", "conductivity = 1e4", 0, ["warning", "conductivity"]),
}


@pytest.mark.parametrize("name", sorted(CASES))
def test_a_hostile_case_is_a_clear_message_and_exit_code(tmp_path, capsys, name):
    old, new, code, words = CASES[name]
    case = make_case(tmp_path)
    text = case.read_text()
    assert old in text
    case.write_text(text.replace(old, new, 1))
    assert main(["check", str(case)]) == code
    said = capsys.readouterr()
    out = said.out + said.err
    assert "Traceback" not in out and all(w in out for w in words), out


@pytest.mark.parametrize("where", ["all", "one"])
@pytest.mark.parametrize("size", [1e160, 1e300, 1.7e308])
def test_huge_finite_mesh_coordinates_are_refused_naming_a_node(tmp_path, capsys, where, size):
    case = make_case(tmp_path)
    m = meshio.read(tmp_path / "box.msh")
    pts = m.points * (size / 40) if where == "all" else m.points.copy()
    if where == "one":
        pts[3] = [size, 0, 0]
    meshio.write(tmp_path / "box.msh", meshio.Mesh(pts, m.cells, cell_data=m.cell_data, field_data=m.field_data),
                 file_format="gmsh22", binary=False)
    for command in (["inspect", str(tmp_path / "box.msh")], ["check", str(case)]):
        assert main(command) == 2
        err = capsys.readouterr().err
        assert "farther than 1e+09 m from the origin" in err and "node" in err


def test_a_run_whose_temperature_leaves_the_possible_range_stops_naming_the_input(tmp_path, capsys):
    case = make_case(tmp_path, lambda d: d["boundary"]["zmin"].update(value=1e12))  # passes check, with a warning
    assert main(["run", str(case), "--quiet", "--out", str(tmp_path / "out")]) == 2
    err = capsys.readouterr().err
    assert "no solid body reaches" in err and "boundary.zmin" in err
    summary = json.loads((tmp_path / "out" / "summary.json").read_text())
    assert summary["status"] == "failed" and "boundary.zmin" in summary["error"]
    rows = (tmp_path / "out" / "probes.csv").read_text().splitlines()[1:]
    assert len(rows) == summary["steps"] + 1 and max(float(v) for r in rows for v in r.split(",")[1:]) < 1e6


def test_a_run_cooled_below_absolute_zero_stops_naming_the_input(tmp_path, capsys):
    case = make_case(tmp_path, lambda d: d["boundary"]["zmin"].update(value=-5e9))
    assert main(["run", str(case), "--quiet", "--out", str(tmp_path / "out")]) == 2
    err = capsys.readouterr().err
    assert "below absolute zero" in err and "boundary.zmin" in err


def test_an_energy_balance_far_off_is_a_loud_warning_naming_suspect_inputs(tmp_path):
    from heatsoak.core.case.casefile import load_case

    case = load_case(make_case(tmp_path, lambda d: d["boundary"]["xmax"].update(h=5e6)))
    warning = runner._energy_warning(case, {"relative_imbalance": 0.4})
    assert warning and "ENERGY BALANCE IS OFF BY 40 %" in warning[0] and "boundary.xmax.h" in warning[0]
    assert runner._energy_warning(case, {"relative_imbalance": 1e-12}) == []


def test_plausible_values_pass_untouched(tmp_path, capsys):
    assert main(["check", str(make_case(tmp_path))]) == 0
    assert "warning" not in capsys.readouterr().out


# --------------------------------------------------------------------------- any case data, generated

def _leaves(data, path=()):
    if isinstance(data, dict):
        for k, v in data.items():
            yield from _leaves(v, (*path, k))
    elif isinstance(data, list) and data and isinstance(data[0], dict):
        for i, v in enumerate(data):
            yield from _leaves(v, (*path, i))
    else:
        yield path


def _set_leaf(data, path, value):
    for p in path[:-1]:
        data = data[p]
    data[path[-1]] = value


def test_any_value_anywhere_in_a_case_is_a_list_of_issues_never_an_exception(tmp_path):
    import copy

    from box_case import BASE
    from heatsoak.core.case.casefile import check_case_data
    from heatsoak.core.mesh.read import read_mesh
    from hypothesis import HealthCheck, given, settings
    from hypothesis import strategies as st

    make_case(tmp_path)
    mesh = read_mesh(tmp_path / "box.msh", "mm")
    paths = list(_leaves(BASE))
    values = st.recursive(
        st.one_of(st.none(), st.booleans(), st.integers(), st.floats(), st.text(max_size=8),
                  st.sampled_from(["/dev/zero", "../x.csv", "a\0b", "", "*", "box.msh"])),
        lambda inner: st.one_of(st.lists(inner, max_size=4), st.dictionaries(st.text(max_size=6), inner, max_size=3)),
        max_leaves=10)

    @settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
    @given(st.lists(st.tuples(st.sampled_from(paths), values), min_size=1, max_size=3))
    def check(changes):
        data = copy.deepcopy(BASE)
        for path, value in changes:
            _set_leaf(data, path, value)
        issues = check_case_data(data, tmp_path, mesh=mesh, source="case.toml", root=tmp_path)
        assert all(i.message.startswith("case.toml: ") for i in issues)

    check()
