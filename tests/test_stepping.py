"""Behaviour of the theta-method stepper: time grid, factorisations, stability, start, control."""

import numpy as np
import pytest
import scipy.linalg as sla
from heatsoak.core.errors import InputError, StabilityError
from heatsoak.core.fem.operators import left_value
from heatsoak.core.mesh.generate import box_mesh
from heatsoak.core.problem.problem import Boundary, Material, Problem, TimeSettings
from heatsoak.core.problem.schedule import Constant, Ramp, Table
from heatsoak.core.solve.stepping import ThetaMethod, lambda_max, step_times
from heatsoak.core.solve.stepping.base import MERGE

ALPHA, K = 1e-5, 10.0
MAT = Material(K / ALPHA, 1.0, K)


def bar(n=20, length=0.1, order=1, regions=None):
    return box_mesh((n, 1, 1), size=(length, length / n, length / n), order=order, regions=regions)


def end_held(value=100.0, mesh=None, initial=0.0, **more):
    mesh = mesh if mesh is not None else bar()
    bcs = {"xmin": Boundary("temperature", value if hasattr(value, "breakpoints") else Constant(value))}
    bcs.update(more)
    return Problem(mesh, {"box": MAT}, bcs, initial=initial)


def run(problem, **settings):
    stepper = ThetaMethod(problem, TimeSettings(**settings))
    return stepper, list(stepper.steps())


# -- time grid ---------------------------------------------------------------------------------


def test_step_times_are_the_grid_with_marks_and_the_end():
    t = step_times(1.0, 0.25, marks=[0.6, 2.0, -1.0])
    np.testing.assert_array_equal(t, [0.25, 0.5, 0.6, 0.75, 1.0])


def test_a_mark_next_to_a_grid_point_replaces_it_without_a_sliver_step():
    dt = 0.1
    mark = 0.3 + 0.1 * MERGE * dt
    t = step_times(1.0, dt, marks=[mark])
    assert mark in t
    assert np.diff(np.concatenate([[0.0], t])).min() > 0.5 * dt
    assert len(t) == 10


def test_many_marks_near_grid_points_all_land_exactly_and_no_step_is_a_sliver():
    dt = 0.01
    rng = np.random.default_rng(5)
    grid_marks = dt * rng.choice(np.arange(1, 1000), 300, replace=False) * (1 + 0.3 * MERGE)
    free_marks = rng.uniform(0.0, 10.0, 300)
    t = step_times(10.0, dt, marks=np.concatenate([grid_marks, free_marks, grid_marks]))
    assert np.isin(grid_marks, t).all() and np.isin(free_marks, t).all()
    assert np.diff(np.concatenate([[0.0], t])).min() > MERGE * dt
    assert t[-1] == 10.0 and np.all(np.diff(t) > 0)


def test_a_run_of_too_many_steps_is_refused_before_it_starts():
    with pytest.raises(InputError, match="1e-300 s gives .* steps; at most 10000000"):
        step_times(1.0, 1e-300)


def test_steps_land_exactly_on_breakpoints_and_output_times():
    table = Table([0.0, 1.7, 4.05, 6.0], [0.0, 50.0, 50.0, 10.0])
    wanted = (2.2, 7.77)
    stepper, out = run(end_held(table), end=10.0, step=1.0, theta=1.0, output_times=wanted)
    times = [t for t, _ in out]
    for mark in (1.7, 4.05, 6.0, *wanted, 10.0):
        assert mark in times  # exact equality: probes and outputs read these steps
    assert times == sorted(times) and times[0] == 0.0
    assert stepper.status == "complete" and stepper.step_count == len(times) - 1


def test_schedules_are_seen_from_inside_the_step_at_its_end():
    # A step ending on a jump sees the old value; on a corner, the value itself.
    jump, ramp = Ramp(5.0, 9.0, 2.0, 0.0), Ramp(0.0, 10.0, 1.0, 4.0)
    assert left_value(jump, 1.0, 2.0) == 5.0 and jump(2.0) == 9.0
    assert left_value(ramp, 4.0, 5.0) == pytest.approx(10.0, rel=1e-15)
    assert left_value(ramp, 0.0, 0.5) == 0.0


