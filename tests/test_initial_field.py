"""Starting a run from a nodal temperature field read from a file."""

import meshio
import numpy as np
import pytest
from box_case import make_case
from heatsoak.core.app.cli import main
from heatsoak.core.app.runner import run_case
from heatsoak.core.case.casefile import load_case
from heatsoak.core.case.initial_field import read_nodal_field


def test_a_run_restarts_from_the_last_step_of_a_previous_run(tmp_path):
    first = load_case(make_case(tmp_path))
    run_case(first, tmp_path / "first")
    with meshio.xdmf.TimeSeriesReader(str(tmp_path / "first" / "temperature.xdmf")) as r:
        r.read_points_cells()
        _, last, _ = r.read_data(r.num_steps - 1)

    def restart(d):
        d["initial"] = {"file": "first/temperature.xdmf"}

    second = load_case(make_case(tmp_path, restart))
    T0 = np.asarray(second.problem.initial)
    assert T0.shape == (second.problem.mesh.n_nodes,)
    np.testing.assert_allclose(T0, last["temperature"].ravel(), rtol=0, atol=1e-12)


def test_a_vtu_field_in_the_mesh_unit_is_matched_by_position(tmp_path):
    case = load_case(make_case(tmp_path))
    mesh = case.problem.mesh
    field = 20.0 + 1000.0 * mesh.points[:, 0]  # a field we can recognise
    order = np.random.default_rng(1).permutation(mesh.n_nodes)  # other node numbering, mm
    out = meshio.Mesh(mesh.points[order] * 1000.0, [("tetra", np.argsort(order)[mesh.cells])],
                      point_data={"temperature": field[order]})
    out.write(tmp_path / "start.vtu")
    np.testing.assert_allclose(read_nodal_field(tmp_path / "start.vtu", mesh, 0.001), field, atol=1e-12)


def test_a_field_from_another_mesh_is_refused_naming_the_file(tmp_path, capsys):
    case = make_case(tmp_path)
    other = meshio.Mesh(np.random.default_rng(0).random((10, 3)), [("tetra", np.array([[0, 1, 2, 3]]))],
                        point_data={"temperature": np.zeros(10)})
    other.write(tmp_path / "other.vtu")
    text = case.read_text().replace("[initial]\ntemperature = 20", '[initial]\nfile = "other.vtu"')
    case.write_text(text)
    assert main(["check", str(case)]) == 2
    err = capsys.readouterr().err
    assert "initial.file" in err and "other.vtu" in err and "do not match" in err


@pytest.mark.parametrize("content", ["not a mesh at all", ""])
def test_an_unreadable_field_file_is_an_input_error(tmp_path, content):
    case = load_case(make_case(tmp_path))
    (tmp_path / "bad.vtu").write_text(content)
    with pytest.raises(ValueError, match="bad.vtu"):
        read_nodal_field(tmp_path / "bad.vtu", case.problem.mesh)


def test_a_field_file_and_a_temperature_together_are_refused(tmp_path, capsys):
    case = make_case(tmp_path)
    run_case(load_case(case), tmp_path / "first")
    text = case.read_text().replace("[initial]\ntemperature = 20",
                                    '[initial]\ntemperature = 20\nfile = "first/temperature.xdmf"')
    case.write_text(text)
    assert main(["check", str(case)]) == 2
    assert "initial: give either file or temperature, not both" in capsys.readouterr().err
