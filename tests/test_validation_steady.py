"""Steady fields the elements must reproduce exactly: patch tests and series thermal resistance.

A field that is linear in each region lies in the finite element space, so the
Galerkin solution equals it to round-off on any mesh whose region interfaces
are element faces (patch test; common practice, no source).
"""

import numpy as np
import pytest
from heatsoak.core.mesh.generate import box_mesh
from heatsoak.core.problem.problem import Boundary, Material, Problem, TimeSettings
from heatsoak.core.problem.schedule import Constant
from heatsoak.core.solve.stepping import ThetaMethod
from scipy.spatial.transform import Rotation

SIZE = np.array([0.3, 0.2, 0.1])
#: Conductivity 5, 1, 0.2 W/(m K) along axes rotated by 30, 40, 50 degrees (z, y, x Euler angles).
ROT = Rotation.from_euler("zyx", [30.0, 40.0, 50.0], degrees=True).as_matrix()
KAPPA = ROT @ np.diag([5.0, 1.0, 0.2]) @ ROT.T
GRADIENT = np.array([300.0, -150.0, 80.0])  # K/m
NORMALS = {"xmin": [-1, 0, 0], "xmax": [1, 0, 0], "ymin": [0, -1, 0], "ymax": [0, 1, 0], "zmin": [0, 0, -1], "zmax": [0, 0, 1]}


def graded(order):
    """A box meshed with cells shrinking towards one corner: no two steps the same."""
    g = (lambda s: s**1.5, lambda s: np.sin(0.5 * np.pi * s), lambda s: s**2 * (3 - 2 * s))
    return box_mesh((5, 4, 3), size=SIZE, order=order, grading=g)


def side_fluxes(gradient, sides):
    """Heat flux into the body through each side for T = gradient . x: (kappa grad T) . n_out."""
    return {s: Boundary("heat_flux", Constant(float(KAPPA @ gradient @ np.array(NORMALS[s], float)))) for s in sides}


def test_rotated_conductivity_is_the_tensor_the_test_means():
    assert np.allclose(KAPPA, KAPPA.T)
    assert np.allclose(np.linalg.eigvalsh(KAPPA), [0.2, 1.0, 5.0])
    assert abs(KAPPA[0, 1]) > 0.5 and abs(KAPPA[1, 2]) > 0.3  # really anisotropic off the axes


@pytest.mark.parametrize("order", [1, 2])
@pytest.mark.parametrize("mass", ["consistent", "lumped"])
def test_linear_field_in_a_rotated_anisotropic_body_stays_exactly(order, mass):
    # Patch test: T = 20 + g . x is steady under the matching fluxes on all six faces, so the
    # run must not move it by more than round-off. A wrong tensor product in the stiffness
    # (kappa transposed, rotated the wrong way, off-diagonals dropped) moves it by kelvins.
    mesh = graded(order)
    exact = 20.0 + mesh.points @ GRADIENT
    problem = Problem(mesh, {"box": Material(4e6, 1.0, KAPPA)}, side_fluxes(GRADIENT, NORMALS), initial=exact)
    stepper = ThetaMethod(problem, TimeSettings(end=50.0, step=10.0, theta=0.5, mass=mass))
    for _, T in stepper.steps():
        np.testing.assert_allclose(T, exact, rtol=0, atol=1e-9 * np.abs(exact).max())


@pytest.mark.parametrize("order", [1, 2])
def test_anisotropic_body_runs_to_the_linear_steady_state(order):
    # Patch test reached from a uniform start: T = 200 x/Lx, prescribed on the x faces, with
    # the fluxes of the rotated tensor on the four other faces. Backward Euler with steps
    # 1e6 times the diffusion time damps every mode by 1e-6 per step.
    mesh = graded(order)
    g = np.array([200.0 / SIZE[0], 0.0, 0.0])
    bcs = side_fluxes(g, ["ymin", "ymax", "zmin", "zmax"])
    bcs["xmin"] = Boundary("temperature", Constant(0.0))
    bcs["xmax"] = Boundary("temperature", Constant(200.0))
    problem = Problem(mesh, {"box": Material(4e6, 1.0, KAPPA)}, bcs, initial=50.0)
    stepper = ThetaMethod(problem, TimeSettings(end=6e12, step=1e12, theta=1.0))
    *_, (_, T) = stepper.steps()
    np.testing.assert_allclose(T, mesh.points @ g, rtol=0, atol=1e-8)


