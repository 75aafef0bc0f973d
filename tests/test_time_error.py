"""The time-step error estimate against the true time error, and adaptive steps against their tolerance.

The true time error of a run is its difference from the same problem on the
same mesh run with a step 32x smaller (whose own time error is 1/32 of the
run's for backward Euler and about 1/1000 for Crank-Nicolson). The estimate
must be within a factor 3 of it, per probe (largest over the run) and for the
field (largest over nodes and steps).
"""

import json
import shutil
from pathlib import Path

import numpy as np
import pytest
from heatsoak.core.app.runner import run_case
from heatsoak.core.case.casefile import load_case
from heatsoak.core.mesh.generate import box_mesh
from heatsoak.core.mesh.read import read_mesh
from heatsoak.core.problem.problem import Boundary, Material, Problem, TimeSettings
from heatsoak.core.problem.schedule import Constant, Ramp, Table
from heatsoak.core.results.probes import ProbeSet
from heatsoak.core.solve.stepping import ThetaMethod

ALPHA, K = 1e-5, 10.0
STEEL_LIKE = Material(K / ALPHA, 1.0, K)
MESHES = Path(__file__).resolve().parent.parent / "meshes"
R = 0.05  # m, radius of the sphere and the cylinder: R^2 / alpha = 250 s


def _run(problem, end, dt, theta, tolerance=None):
    """(times (n,), states (n, nodes), estimates (n, nodes), stepper)."""
    s = ThetaMethod(problem, TimeSettings(end=end, step=dt, theta=theta, error_estimate=True, tolerance=tolerance))
    out = [(t, T, s.estimator.error.copy()) for t, T in s.steps()]
    return np.array([o[0] for o in out]), np.array([o[1] for o in out]), np.array([o[2] for o in out]), s


def _reference(problem, end, dt, times):
    """Crank-Nicolson states with step ``dt`` at ``times`` (on its grid), (n, nodes)."""
    s = ThetaMethod(problem, TimeSettings(end=end, step=dt, theta=0.5, output_times=tuple(times)))
    keep = {t: T for t, T in s.steps()}
    return np.array([keep[t] for t in times])


def _gmsh_body(path, kind, size):
    gmsh = pytest.importorskip("gmsh")
    gmsh.initialize(["", "-nopopup"])
    try:
        gmsh.option.setNumber("General.Terminal", 0)
        gmsh.option.setNumber("General.NumThreads", 1)
        occ = gmsh.model.occ
        vol = occ.addSphere(0, 0, 0, R) if kind == "sphere" else occ.addCylinder(0, 0, -R, 0, 0, 2 * R, R)
        occ.synchronize()
        gmsh.model.addPhysicalGroup(3, [vol], name="body")
        gmsh.model.addPhysicalGroup(2, [t for _, t in gmsh.model.getBoundary([(3, vol)])], name="skin")
        gmsh.option.setNumber("Mesh.MeshSizeMin", size)
        gmsh.option.setNumber("Mesh.MeshSizeMax", size)
        gmsh.model.mesh.generate(3)
        gmsh.write(str(path))
    finally:
        gmsh.finalize()
    return read_mesh(path)


def _ramp_case(kind, tmp_path):
    """(problem, end [s], step [s], probe points) of a ramp-and-hold of the surface, 20 -> 120 degC."""
    ramp = Boundary("temperature", Ramp(20.0, 120.0, 0.0, 100.0))
    if kind == "bar":
        mesh = box_mesh((40, 1, 1), size=(0.25, 0.25 / 40, 0.25 / 40))
        problem = Problem(mesh, {"box": STEEL_LIKE}, {"xmin": ramp}, initial=20.0)
        return problem, 200.0, 10.0, [[0.02, 0.0, 0.0], [0.05, 0.0, 0.0]]
    mesh = _gmsh_body(tmp_path / f"{kind}.msh", kind, R / 3)
    problem = Problem(mesh, {"body": STEEL_LIKE}, {"skin": ramp}, initial=20.0)
    return problem, 200.0, 10.0, [[0.0, 0.0, 0.0], [0.5 * R, 0.0, 0.0]]