def test_only_value_jumps_restart_the_backward_euler_steps():
    problem = end_held(Ramp(0.0, 50.0, 3.0, 2.0), xmax=Boundary("heat_flux", Ramp(0.0, 1e3, 7.0, 0.0)))
    ops = ThetaMethod(problem, TimeSettings(end=10.0, step=1.0)).ops
    np.testing.assert_array_equal(ops.jumps(), [7.0])
    np.testing.assert_array_equal(ops.breakpoints(), [3.0, 5.0, 7.0])


# -- factorisations ----------------------------------------------------------------------------


def test_backward_euler_with_a_fixed_step_factorises_once():
    stepper, out = run(end_held(), end=20.0, step=1.0, theta=1.0)
    assert len(out) == 21
    assert stepper.factorizations == 1


def test_one_factorisation_per_distinct_step_when_a_ramp_corner_is_off_the_grid():
    # corner at 2.3 s on a 1 s grid: steps of 1, 0.3 (2 -> 2.3) and 0.7 (2.3 -> 3)
    stepper, out = run(end_held(Ramp(0.0, 100.0, 0.0, 2.3)), end=10.0, step=1.0, theta=1.0)
    dts = np.diff([t for t, _ in out])
    assert len(np.unique(np.round(dts, 9))) == 3
    assert stepper.factorizations == 3


def test_crank_nicolson_with_the_backward_euler_start_factorises_twice():
    stepper, out = run(end_held(), end=20.0, step=1.0, theta=0.5)
    times = [t for t, _ in out]
    assert times[:6] == [0.0, 0.5, 1.0, 1.5, 2.0, 3.0]  # four half steps, then full steps
    assert stepper.factorizations == 2  # (dt/2, backward Euler) and (dt, Crank-Nicolson)
    assert stepper.report()["start_steps"] == 4


def test_lumped_forward_euler_needs_no_factorisation_beyond_a_diagonal():
    stepper, _ = run(end_held(), end=1.0, step=0.01, theta=0.0, mass="lumped")
    assert stepper.factorizations == 1
    assert next(iter(stepper._solvers.values())).name == "diagonal"


# -- stability of explicit steps ---------------------------------------------------------------


@pytest.mark.parametrize("mass", ["consistent", "lumped"])
def test_lambda_max_matches_a_dense_generalised_eigensolver(mass):
    # scipy.linalg.eigh on the dense pencil (K_ff, M_ff): the sparse path is used above 50 unknowns.
    mesh = box_mesh((6, 2, 2), size=(0.3, 0.1, 0.1))
    stepper = ThetaMethod(end_held(mesh=mesh), TimeSettings(end=1.0, step=1.0, mass=mass))
    K = stepper._Kff.toarray()
    M = np.diag(stepper._Mff) if mass == "lumped" else stepper._Mff.toarray()
    assert K.shape[0] > 50
    dense = sla.eigh(K, M, eigvals_only=True)[-1]
    assert lambda_max(stepper._Kff, stepper._Mff) == pytest.approx(dense, rel=1e-6)  # its Lanczos tolerance


def _limit_and_norms(mass, theta, factor, monkeypatch=None):
    """Stability limit from a dense eigensolver, and the M-norms of T - 100 over a run at factor * limit.

    The start is noisy so that every mode, the highest included, is present.
    """
    noise = np.random.default_rng(7).uniform(-50.0, 50.0, bar().n_nodes)
    problem = end_held(initial=100.0 + noise)
    probe = ThetaMethod(problem, TimeSettings(end=1.0, step=1.0, theta=1.0, mass=mass))
    M = np.diag(probe._Mff) if mass == "lumped" else probe._Mff.toarray()
    limit = 2.0 / ((1.0 - 2.0 * theta) * sla.eigh(probe._Kff.toarray(), M, eigvals_only=True)[-1])
    if monkeypatch is not None:
        monkeypatch.setattr(ThetaMethod, "_check_stability", lambda self: None)
    stepper, out = run(problem, end=300 * factor * limit, step=factor * limit, theta=theta, mass=mass)
    f = probe.ops.free
    norms = np.array([np.sqrt((T[f] - 100.0) @ M @ (T[f] - 100.0)) for _, T in out])
    return limit, stepper, norms


