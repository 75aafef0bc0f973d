"""Running a case: result files, field time series, cancellation, example cases."""

import csv
import json
import subprocess
import sys
from pathlib import Path

try:
    import tomllib
except ModuleNotFoundError:  # Python 3.10
    import tomli as tomllib

import meshio
import numpy as np
import pytest
from box_case import make_case
from heatsoak.core.app import runner
from heatsoak.core.app.cli import main
from heatsoak.core.case.casefile import case_from_data, load_case

MESHES = Path(__file__).resolve().parent.parent / "meshes"


def _read_csv(path):
    with open(path, newline="") as f:
        return list(csv.reader(f))


def _xdmf_steps(path):
    with meshio.xdmf.TimeSeriesReader(path) as r:
        points, cells = r.read_points_cells()
        data = [r.read_data(k) for k in range(r.num_steps)]
    return points, cells, [t for t, _, _ in data], [d["temperature"] for _, d, _ in data]


def test_run_writes_probes_regions_field_and_summary(tmp_path, capsys):
    path = make_case(tmp_path)
    assert main(["run", str(path), "--quiet"]) == 0
    out = tmp_path / "case-results"
    printed = capsys.readouterr().out
    assert "complete: 12 steps to t = 120 s" in printed
    assert "\nsolver " in printed and "unknowns" in printed  # auto's choice and its reason
    rows = _read_csv(out / "probes.csv")
    assert rows[0] == ["time", "core", "far"] and len(rows) == 14
    regions = _read_csv(out / "regions.csv")
    assert regions[0] == ["time", "region", "mean", "min", "max"] and len(regions) == 1 + 13 * 2
    points, cells, times, fields = _xdmf_steps(out / "temperature.xdmf")
    assert cells[0].type == "tetra" and len(points) == 60
    np.testing.assert_allclose(times, [0, 20, 40, 60, 80, 100, 120])  # output.every = 2
    summary = json.loads((out / "summary.json").read_text())
    assert summary["status"] == "complete" and summary["steps"] == 12 and summary["end_time"] == 120
    assert summary["temperature"]["max"]["value"] == pytest.approx(180.0)  # the ramp's end value at xmin
    assert summary["temperature"]["max"]["where"][0] == pytest.approx(0.0)
    assert "engineering estimates" in summary["note"]
    # conservation of energy: heat stored equals heat that entered
    assert summary["energy"]["relative_imbalance"] < 1e-9
    assert np.isclose(fields[-1].max(), 180.0)


def test_a_uniform_source_in_an_insulated_body_heats_it_at_f_over_rho_c(tmp_path):
    # Energy conservation with no losses: rho c dT/dt = f everywhere, T = T0 + f t / (rho c);
    # the theta-method is exact on a solution linear in time (common practice, no source).
    def change(d):
        d["material"] = {"*": {"density": 8000, "specific_heat": 500, "conductivity": 20, "source": 2e6}}
        d["boundary"] = {}
        d["output"]["every"] = 5

    path = make_case(tmp_path, change, order=2, shape=(2, 2, 1))
    summary = runner.run_case(load_case(path), tmp_path / "out")
    rows = np.array(_read_csv(tmp_path / "out" / "probes.csv")[1:], dtype=float)
    expected = 20 + 2e6 * rows[:, 0] / 4e6
    np.testing.assert_allclose(rows[:, 1:], np.column_stack([expected, expected]), rtol=1e-9)
    means = np.array([r[2] for r in _read_csv(tmp_path / "out" / "regions.csv")[1:]], dtype=float)
    np.testing.assert_allclose(means[-2:], [80.0, 80.0], rtol=1e-9)  # 20 + 2e6 * 120 / 4e6
    _, cells, times, _ = _xdmf_steps(tmp_path / "out" / "temperature.xdmf")
    assert cells[0].type == "tetra10"
    np.testing.assert_allclose(times, [0, 50, 100, 120])  # every 5 steps and always the last
    assert summary["field_steps_written"] == 4


