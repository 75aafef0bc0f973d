"""A long bar with insulated sides against the semi-infinite solid.

The bar is a row of ``n`` cubes of box_mesh((n, 1, 1)) along x, 0.25 m long,
with alpha = 1e-5 m2/s and runs to 100 s: at the far end
erfc(0.25 / (2 sqrt(alpha 100 s))) = erfc(3.95) < 1e-6 of the end change, so
the bar is semi-infinite to well below the tolerances. Errors are compared
over the first 0.08 m, where the field changes.
"""

import numpy as np
import pytest
from exact_solutions import (
    semi_infinite_flux,
    semi_infinite_ramp,
    semi_infinite_step,
    semi_infinite_table,
)
from heatsoak.core.mesh.generate import box_mesh
from heatsoak.core.problem.problem import Boundary, Material, Problem, TimeSettings
from heatsoak.core.problem.schedule import Constant, Ramp, Table
from heatsoak.core.solve.stepping import ThetaMethod
from scipy.special import erfc

ALPHA, K = 1e-5, 10.0
LENGTH, END = 0.25, 100.0
TIMES = (25.0, 50.0, 100.0)


def run_bar(boundary, n, dt, theta=0.5, order=1, initial=0.0, tolerance=None):
    """Nodal x [m] and {t: T} at TIMES for the bar with ``boundary`` on its x = 0 end
    (adaptive steps of at most ``dt`` with a ``tolerance`` [K])."""
    mesh = box_mesh((n, 1, 1), size=(LENGTH, LENGTH / n, LENGTH / n), order=order)
    problem = Problem(mesh, {"box": Material(K / ALPHA, 1.0, K)}, {"xmin": boundary}, initial=initial)
    settings = TimeSettings(end=END, step=dt, theta=theta, output_times=TIMES, tolerance=tolerance)
    stepper = ThetaMethod(problem, settings)
    out = {t: T for t, T in stepper.steps() if t in TIMES}
    assert sorted(out) == list(TIMES)
    return mesh.points[:, 0], out, stepper


def max_error(x, fields, exact):
    near = x <= 0.08
    return max(np.abs(T - exact(x, t))[near].max() for t, T in fields.items())


def test_bar_is_long_enough_to_be_semi_infinite():
    assert erfc(LENGTH / (2.0 * np.sqrt(ALPHA * END))) < 1e-6


def test_sudden_end_temperature_follows_the_erf_solution_with_second_order_convergence():
    # Carslaw & Jaeger, Conduction of Heat in Solids, 2nd ed., §2.4 (from memory):
    # T = Ts + (Ti - Ts) erf(x / (2 sqrt(alpha t))).
    exact = lambda x, t: semi_infinite_step(x, t, ALPHA, 0.0, 100.0)
    # Measured: 0.104 K (n=100, dt=0.5 s), 0.026 K (n=200, dt=0.25 s), 0.4 K at n=50:
    # Crank-Nicolson with the backward-Euler start and P1 converge as h^2 + dt^2,
    # so the bounds are 1.5x the measured errors and the ratio is close to 4.
    x, coarse, _ = run_bar(Boundary("temperature", Constant(100.0)), 100, 0.5)
    x2, fine, _ = run_bar(Boundary("temperature", Constant(100.0)), 200, 0.25)
    e1, e2 = max_error(x, coarse, exact), max_error(x2, fine, exact)
    assert e1 < 0.16
    assert e2 < 0.04
    assert 3.3 < e1 / e2 < 4.8


def test_sudden_end_temperature_with_quadratic_elements():
    # Same solution (Carslaw & Jaeger §2.4, from memory). P2, n=50, dt=0.5 s:
    # measured 9.1e-3 K; n=100, dt=0.25 s gave 1.5e-3 K (time error dominates), bound 1.5x.
    exact = lambda x, t: semi_infinite_step(x, t, ALPHA, 0.0, 100.0)
    x, fields, _ = run_bar(Boundary("temperature", Constant(100.0)), 50, 0.5, order=2)
    assert max_error(x, fields, exact) < 0.014


