"""The case file: round trip, building the problem, and one test per class of bad input."""

import copy

try:
    import tomllib
except ModuleNotFoundError:  # Python 3.10
    import tomli as tomllib

import numpy as np
import pytest
from box_case import BASE, make_case
from heatsoak.core.app.cli import main
from heatsoak.core.case.casefile import case_to_toml, check_case, load_case
from heatsoak.core.problem.schedule import Constant, Ramp, Table


def test_case_data_round_trips_through_toml():
    data = copy.deepcopy(BASE)
    data["material"]["left"] = {"density": 1.5e3, "specific_heat": 1e-5, "conductivity": [[2, 0.5, 0], [0.5, 3, 0],
                                                                                        [0, 0, 1.25]]}
    data["initial"]["region"] = {"right": 35.5}
    data["boundary"]["ymin"] = {"kind": "temperature", "table": [[0, 20], [30, 50.5]]}
    data["title"] = 'quotes " and \\ and unicode \u00b0C'
    text = case_to_toml(data)
    assert tomllib.loads(text) == data
    assert "ramp = { start = 20, end = 180, at = 0, over = 60 }" in text
    assert 'at = [20.0, 15.0, 10.0]' in text


def test_load_case_builds_materials_schedules_and_probes_in_metres(tmp_path):
    case = load_case(make_case(tmp_path, lambda d: d["initial"].update(region={"right": 40})))
    p = case.problem
    assert set(p.materials) == {"left", "right"}
    assert p.materials["left"].density == 7900 and p.materials["left"].label == "steel"
    assert p.materials["right"].conductivity == 200.0
    assert isinstance(p.boundaries["xmin"].value, Ramp) and p.boundaries["xmin"].value(30.0) == 100.0
    assert isinstance(p.boundaries["xmax"].ambient, Constant) and p.boundaries["xmax"].h == 15
    assert p.initial == {"left": 20.0, "right": 40.0}
    np.testing.assert_allclose(case.probes[0].point, [0.02, 0.015, 0.01])
    assert case.probes[0].threshold == 30 and case.probes[1].threshold is None
    assert case.time.end == 120 and case.output_every == 2 and case.unit == "mm"


def test_a_conductivity_tensor_and_a_source_schedule_are_accepted(tmp_path):
    tensor = [[5.0, 1.0, 0.0], [1.0, 5.0, 0.0], [0.0, 0.0, 1.0]]

    def change(d):
        d["material"]["right"].update(conductivity=tensor, source={"ramp": {"start": 0, "end": 1e5, "over": 60}})

    mat = load_case(make_case(tmp_path, change)).problem.materials["right"]
    np.testing.assert_array_equal(mat.conductivity, tensor)
    assert mat.source(30.0) == 5e4


def test_theta_may_be_a_named_preset_and_a_table_a_csv_file(tmp_path):
    (tmp_path / "h.csv").write_text("time;temperature\n0;20\n60;80,5\n")

    def change(d):
        d["time"]["theta"] = "crank-nicolson"
        d["boundary"]["xmin"] = {"kind": "temperature", "table": "h.csv"}

    case = load_case(make_case(tmp_path, change))
    assert case.time.theta == 0.5
    sched = case.problem.boundaries["xmin"].value
    assert isinstance(sched, Table) and sched(60.0) == 80.5 and sched.to_toml() == {"table": "h.csv"}


def _set(path, value):
    def change(d):
        *head, last = path
        for k in head:
            d = d[k]
        if value is _DELETE:
            del d[last]
        else:
            d[last] = value
    return change