@pytest.mark.parametrize("theta", [1.0, 0.5])
@pytest.mark.parametrize("kind", ["bar", "sphere", "cylinder"])
def test_the_estimate_is_within_a_factor_3_of_the_true_time_error(tmp_path, kind, theta):
    # Richardson extrapolation from a companion at half the step (Hairer, Norsett & Wanner I,
    # sec. II.4, from memory); the true error is measured, not assumed.
    problem, end, dt, points = _ramp_case(kind, tmp_path)
    times, T, E, _ = _run(problem, end, dt, theta)
    true = T - _reference(problem, end, dt / 32, times)
    probes = ProbeSet(problem.mesh, points, ["a", "b"])
    true_p = np.abs(np.array([probes.values(x) for x in true])).max(axis=0)
    est_p = np.abs(np.array([probes.values(x) for x in E])).max(axis=0)
    assert np.all(true_p > 1e-3)  # the runs do have a time error to estimate
    assert np.all((est_p > true_p / 3) & (est_p < 3 * true_p)), (est_p, true_p)
    true_f, est_f = np.abs(true).max(), np.abs(E).max()
    assert true_f / 3 < est_f < 3 * true_f, (est_f, true_f)


@pytest.mark.parametrize("theta", [1.0, 0.5])
@pytest.mark.parametrize("schedule", ["ramp", "table", "jump"])
def test_an_adaptive_run_meets_its_tolerance_against_a_32x_finer_run(schedule, theta):
    # The reference is Crank-Nicolson with 1/32 of the smallest step the adaptive run took
    # (at least 1/32 of 1/16 of its largest), sampled at the adaptive times.
    sched = {"ramp": Ramp(0.0, 100.0, 0.0, 50.0), "table": Table([0, 20, 50, 80], [0, 40, 40, 10]),
             "jump": Constant(100.0)}[schedule]
    mesh = box_mesh((20, 1, 1), size=(0.25, 0.25 / 20, 0.25 / 20))
    problem = Problem(mesh, {"box": STEEL_LIKE}, {"xmin": Boundary("temperature", sched)}, initial=0.0)
    tol, dt_max = 0.1, 20.0
    times, T, E, stepper = _run(problem, 100.0, dt_max, theta, tolerance=tol)
    dt_ref = max(np.diff(times).min(), dt_max / 16) / 32
    ref = ThetaMethod(problem, TimeSettings(end=100.0, step=dt_ref, theta=0.5))
    tr, Tr = zip(*ref.steps())
    Tr = np.array([np.interp(times, tr, col) for col in np.array(Tr).T]).T
    assert np.abs(T - Tr).max() < tol
    assert np.abs(E).max() < tol
    steps = np.diff(times)
    assert steps.max() >= 8 * steps.min()  # the step did grow and shrink
    assert stepper.energy()["relative_imbalance"] < 1e-10


def test_adaptive_steps_land_on_every_corner_and_output_time_and_reuse_their_factors():
    mesh = box_mesh((20, 1, 1), size=(0.25, 0.25 / 20, 0.25 / 20))
    corners = [0.0, 17.0, 50.0, 83.3]
    problem = Problem(mesh, {"box": STEEL_LIKE},
                      {"xmin": Boundary("temperature", Table(corners, [0, 40, 40, 10]))}, initial=0.0)
    s = ThetaMethod(problem, TimeSettings(end=100.0, step=10.0, tolerance=0.05, output_times=(33.3, 61.0)))
    times = np.array([t for t, _ in s.steps()])
    for mark in [17.0, 50.0, 83.3, 33.3, 61.0, 100.0]:
        assert mark in times
    steps = np.diff(times)
    assert steps.max() <= 10.0
    # apart from one step cut short to land on each of the six marks, every step is 10 s / 2^k
    k = np.log2(10.0 / steps)
    whole = np.abs(k - np.round(k)) < 1e-9
    assert np.count_nonzero(~whole) <= 6
    assert s.factorizations < len(steps) / 2