@pytest.mark.parametrize(
    "theta, bound",
    [
        # Backward Euler is first order in time: measured 0.094 / 0.050 / 0.027 K at
        # (n, dt) = (50, 1), (100, 0.5), (200, 0.25); the ramp's error is its lag by about
        # dt/2 times the 1 K/s rate. Bound 1.5x the measured 0.050 K.
        (1.0, 0.075),
        # Crank-Nicolson: measured 0.071 / 0.0146 / 0.0033 K (order ~2); bound 1.5x 0.0146 K.
        (0.5, 0.022),
    ],
)
def test_end_ramped_linearly_follows_the_repeated_erfc_integral(theta, bound):
    # Carslaw & Jaeger §2.5 (from memory): surface T = Ti + C t gives T - Ti = C t 4 i^2erfc(x / (2 sqrt(alpha t))).
    rate = 1.0
    x, fields, stepper = run_bar(Boundary("temperature", Ramp(0.0, rate * END, 0.0, END)), 100, 0.5, theta)
    err = max_error(x, fields, lambda x, t: semi_infinite_ramp(x, t, ALPHA, rate))
    assert err < bound
    assert stepper.energy()["relative_imbalance"] < 1e-12


@pytest.mark.parametrize(
    "theta, tolerance, bound",
    [
        # the bounds of the fixed 0.5 s steps above; measured 0.0058 K in 905 backward-Euler steps
        # and 0.0184 K in 52 Crank-Nicolson steps (the mesh's own error is most of the latter)
        (1.0, 0.03, 0.075),
        (0.5, 0.01, 0.022),
    ],
)
def test_end_ramped_linearly_with_adaptive_steps_to_a_tolerance(theta, tolerance, bound):
    # Same solution (Carslaw & Jaeger §2.5, from memory), the steps chosen by the run for a
    # time-step error under ``tolerance`` [K], at most 10 s.
    rate = 1.0
    x, fields, stepper = run_bar(Boundary("temperature", Ramp(0.0, rate * END, 0.0, END)), 100, 10.0, theta,
                                 tolerance=tolerance)
    assert max_error(x, fields, lambda x, t: semi_infinite_ramp(x, t, ALPHA, rate)) < bound
    assert stepper.energy()["relative_imbalance"] < 1e-12


def test_end_following_a_table_is_the_superposition_of_ramps():
    # Duhamel's theorem (Carslaw & Jaeger §2.5, from memory): up 40 K in 20 s, hold, down 30 K.
    times, values = [0.0, 20.0, 50.0, 80.0], [0.0, 40.0, 40.0, 10.0]
    exact = lambda x, t: semi_infinite_table(x, t, ALPHA, times, values)
    # Crank-Nicolson: measured 0.106 / 0.0236 / 0.0054 K at (n, dt) = (50, 1), (100, 0.5),
    # (200, 0.25): second order through the corners because steps land on them. Bound 1.5x.
    x, fields, stepper = run_bar(Boundary("temperature", Table(times, values)), 100, 0.5)
    assert max_error(x, fields, exact) < 0.036
    # one Crank-Nicolson factorisation and one for the backward-Euler start: the corners
    # at 20, 50 and 80 s are on the 0.5 s grid, so no other step size appears
    assert stepper.factorizations == 2


@pytest.mark.parametrize(
    "theta, n, dt, order, bound",
    [
        # measured 0.0067 K (n=100, dt=0.5) and 0.0017 K (n=200, dt=0.25): order 2; bound 1.5x
        (0.5, 100, 0.5, 1, 0.01),
        # measured 0.0155 K; 0.0061 K with n, dt halved (mixed h^2 + dt); bound 1.5x
        (1.0, 100, 0.5, 1, 0.023),
        # P2, n=50, dt=0.5: measured 3.0e-4 K; bound 1.5x
        (0.5, 50, 0.5, 2, 4.5e-4),
    ],
)
def test_constant_end_flux_follows_the_semi_infinite_flux_solution(theta, n, dt, order, bound):
    # Carslaw & Jaeger §2.9 (from memory):
    # T - Ti = (2q/k) sqrt(alpha t/pi) exp(-x^2/(4 alpha t)) - (q x/k) erfc(x/(2 sqrt(alpha t))).
    q = 2000.0  # W/m2: the end rises by 2q/k sqrt(alpha t/pi) = 7.1 K in 100 s
    x, fields, stepper = run_bar(Boundary("heat_flux", Constant(q)), n, dt, theta, order)
    err = max_error(x, fields, lambda x, t: semi_infinite_flux(x, t, ALPHA, K, q))
    assert err < bound
    assert stepper.energy()["relative_imbalance"] < 1e-12