_DELETE = object()
BAD = {
    "unknown-section": (_set(["tiem"], {}), "tiem: unknown key; did you mean 'time'"),
    "unknown-region": (_set(["material", "rigth"], {"density": 1, "specific_heat": 1, "conductivity": 1}),
                       "material.rigth: no region 'rigth' in the mesh; did you mean 'right'"),
    "unknown-group": (_set(["boundary", "xmn"], {"kind": "insulated"}),
                      "boundary.xmn: no surface group 'xmn' in the mesh; did you mean 'xmin'"),
    "unknown-key": (_set(["boundary", "zmin", "valeu"], 3), "boundary.zmin.valeu: unknown key; did you mean 'value'"),
    "density": (_set(["material", "right", "density"], 0), "material.right.density: 0 is not allowed; must be > 0"),
    "specific-heat-text": (_set(["material", "*", "specific_heat"], "500"), "material.*.specific_heat: '500'"),
    "tensor-asymmetric": (_set(["material", "right", "conductivity"], [[1, 2, 0], [0, 1, 0], [0, 0, 1]]),
                          "material.right.conductivity: [[1, 2, 0]"),
    "tensor-indefinite": (_set(["material", "right", "conductivity"], [[1, 2, 0], [2, 1, 0], [0, 0, 1]]),
                          "material.right.conductivity: [[1, 2, 0], [2, 1, 0], [0, 0, 1]] is not allowed; "
                          "a conductivity tensor must be positive definite"),
    "no-material": (_set(["material", "*"], _DELETE), "material: no material for regions ['left']"),
    "initial-missing": (_set(["initial", "temperature"], _DELETE), "initial.temperature: missing"),
    "theta": (_set(["time", "theta"], 1.5), "time.theta: 1.5 is not allowed; must be <= 1"),
    "theta-name": (_set(["time", "theta"], "implicit"), "time.theta: 'implicit'"),
    "step-over-end": (_set(["time", "step"], 500), "time.step: 500 is not allowed; the step must be <= time.end"),
    "step-negative": (_set(["time", "step"], -1), "time.step: -1 is not allowed; must be > 0"),
    "end-missing": (_set(["time", "end"], _DELETE), "time.end: missing"),
    "mass": (_set(["time", "mass"], "diagonal"), "time.mass: 'diagonal' is not allowed; mass must be one of"),
    "solver": (_set(["time", "solver"], "magic"), "time.solver: 'magic'"),
    "every": (_set(["output", "every"], 0), "output.every: 0 is not allowed"),
    "probe-duplicate": (_set(["probe", 1, "name"], "core"), "probe[1].name: 'core' is not allowed; probe names must"),
    "probe-comma": (_set(["probe", 1, "name"], "a,b"), "probe[1].name: 'a,b' is not allowed; a probe name is a CSV"),
    "probe-outside": (_set(["probe", 1, "at"], [50.0, 15.0, 10.0]),
                      "probe[1].at: [50.0, 15.0, 10.0] is not allowed; the point is outside the mesh, 10 mm from"),
    "probe-short": (_set(["probe", 0, "at"], [1.0, 2.0]), "probe[0].at: [1.0, 2.0] is not allowed; expected [x, y, z]"),
    "ramp-over": (_set(["boundary", "xmin", "ramp", "over"], -5), "boundary.xmin.ramp.over: -5 is negative"),
    "ramp-missing-end": (_set(["boundary", "xmin", "ramp", "end"], _DELETE), "boundary.xmin.ramp.end: missing"),
    "table-file": (_set(["boundary", "xmin"], {"kind": "temperature", "table": "none.csv"}),
                   "boundary.xmin.table: "),
    "two-schedules": (_set(["boundary", "zmin", "ramp"], {"start": 0, "end": 1, "over": 1}),
                      "boundary.zmin: give exactly one of"),
    "kind": (_set(["boundary", "zmin", "kind"], "radiation"), "boundary.zmin.kind: 'radiation' is not allowed"),
    "convection-h": (_set(["boundary", "xmax", "h"], _DELETE), "boundary.xmax.h: missing"),
    "ambient": (_set(["boundary", "xmax", "ambient"], {"ramp": 3}), "boundary.xmax.ambient.ramp: expected a table"),
    "mesh-file": (_set(["mesh", "file"], "nothere.msh"), "mesh.file: 'nothere.msh'"),
    "mesh-unit": (_set(["mesh", "unit"], "ft"), "mesh.unit: 'ft' is not allowed; allowed units are"),
    # no temperature below absolute zero (-273.15 degC, common practice, no source)
    "initial-below-zero": (_set(["initial", "temperature"], -300), "initial.temperature: -300 is not allowed; "
                                                                   "must be >= -273.15"),
    "ramp-below-zero": (_set(["boundary", "xmin", "ramp", "end"], -280),
                        "boundary.xmin: falls to -280 degC, below absolute zero (-273.15 degC)"),
    "ambient-below-zero": (_set(["boundary", "xmax", "ambient"], {"table": [[0, 20], [10, -274], [20, 0]]}),
                           "boundary.xmax.ambient: falls to -274 degC, below absolute zero"),
}


@pytest.mark.parametrize("name", list(BAD))
def test_each_bad_input_exits_2_and_names_the_key(tmp_path, capsys, name):
    change, expected = BAD[name]
    path = make_case(tmp_path, change)
    assert main(["check", str(path)]) == 2
    err = capsys.readouterr().err
    assert f"case.toml: {expected}" in err


def test_every_problem_is_reported_at_once(tmp_path):
    def change(d):
        d["time"]["theta"] = 2
        d["material"]["right"]["density"] = -1
        d["boundary"]["xmn"] = {"kind": "insulated"}

    issues = check_case(make_case(tmp_path, change))
    assert sorted(i.key for i in issues) == ["boundary.xmn", "material.right.density", "time.theta"]


def test_unreadable_toml_and_missing_case_exit_2_naming_the_file(tmp_path, capsys):
    bad = tmp_path / "broken.toml"
    bad.write_text("[time\nend = 3\n")
    assert main(["check", str(bad)]) == 2
    assert "broken.toml: not valid TOML" in capsys.readouterr().err
    assert main(["check", str(tmp_path / "gone.toml")]) == 2
    assert "gone.toml: case file not found" in capsys.readouterr().err


def test_check_of_a_good_case_prints_ok_and_a_summary(tmp_path, capsys):
    assert main(["check", str(make_case(tmp_path))]) == 0
    out = capsys.readouterr().out
    assert out.startswith("ok: ")
    assert "xmin: temperature [degC] ramp 20 -> 180 over 60 s from 0 s" in out
    assert "insulated (not listed): ymin, ymax, zmax" in out