@pytest.mark.parametrize("order", [1, 2])
def test_two_material_bar_with_convection_has_the_series_resistance_profile(order):
    # Series thermal resistance per unit area R = L1/k1 + L2/k2 + 1/h (Incropera et al.,
    # Fundamentals of Heat and Mass Transfer, §3.1, from memory): q = (T0 - Tinf) / R and
    # the profile is linear in each layer.
    l1, l2, k1, k2, h = 0.1, 0.2, 50.0, 1.0, 20.0
    mesh = box_mesh(
        (12, 1, 1),
        size=(l1 + l2, 0.02, 0.02),
        order=order,
        regions=lambda c: ((c[:, 0] > l1).astype(int), ("metal", "insulation")),
    )
    problem = Problem(
        mesh,
        {"metal": Material(7800.0, 500.0, k1), "insulation": Material(100.0, 1000.0, k2)},
        {
            "xmin": Boundary("temperature", Constant(200.0)),
            "xmax": Boundary("convection", h=h, ambient=Constant(20.0)),
        },
        initial=20.0,
    )
    stepper = ThetaMethod(problem, TimeSettings(end=1e12, step=1e11, theta=1.0))
    *_, (_, T) = stepper.steps()
    q = (200.0 - 20.0) / (l1 / k1 + l2 / k2 + 1.0 / h)
    x = mesh.points[:, 0]
    exact = np.where(x <= l1, 200.0 - q * x / k1, 200.0 - q * l1 / k1 - q * (x - l1) / k2)
    np.testing.assert_allclose(T, exact, rtol=1e-10)
    assert T[np.isclose(x, l1 + l2)].mean() == pytest.approx(20.0 + q / h, rel=1e-10)


def test_quadratic_elements_reproduce_the_parabola_of_a_per_region_source():
    # Steady conduction with sources f1 (x < a) and f2 (x > a), ends held at 0:
    # -k T'' = f, T and k T' continuous at a (calculus). The exact field is piecewise
    # quadratic with its kink on an element face, so P2 reproduces it to round-off.
    length, a, k, f1, f2 = 0.2, 0.05, 2.0, 4.0e4, -1.0e4
    mesh = box_mesh(
        (8, 1, 1),
        size=(length, 0.025, 0.025),
        order=2,
        regions=lambda c: ((c[:, 0] > a).astype(int), ("heated", "cooled")),
    )
    problem = Problem(
        mesh,
        {"heated": Material(1e6, 1.0, k, source=Constant(f1)), "cooled": Material(2e6, 1.0, k, source=Constant(f2))},
        {"xmin": Boundary("temperature", Constant(0.0)), "xmax": Boundary("temperature", Constant(0.0))},
        initial=0.0,
    )
    *_, (_, T) = ThetaMethod(problem, TimeSettings(end=1e12, step=1e11, theta=1.0)).steps()
    # T = -f1 x^2/(2k) + c1 x on [0, a]; T = -f2 (x - L)^2/(2k) + c2 (x - L) on [a, L]; match T and T' at a
    A = np.array([[a, -(a - length)], [1.0, -1.0]])
    rhs = np.array([f1 * a**2 / (2 * k) - f2 * (a - length) ** 2 / (2 * k), f1 * a / k - f2 * (a - length) / k])
    c1, c2 = np.linalg.solve(A, rhs)
    x = mesh.points[:, 0]
    exact = np.where(x <= a, -f1 * x**2 / (2 * k) + c1 * x, -f2 * (x - length) ** 2 / (2 * k) + c2 * (x - length))
    np.testing.assert_allclose(T, exact, rtol=0, atol=1e-10 * np.abs(exact).max())
    assert np.abs(exact).max() > 1.0