@pytest.fixture
def demo_copy(tmp_path):
    """The demo case (and the files it names) copied to a fresh folder; the case file's path."""
    for name in ("platen_warmup.toml", "platen.msh", "platen_base.csv"):
        shutil.copy(MESHES / name, tmp_path / name)
    return tmp_path / "platen_warmup.toml"


def test_the_summary_and_the_printout_carry_the_estimate(tmp_path, demo_copy, capsys):
    from heatsoak.core.app.cli import main

    text = demo_copy.read_text()
    demo_copy.write_text(text.replace("\nstep = 20", "\ntolerance = 0.05\nstep = 200"))
    case = load_case(demo_copy)
    assert case.time.tolerance == 0.05 and case.time.step == 200
    assert main(["run", str(demo_copy), "--out", str(tmp_path / "out"), "--quiet"]) == 0
    summary = json.loads((tmp_path / "out" / "summary.json").read_text())
    assert set(summary["time_error"]) == {p.name for p in case.probes}
    assert all(0 <= e < 0.05 for e in summary["time_error"].values())
    assert summary["steps"] > 0 and summary["solver"]["factorizations"] >= 1
    printed = capsys.readouterr().out
    assert "time-step error at most" in printed and "adaptive steps to 0.05 K" in printed


def test_a_fixed_step_run_reports_its_estimate_per_probe(tmp_path, demo_copy):
    summary = run_case(load_case(demo_copy), tmp_path / "out")
    assert summary["steps"] == 180
    assert set(summary["time_error"]) == {"top-mid", "rim", "sleeve"}
    assert max(summary["time_error"].values()) > 0


def test_the_bench_compares_adaptive_steps_with_the_fixed_step_of_the_same_accuracy():
    from heatsoak.core.app.bench_time import measure_case, time_error_rows

    mesh = box_mesh((20, 1, 1), size=(0.25, 0.25 / 20, 0.25 / 20))
    ramp = Boundary("temperature", Ramp(20.0, 120.0, 0.0, 50.0))
    problem = Problem(mesh, {"box": STEEL_LIKE}, {"xmin": ramp}, initial=20.0)
    probes = ProbeSet(mesh, [[0.02, 0.0, 0.0]], ["p"])
    rec = measure_case("bar", problem, TimeSettings(end=400.0, step=10.0), probes, 1.0, tolerance=0.5, ref_steps=1000)
    assert 0 < rec["fixed_error_K"] <= rec["adaptive_error_K"] < rec["tolerance_K"]
    # ramp and hold: the fixed step must be the smallest the adaptive run needed, held for the whole run
    assert rec["fixed_steps"] > rec["adaptive_steps"]
    assert [row[1] for row in time_error_rows([rec], str)] == [
        "adaptive BE, tolerance 0.5 K", "fixed BE step of the same error", "time-step error estimate, fixed BE"]


def test_a_tolerance_alone_sets_the_largest_step_and_a_bad_one_is_named(demo_copy):
    from heatsoak.core.case.casefile import check_case

    text = demo_copy.read_text()
    demo_copy.write_text(text.replace("\nstep = 20\n", "\ntolerance = 0.05\n"))
    case = load_case(demo_copy)
    assert case.time.tolerance == 0.05 and case.time.step == 3600 / 32
    demo_copy.write_text(text.replace("\nstep = 20\n", "\ntolerance = -1\n"))
    assert [i.message.split(": ", 1)[1] for i in check_case(demo_copy)] == [
        "time.tolerance: -1 is not allowed; must be > 0"]
    demo_copy.write_text(text.replace("\nstep = 20\n", "\n"))
    messages = [i.message for i in check_case(demo_copy)]
    assert any("time.step: missing; give a step [s], or a tolerance [K]" in m for m in messages)
