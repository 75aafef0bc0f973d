"""Measured convergence orders on a smooth exact solution.

T = exp(-pi^2 alpha t / L^2) sin(pi x / L) on a bar 0 < x < L with both ends
held at 0 (separation of variables, Carslaw & Jaeger §3.3, from memory),
alpha = 1, L = 1, to t = 0.1. The L2 error is integrated with the degree-4
rule over the elements. Expected orders (common practice, no source): h^2 for
linear and h^3 for quadratic elements, dt for backward Euler, dt^2 for
Crank-Nicolson.
"""

import numpy as np
import pytest
from heatsoak.core.mesh.generate import box_mesh
from heatsoak.core.mesh.geometry import isoparametric
from heatsoak.core.problem.problem import Boundary, Material, Problem, TimeSettings
from heatsoak.core.problem.schedule import Constant
from heatsoak.core.solve.stepping import ThetaMethod

END = 0.1


def exact(x, t):
    return np.exp(-np.pi**2 * t) * np.sin(np.pi * x)


def l2_error(mesh, T, t):
    """sqrt(integral (T_h - T)^2 dV / V) with the elements' own shape functions."""
    values, _, w = isoparametric(mesh.points, mesh.cells, 4)
    xq = np.einsum("qb,ebi->eqi", values, mesh.points[mesh.cells])
    Th = np.einsum("qb,eb->eq", values, T[mesh.cells])
    return np.sqrt(np.sum(w * (Th - exact(xq[..., 0], t)) ** 2) / np.sum(w))


def final(n, order, dt, theta=0.5, mass="consistent", width=0.05, start=None):
    """Mesh and temperature at END on a bar of n cubes (cross-section width x width)."""
    mesh = box_mesh((n, 1, 1), size=(1.0, width, width), order=order)
    cold = Boundary("temperature", Constant(0.0))
    problem = Problem(
        mesh,
        {"box": Material(1.0, 1.0, 1.0)},
        {"xmin": cold, "xmax": cold},
        initial=exact(mesh.points[:, 0], 0.0),
    )
    stepper = ThetaMethod(problem, TimeSettings(end=END, step=dt, theta=theta, mass=mass, start_steps=start))
    *_, (t, T) = stepper.steps()
    assert t == END
    return mesh, T


def orders(errors):
    e = np.asarray(errors)
    return np.log2(e[:-1] / e[1:])


def test_l2_error_integrates_the_interpolation_error_exactly_for_a_quadratic():
    # Calculus: the P1 interpolant of x(1 - x) on cells of length h misses it by
    # (x - xi)(xi+1 - x), whose mean square is h^4/30.
    n = 4
    mesh = box_mesh((n, 1, 1), size=(1.0, 0.05, 0.05))
    x = mesh.points[:, 0]
    values, _, w = isoparametric(mesh.points, mesh.cells, 4)
    xq = np.einsum("qb,ebi->eqi", values, mesh.points[mesh.cells])[..., 0]
    Th = np.einsum("qb,eb->eq", values, (x * (1 - x))[mesh.cells])
    err = np.sqrt(np.sum(w * (Th - xq * (1 - xq)) ** 2) / np.sum(w))
    assert err == pytest.approx(np.sqrt((1 / n) ** 4 / 30), rel=1e-12)


@pytest.mark.parametrize(
    "order, ns, expected",
    [
        # measured L2 errors 6.8e-3, 1.7e-3, 4.2e-4: orders 2.00, 2.02
        (1, (8, 16, 32), 2.0),
        # measured 1.76e-4, 1.86e-5, 2.17e-6: orders 3.24 (pre-asymptotic), 3.10
        (2, (6, 12, 24), 3.0),
    ],
)
def test_space_convergence_order(order, ns, expected):
    # Crank-Nicolson with dt = 2.5e-4 s and no backward-Euler start (smooth data): its
    # time error is below 1/20 of the finest spatial error (halving dt moved it by 4%).
    errors = [l2_error(*final(n, order, 2.5e-4, start=0), END) for n in ns]
    measured = orders(errors)
    assert abs(measured[-1] - expected) < 0.25
    assert (measured > expected - 0.25).all()


@pytest.mark.parametrize(
    "theta, start, expected",
    [
        # measured 0.0237, 0.0123, 0.0063: orders 0.94, 0.97
        (1.0, None, 1.0),
        # with the default backward-Euler half steps at the start: 4.3e-3, 1.1e-3, 2.7e-4: 2.01, 2.01
        (0.5, None, 2.0),
        # without them: 8.5e-4, 2.1e-4, 5.5e-5: 2.00, 1.96
        (0.5, 0, 2.0),
    ],
)
def test_time_convergence_order(theta, start, expected):
    # P2 on 16 cubes: spatial error 7.5e-6, below 1/7 of the smallest time error.
    errors = [l2_error(*final(16, 2, dt, theta, start=start), END) for dt in (0.02, 0.01, 0.005)]
    measured = orders(errors)
    assert np.all(np.abs(measured - expected) < 0.25)


@pytest.mark.parametrize("order", [1, 2])
def test_consistent_and_lumped_mass_agree_as_mesh_and_step_shrink(order):
    # Both are consistent discretisations of the same equation, so their difference
    # shrinks like the lumping error, h^2 (HRZ lumping of P2 also loses an order: common
    # practice, no source). Cubes of side h = 1/n in all directions, dt = 0.02 h.
    # Measured max nodal differences (P1) 3.8e-2, 9.5e-3, 2.4e-3; (P2) 2.9e-2, 7.6e-3, 1.9e-3
    # (of an amplitude 1): orders 2.00 and 1.96-1.99.
    diffs = []
    for n in (4, 8, 16):
        _, Tc = final(n, order, 0.02 / n, width=1.0 / n)
        _, Tl = final(n, order, 0.02 / n, width=1.0 / n, mass="lumped")
        diffs.append(np.abs(Tc - Tl).max())
    assert np.all(np.abs(orders(diffs) - 2.0) < 0.25)
    assert diffs[-1] < 3.6e-3  # 1.5x the larger measured value