@pytest.mark.parametrize("mass", ["consistent", "lumped"])
@pytest.mark.parametrize("theta", [0.0, 0.25])
def test_explicit_step_above_the_limit_raises_and_names_it(mass, theta):
    # Common practice, no source: the theta-method is stable for dt <= 2 / ((1 - 2 theta) lambda_max).
    limit, stepper, _ = _limit_and_norms(mass, theta, 0.99)
    assert stepper.dt_critical == pytest.approx(limit, rel=1e-6)
    with pytest.raises(StabilityError) as err:
        ThetaMethod(end_held(), TimeSettings(end=1.0, step=1.01 * limit, theta=theta, mass=mass))
    assert f"{limit:.4g} s" in str(err.value)


@pytest.mark.parametrize("mass", ["consistent", "lumped"])
def test_explicit_step_just_below_the_limit_never_grows_the_m_norm(mass):
    # Below the limit every mode is multiplied by |1 - dt lambda| <= 1 per step, so the
    # M-norm of the distance to the steady state (100 degC) cannot grow.
    _, _, norms = _limit_and_norms(mass, 0.0, 0.99)
    assert len(norms) == 301
    assert np.all(np.diff(norms) <= 1e-12 * norms[0])


def test_explicit_step_just_above_the_limit_would_grow(monkeypatch):
    # The limit is sharp: with the check switched off, 10 % above it the highest mode is
    # multiplied by 1 - 2.2 = -1.2 per step and the run diverges.
    _, _, norms = _limit_and_norms("lumped", 0.0, 1.1, monkeypatch)
    assert norms[-1] > 1e10 * norms[0]


def test_theta_at_least_one_half_has_no_step_limit():
    stepper, out = run(end_held(), end=1e4, step=1e3, theta=0.5)
    assert stepper.dt_critical is None
    assert np.isfinite(out[-1][1]).all()


# -- Crank-Nicolson start after a sudden change ------------------------------------------------


def _extremes(start_steps):
    # bar at 100 degC whose end drops to 0 at t = 0; alpha dt / h^2 = 8: the stiff modes ring.
    problem = end_held(0.0, initial=100.0)
    _, out = run(problem, end=200.0, step=20.0, theta=0.5, start_steps=start_steps)
    fields = np.array([T for _, T in out[1:]])
    return fields.min(), fields.max()


def test_crank_nicolson_rings_after_a_sudden_change_without_the_backward_euler_start():
    # The CN amplification factor tends to -1 for stiff modes (common practice, no source):
    # the node next to the cooled end swings below the new end temperature (measured -26 K).
    low, _ = _extremes(0)
    assert low < -10.0


def test_backward_euler_start_damps_the_ringing():
    # Rannacher's start (common practice, no source): no undershoot, no overshoot.
    low, high = _extremes(None)
    assert low > -1e-9
    assert high < 100.0 + 1e-9


@pytest.mark.parametrize("at", [100.0, 110.0])
def test_backward_euler_start_also_follows_a_jump_after_the_start(at):
    # The same drop as above at 100 s (on the 20 s grid) or 110 s (off it): Crank-Nicolson
    # without half steps rings (measured -26 K and -8.4 K); with them, restarted at the jump, not at all.
    problem = end_held(Ramp(100.0, 0.0, at, 0.0), initial=100.0)
    _, plain = run(problem, end=400.0, step=20.0, theta=0.5, start_steps=0)
    stepper, damped = run(problem, end=400.0, step=20.0, theta=0.5)
    assert min(T.min() for _, T in plain) < -5.0
    assert min(T.min() for _, T in damped) > -1e-9
    times = [t for t, _ in damped]
    i = times.index(at)
    assert times[i + 1] - at <= 10.0  # half steps right after the jump
    assert stepper.energy()["relative_imbalance"] < 1e-12