def test_should_stop_cancels_after_k_steps_leaving_readable_files(tmp_path):
    case = load_case(make_case(tmp_path, lambda d: d["output"].update(every=1)))
    calls = []

    def stop():
        calls.append(1)
        return len(calls) > 3  # polled after t = 0 and after each step

    summary = runner.run_case(case, tmp_path / "out", should_stop=stop)
    assert summary["status"] == "cancelled" and summary["steps"] == 3 and summary["end_time"] == 30
    assert len(_read_csv(tmp_path / "out" / "probes.csv")) == 1 + 4
    _, _, times, fields = _xdmf_steps(tmp_path / "out" / "temperature.xdmf")
    np.testing.assert_allclose(times, [0, 10, 20, 30])
    assert fields[-1].max() == pytest.approx(20 + 160 * 30 / 60)  # the xmin ramp's value at t = 30 s
    assert json.loads((tmp_path / "out" / "summary.json").read_text())["status"] == "cancelled"


def test_ctrl_c_during_a_run_exits_130_with_status_cancelled(tmp_path, monkeypatch, capsys):
    class Interrupting(runner.TerminalProgress):
        def __call__(self, p):
            if p.step == 5:
                raise KeyboardInterrupt
            super().__call__(p)

    monkeypatch.setattr(runner, "TerminalProgress", Interrupting)
    path = make_case(tmp_path, lambda d: d["output"].update(every=3))
    assert main(["run", str(path), "--out", str(tmp_path / "r")]) == runner.EXIT_CANCELLED
    summary = json.loads((tmp_path / "r" / "summary.json").read_text())
    assert summary["status"] == "cancelled" and summary["steps"] == 4
    _, _, times, _ = _xdmf_steps(tmp_path / "r" / "temperature.xdmf")
    np.testing.assert_allclose(times, [0, 30, 40])  # every 3 steps, then the last one recorded
    assert "step" in capsys.readouterr().err  # the progress bar was drawn


EXAMPLES = sorted(MESHES.glob("*.toml"))


@pytest.mark.parametrize("path", EXAMPLES, ids=[p.stem for p in EXAMPLES])
def test_example_case_passes_check_and_runs_on_a_coarse_setting(path, tmp_path, capsys):
    assert main(["check", str(path)]) == 0, capsys.readouterr().err
    data = tomllib.loads(path.read_text())
    data["time"]["step"] = data["time"]["end"] / 3
    summary = runner.run_case(case_from_data(data, path.parent, path=path), tmp_path)
    assert summary["status"] == "complete" and summary["steps"] >= 3
    assert summary["energy"]["relative_imbalance"] < 1e-6


CRASH = """
import os, sys
sys.path.insert(0, sys.argv[3])
from heatsoak.core.app import runner
from heatsoak.core.case.casefile import load_case

def die(p):
    if p.step == 5:
        os._exit(3)  # no cleanup at all, like a crash or a kill

runner.run_case(load_case(sys.argv[1]), sys.argv[2], progress=die)
"""


def test_a_crash_mid_run_leaves_the_steps_before_it_readable(tmp_path):
    path = make_case(tmp_path, lambda d: d["output"].update(every=1))
    tests = str(Path(__file__).resolve().parent)
    done = subprocess.run([sys.executable, "-c", CRASH, str(path), str(tmp_path / "r"), tests], timeout=60, check=False)
    assert done.returncode == 3
    assert not (tmp_path / "r" / "summary.json").exists()
    _, _, times, fields = _xdmf_steps(tmp_path / "r" / "temperature.xdmf")
    np.testing.assert_allclose(times, [0, 10, 20, 30, 40])
    assert len(_read_csv(tmp_path / "r" / "probes.csv")) == 1 + 5
    assert fields[-1].max() == pytest.approx(20 + 160 * 40 / 60)
