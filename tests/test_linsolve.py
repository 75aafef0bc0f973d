"""Linear solvers: every path gives the same temperatures, the stopping rule holds, auto chooses sensibly."""

import numpy as np
import pytest
import scipy.sparse as sp
from heatsoak.core.errors import InputError
from heatsoak.core.fem.assembly import Assembler
from heatsoak.core.mesh.generate import box_mesh
from heatsoak.core.problem.problem import Boundary, Material, Problem, TimeSettings
from heatsoak.core.problem.schedule import Constant, Ramp
from heatsoak.core.solve import linear as linsolve
from heatsoak.core.solve.linear import CGSolver, DirectSolver, choose_solver, estimate_costs, stiffness_ratio
from heatsoak.core.solve.stepping import ThetaMethod
from scipy.special import erf

pytest.importorskip("pyamg")

ALPHA, K = 1e-5, 10.0
STEEL = Material(K / ALPHA, 1.0, K)
PATHS = ["superlu", "cholmod", "cg-jacobi", "cg-amg"]


def _solver_for(path, monkeypatch):
    """TimeSettings.solver name for a solver path; 'superlu' hides CHOLMOD."""
    if path == "cholmod" and not linsolve.cholmod_available():
        pytest.skip("scikit-sparse (CHOLMOD) is not installed")
    if path == "superlu":
        monkeypatch.setattr(linsolve, "cholmod_available", lambda: False)
    return "direct" if path in ("superlu", "cholmod") else path


def erf_bar(n=40, length=0.1):
    mesh = box_mesh((n, 1, 1), size=(length, length / n, length / n))
    return Problem(mesh, {"box": STEEL}, {"xmin": Boundary("temperature", Constant(100.0))}, initial=0.0)


def convection_box(n=8):
    """A 3-D box: convection on two sides, a heat flux ramp on a third, a source, a held side."""
    mesh = box_mesh((n, n, n), size=(0.05, 0.04, 0.03))
    mat = Material(K / ALPHA, 1.0, K, source=Constant(2e5))
    bcs = {
        "xmax": Boundary("convection", h=50.0, ambient=Constant(300.0)),
        "ymin": Boundary("convection", h=10.0, ambient=Constant(-20.0)),
        "zmax": Boundary("heat_flux", Ramp(0.0, 5e3, 0.0, 20.0)),
        "xmin": Boundary("temperature", Ramp(20.0, 80.0, 0.0, 30.0)),
    }
    return Problem(mesh, {"box": mat}, bcs, initial=20.0)


def final_field(problem, solver, end, step, theta=1.0):
    stepper = ThetaMethod(problem, TimeSettings(end=end, step=step, theta=theta, solver=solver))
    *_, (_, last) = stepper.steps()
    return last, stepper


@pytest.fixture(scope="module")
def erf_reference():
    return final_field(erf_bar(), "direct", end=40.0, step=1.0)[0]


@pytest.fixture(scope="module")
def box_reference():
    return final_field(convection_box(), "direct", end=60.0, step=2.0, theta=0.5)[0]


@pytest.mark.parametrize("path", PATHS)
def test_every_solver_gives_the_erf_bar_temperatures_of_the_direct_solver(path, monkeypatch, erf_reference):
    T, stepper = final_field(erf_bar(), _solver_for(path, monkeypatch), end=40.0, step=1.0)
    np.testing.assert_allclose(T, erf_reference, rtol=0, atol=1e-6)
    # and they are the semi-infinite solid's (Carslaw & Jaeger, Conduction of Heat in Solids,
    # 2nd ed., sec. 2.4, from memory) to the discretisation error, over the first 2 cm
    x = stepper.problem.mesh.points[:, 0]
    near = x < 0.02
    exact = 100.0 * (1.0 - erf(x[near] / (2.0 * np.sqrt(ALPHA * 40.0))))
    assert np.abs(T[near] - exact).max() < 1.5


@pytest.mark.parametrize("path", PATHS)
def test_every_solver_gives_the_convection_box_temperatures_of_the_direct_solver(path, monkeypatch, box_reference):
    T, _ = final_field(convection_box(), _solver_for(path, monkeypatch), end=60.0, step=2.0, theta=0.5)
    np.testing.assert_allclose(T, box_reference, rtol=0, atol=1e-6)
    assert T.max() - T.min() > 10.0  # the case is not trivially uniform