# -- run control -------------------------------------------------------------------------------


def test_cancel_between_steps_ends_the_generator():
    stepper = ThetaMethod(end_held(), TimeSettings(end=100.0, step=1.0))
    seen = []
    for t, _ in stepper.steps():
        seen.append(t)
        if len(seen) == 4:
            stepper.cancel()
    assert seen == [0.0, 1.0, 2.0, 3.0]
    assert stepper.status == "cancelled"
    assert stepper.step_count == 3


def test_progress_reports_increasing_fractions_ending_at_one():
    reports = []
    stepper = ThetaMethod(end_held(), TimeSettings(end=10.0, step=0.5, theta=1.0), progress=reports.append)
    out = list(stepper.steps())
    fractions = [r.fraction for r in reports]
    assert len(reports) == len(out) - 1
    assert np.all(np.diff(fractions) > 0)
    assert fractions[-1] == 1.0
    assert reports[-1].eta_s == 0.0
    assert [r.step for r in reports] == list(range(1, len(reports) + 1))


def test_status_is_complete_after_a_full_run():
    stepper, _ = run(end_held(), end=3.0, step=1.0, theta=0.5)
    assert stepper.status == "complete"
    assert stepper.report()["steps"] == stepper.step_count == 5  # 4 half steps (to 2 s) + 1


def test_initial_temperature_per_region():
    mesh = bar(regions=lambda c: ((c[:, 0] > 0.05).astype(int), ("left", "right")))
    problem = Problem(mesh, {"left": MAT, "right": MAT}, {}, initial={"left": 10.0, "right": 30.0})
    T0 = next(ThetaMethod(problem, TimeSettings(end=1.0, step=1.0)).steps())[1]
    x = mesh.points[:, 0]
    np.testing.assert_array_equal(T0[x < 0.049], 10.0)
    np.testing.assert_array_equal(T0[x > 0.051], 30.0)
    shared = T0[np.isclose(x, 0.05)]
    assert np.all((shared > 10.0) & (shared < 30.0))


def test_initial_temperature_missing_for_a_region_is_an_input_error():
    mesh = bar(regions=lambda c: ((c[:, 0] > 0.05).astype(int), ("left", "right")))
    problem = Problem(mesh, {"left": MAT, "right": MAT}, {}, initial={"left": 10.0})
    with pytest.raises(InputError, match="right"):
        ThetaMethod(problem, TimeSettings(end=1.0, step=1.0))


def test_prescribed_nodes_take_their_schedule_value_at_the_start():
    T0 = next(ThetaMethod(end_held(75.0, initial=20.0), TimeSettings(end=1.0, step=1.0)).steps())[1]
    mesh = bar()
    np.testing.assert_array_equal(T0[mesh.group_nodes("xmin")], 75.0)
    assert np.count_nonzero(T0 == 20.0) == mesh.n_nodes - 4


@pytest.mark.parametrize("settings", [{"theta": 1.5}, {"theta": -0.1}, {"step": 0.0}, {"end": -1.0}])
def test_bad_time_settings_are_input_errors(settings):
    base = {"end": 1.0, "step": 0.1, "theta": 1.0}
    base.update(settings)
    with pytest.raises(InputError):
        ThetaMethod(end_held(), TimeSettings(**base))


def test_a_run_in_which_nothing_happens_reports_no_imbalance():
    # the held temperature equals the initial one until after the end: no heat moves, and the
    # round-off of zero heat must not read as a 100% imbalance
    mesh = box_mesh((3, 2, 2))
    bcs = {"xmin": Boundary("temperature", Ramp(20.0, 80.0, 100.0, 10.0))}
    problem = Problem(mesh, {"box": Material(1000.0, 500.0, 20.0)}, bcs, initial=20.0)
    stepper = ThetaMethod(problem, TimeSettings(end=50.0, step=5.0))
    *_, (_, T) = stepper.steps()
    np.testing.assert_allclose(T, 20.0, rtol=0, atol=1e-12)
    assert stepper.energy()["relative_imbalance"] < 1e-12