# -- the stopping rule ---------------------------------------------------------------------------


def _system(n=12, fourier=20.0):
    """A = M/dt + K on a unit cube with alpha dt / h^2 = fourier (alpha = 1)."""
    asm = Assembler(box_mesh((n, n, n)))
    K, M = asm.stiffness(1.0), asm.mass(1.0)
    dt = fourier / n**2
    return sp.csr_matrix(M / dt + K), K, M, dt


@pytest.mark.parametrize("pre", ["jacobi", "amg"])
def test_cg_stops_on_the_relative_residual_and_the_increment_is_then_exact_to_1e_7(pre):
    A, *_ = _system()
    rng = np.random.default_rng(1)
    exact = rng.standard_normal(A.shape[0])
    b = A @ exact
    s = CGSolver(A, pre)
    x = s.solve(b)
    r = b - A @ x
    scale = s.scale if s.scale is not None else np.ones_like(b)
    assert np.linalg.norm(r * scale) <= s.rtol * np.linalg.norm(b * scale) * (1 + 1e-6)
    assert np.linalg.norm(x - exact) <= 1e-7 * np.linalg.norm(exact)  # the docstring's bound
    assert s.iterations > 0


def test_cg_warm_started_at_the_answer_takes_no_iteration_and_near_it_few():
    A, *_ = _system()
    exact = np.linspace(0.0, 1.0, A.shape[0])
    b = A @ exact
    s = CGSolver(A, "jacobi")
    s.solve(b)
    cold = s.iterations
    s.solve(b, x0=exact)
    assert s.iterations == 0
    s.solve(b, x0=exact * (1 + 1e-4))
    assert 0 < s.iterations < cold


@pytest.mark.parametrize("pre", ["jacobi", "amg"])
def test_cg_error_of_a_step_is_far_below_its_time_discretisation_error(pre):
    # One backward-Euler step from a smooth field, solved for the increment as the stepper does.
    # Time error by step doubling (one step of dt against two of dt/2, common practice, no
    # source); the solver's error against the direct solver must be 1e6 times smaller.
    n = 10
    asm = Assembler(box_mesh((n, n, n)))
    K, M = asm.stiffness(1.0), asm.mass(1.0)
    x = asm.mesh.points
    T0 = np.cos(np.pi * x[:, 0]) * np.cos(np.pi * x[:, 1]) + x[:, 2]
    dt = 1.0 / n**2  # alpha dt / h^2 = 1

    def step(T, h, solver):
        A = sp.csr_matrix(M / h + K)
        return T + (solver(A).solve(-(K @ T)) if solver else DirectSolver(A).solve(-(K @ T)))

    one = step(T0, dt, None)
    two = step(step(T0, dt / 2, None), dt / 2, None)
    time_error = np.linalg.norm(one - two)
    solver_error = np.linalg.norm(step(T0, dt, lambda A: CGSolver(A, pre)) - one)
    assert solver_error < 1e-6 * time_error


# -- auto ------------------------------------------------------------------------------------------


def test_auto_takes_the_direct_solver_for_a_small_system_and_says_why():
    name, reason = choose_solver(2000, "auto", ratio=15.0, steps=1000)
    assert name == "direct"
    assert "2000 unknowns" in reason and "direct" in reason


def test_auto_takes_a_krylov_solver_when_the_factor_would_not_fit(monkeypatch):
    monkeypatch.setattr(linsolve, "cholmod_available", lambda: True)  # the cost model of the CHOLMOD backend
    name, reason = choose_solver(30_000, "auto", ratio=1500.0, steps=1000, budget_gb=0.05)
    assert name in ("cg-jacobi", "cg-amg")
    assert "direct left out" in reason
    assert choose_solver(30_000, "auto", ratio=1500.0, steps=1000, budget_gb=100.0)[0] == "direct"


def test_auto_takes_jacobi_for_short_steps_and_multigrid_for_long_ones_on_a_large_mesh(monkeypatch):
    monkeypatch.setattr(linsolve, "cholmod_available", lambda: True)  # the cost model of the CHOLMOD backend
    short = estimate_costs(270_000, 15 * 270_000, 15.0, 1000, budget_gb=100.0)
    long = estimate_costs(270_000, 15 * 270_000, 15.0 * 100, 1000, budget_gb=100.0)
    assert min(short, key=short.get) == "cg-jacobi"
    assert min(long, key=long.get) == "cg-amg"
    assert long["cg-jacobi"] > 1.5 * long["cg-amg"]
    # on a small mesh the factor's triangular solves beat both for long steps
    small = estimate_costs(9_000, 15 * 9_000, 15.0 * 20, 1000, budget_gb=100.0)
    assert min(small, key=small.get) == "direct"


def _fixed_costs(monkeypatch, **costs):
    monkeypatch.setattr(linsolve, "estimate_costs", lambda *a, **k: dict(costs))


def test_near_ties_go_to_krylov_when_the_factor_is_big_and_quick_runs_to_direct(monkeypatch):
    n_big = 100_000  # a factor of some 0.5 GB
    assert linsolve.factor_memory_gb(n_big) > linsolve.SMALL_FACTOR_GB
    _fixed_costs(monkeypatch, direct=10.0, **{"cg-amg": 11.5, "cg-jacobi": 30.0})
    name, reason = choose_solver(n_big, "auto")
    assert name == "cg-amg"
    assert "within 1.2x of direct" in reason
    _fixed_costs(monkeypatch, direct=10.0, **{"cg-amg": 13.0, "cg-jacobi": 30.0})
    assert choose_solver(n_big, "auto")[0] == "direct"
    # a small factor costs nothing worth saving: the fastest is taken
    assert linsolve.factor_memory_gb(5_000) < linsolve.SMALL_FACTOR_GB
    assert choose_solver(5_000, "auto")[0] == "direct"
    _fixed_costs(monkeypatch, direct=11.5, **{"cg-amg": 30.0, "cg-jacobi": 10.0})
    assert choose_solver(5_000, "auto")[0] == "cg-jacobi"
    # and a run short either way goes to the exact solver
    _fixed_costs(monkeypatch, direct=0.5, **{"cg-amg": 0.6, "cg-jacobi": 0.2})
    name, reason = choose_solver(5_000, "auto")
    assert name == "direct" and "exact to round-off" in reason


def test_without_cholmod_the_slower_superlu_factor_loses_to_krylov_earlier(monkeypatch):
    monkeypatch.setattr(linsolve, "cholmod_available", lambda: True)
    with_cholmod = estimate_costs(270_000, 15 * 270_000, 1500.0, 1000, budget_gb=100.0)
    monkeypatch.setattr(linsolve, "cholmod_available", lambda: False)
    without = estimate_costs(270_000, 15 * 270_000, 1500.0, 1000, budget_gb=100.0)
    assert without["direct"] > with_cholmod["direct"]
    assert without["cg-jacobi"] == with_cholmod["cg-jacobi"]


def test_a_factor_of_a_3d_mesh_grows_like_n_to_the_four_thirds():
    ratio = linsolve.factor_memory_gb(8 * 10**5) / linsolve.factor_memory_gb(10**5)
    assert ratio == pytest.approx(16.0)  # nested dissection on a 3-D grid, common practice, no source


def test_a_named_solver_is_kept_and_an_unknown_one_is_refused():
    assert choose_solver(10**6, "cg-amg") == ("cg-amg", "chosen by the user")
    with pytest.raises(InputError, match="magic"):
        choose_solver(10, "magic")


def test_the_stiffness_ratio_is_15_fourier_numbers_on_the_box_grid():
    n = 10
    asm = Assembler(box_mesh((n, n, n)))
    K, M = asm.stiffness(1.0), asm.mass(1.0)
    assert stiffness_ratio(K.diagonal(), M.diagonal(), dt=2.0 / n**2, theta=1.0) == pytest.approx(30.0)


def test_the_stepper_reports_the_choice_and_its_reason():
    _, stepper = final_field(erf_bar(n=10), "auto", end=2.0, step=1.0)
    report = stepper.report()
    assert report["solver"] in linsolve.SOLVERS
    assert "unknowns" in report["reason"]


# -- factorisations --------------------------------------------------------------------------------


@pytest.mark.parametrize("solver", ["direct", "cg-jacobi", "cg-amg"])
def test_each_distinct_step_builds_its_solver_once(solver):
    # Crank-Nicolson with the backward-Euler start: (dt/2, theta 1) and (dt, theta 1/2)
    _, stepper = final_field(erf_bar(n=10), solver, end=20.0, step=1.0, theta=0.5)
    assert stepper.factorizations == 2
    assert stepper.step_count == 22


def test_a_long_run_of_equal_steps_factorises_once_despite_rounding_of_the_step_times():
    # t_new - t of steps k dt drifts in the last bits as t grows; it is still one step size
    problem = erf_bar(n=5)
    stepper = ThetaMethod(problem, TimeSettings(end=41.3 * 1000, step=41.3, theta=1.0, solver="direct"))
    times = [t for t, _ in stepper.steps()]
    assert len(np.unique(np.diff(times))) > 1  # the drift is there
    assert stepper.factorizations == 1


# -- warm start --------------------------------------------------------------------------------------


def test_the_warm_start_is_exact_for_a_rate_linear_in_time_and_scales_a_lone_increment():
    from heatsoak.core.solve.stepping.theta import warm_start

    rate = lambda t: np.array([2.0 + 3.0 * t, -1.0 * t])  # increment / step, linear in time
    # steps [0, 1] and [1, 1.5], then the step [1.5, 2.3]; the increment of a step is rate(mid) * dt
    rates = [(0.5, rate(0.5)), (1.25, rate(1.25))]
    np.testing.assert_allclose(warm_start(rates, 1.5, 0.8), rate(1.9) * 0.8, rtol=1e-14)
    np.testing.assert_allclose(warm_start(rates[-1:], 1.5, 0.8), rate(1.25) * 0.8)
    assert warm_start([], 0.0, 1.0) is None


def test_the_extrapolated_warm_start_saves_iterations_without_changing_the_answer(monkeypatch):
    from heatsoak.core.solve.stepping import theta as theta_module

    def run(problem, settings):
        stepper, counts = ThetaMethod(problem, settings), []
        for _ in stepper.steps():
            counts += [s.iterations for s in stepper._solvers.values()][-1:]
        return _, counts

    problem = convection_box(n=10)
    settings = TimeSettings(end=400.0, step=10.0, theta=1.0, solver="cg-jacobi")  # alpha dt / h^2 = 4
    (_, T_two), two = run(problem, settings)
    monkeypatch.setattr(theta_module, "warm_start", lambda rates, t, dt: rates[-1][1] * dt if rates else None)
    (_, T_one), one = run(problem, settings)
    assert sum(two) < 0.95 * sum(one)  # 8% fewer here; about 20% on the benchmark cube
    np.testing.assert_allclose(T_two, T_one, rtol=0, atol=1e-6)


def test_multigrid_iterations_are_estimated_higher_for_quadratic_cells():
    # measured on the same cube: 13-21 iterations for quadratic cells against 8-11 for linear ones
    linear = linsolve.krylov_iterations(300.0, 35_000, per_row=14.0)
    quadratic = linsolve.krylov_iterations(300.0, 35_000, per_row=27.0)
    assert quadratic["cg-amg"] == pytest.approx(linear["cg-amg"] * (27 / 14) ** 0.8)
    assert quadratic["cg-jacobi"] == linear["cg-jacobi"]


def test_auto_never_picks_multigrid_without_pyamg(monkeypatch):
    monkeypatch.setattr(linsolve, "cholmod_available", lambda: True)
    monkeypatch.setattr(linsolve, "amg_available", lambda: False)
    costs = estimate_costs(270_000, 15 * 270_000, 1500.0, 1000, budget_gb=0.0)
    assert "cg-amg" not in costs
    assert choose_solver(270_000, "auto", ratio=1500.0, steps=1000, budget_gb=0.0)[0] == "cg-jacobi"
