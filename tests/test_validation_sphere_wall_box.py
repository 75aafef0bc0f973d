"""Series solutions: plane wall with convection, sphere and box with a sudden surface temperature.

alpha = 1e-5 m2/s and k = 10 W/(m K) throughout; tolerances are 1.5x the
error measured on the mesh and step used, with the measured refinement
quoted beside each.
"""

import numpy as np
import pytest
from exact_solutions import (
    slab_dirichlet,
    sphere_centre,
    wall_coefficients,
    wall_convection,
    wall_eigenvalues,
)
from heatsoak.core.mesh.generate import box_mesh
from heatsoak.core.mesh.read import read_mesh
from heatsoak.core.problem.problem import Boundary, Material, Problem, TimeSettings
from heatsoak.core.problem.schedule import Constant
from heatsoak.core.results.probes import ProbeSet
from heatsoak.core.solve.stepping import ThetaMethod

ALPHA, K = 1e-5, 10.0
STEEL_LIKE = Material(K / ALPHA, 1.0, K)


# -- plane wall with convection on both faces ------------------------------------------------


@pytest.mark.parametrize(
    "biot, zeta1, c1",
    [(0.1, 0.3111, 1.0161), (1.0, 0.8603, 1.1191), (10.0, 1.4289, 1.2620)],
)
def test_wall_eigenvalues_match_the_printed_table(biot, zeta1, c1):
    # Incropera et al., Fundamentals of Heat and Mass Transfer, Table 5.1 (from memory),
    # printed to 4 decimals.
    z = wall_eigenvalues(biot, 3)
    assert z[0] == pytest.approx(zeta1, abs=6e-5)
    assert wall_coefficients(z)[0] == pytest.approx(c1, abs=6e-5)
    assert np.allclose(z * np.tan(z), biot)


@pytest.mark.parametrize(
    "biot, n, order, bound",
    [
        # Measured max nodal errors (of a 200 K drop) at n = 20 / 40 / 80, dt = 2 / 1 / 0.5 s:
        # Bi=0.1: 0.036 / 0.0091 / 0.0023 K; Bi=1: 0.18 / 0.044 / 0.011 K;
        # Bi=10: 0.26 / 0.065 / 0.016 K - second order. Bounds are 1.5x the n=40 values.
        (0.1, 40, 1, 0.014),
        (1.0, 40, 1, 0.066),
        (10.0, 40, 1, 0.098),
        # P2: 0.0144 K at n=10, dt=2 s; 0.0034 K at n=20, dt=1 s (time error dominates)
        (1.0, 20, 2, 0.0051),
    ],
)
def test_plane_wall_with_convection_follows_the_series_solution(biot, n, order, bound):
    # Incropera et al. §5.5 (from memory): (T - Tinf)/(Ti - Tinf) = sum C_n exp(-zeta_n^2 Fo) cos(zeta_n x/L)
    half = 0.05  # m: L^2/alpha = 250 s
    mesh = box_mesh((n, 1, 1), size=(2 * half, 2 * half / n, 2 * half / n), origin=(-half, 0, 0), order=order)
    side = Boundary("convection", h=biot * K / half, ambient=Constant(20.0))
    problem = Problem(mesh, {"box": STEEL_LIKE}, {"xmin": side, "xmax": side}, initial=220.0)
    times = (50.0, 125.0, 250.0)  # Fo = 0.2, 0.5, 1
    stepper = ThetaMethod(problem, TimeSettings(end=250.0, step=1.0, theta=0.5, output_times=times))
    x = mesh.points[:, 0]
    errors = [
        np.abs(T - (20.0 + 200.0 * wall_convection(x / half, ALPHA * t / half**2, biot))).max()
        for t, T in stepper.steps()
        if t in times
    ]
    assert len(errors) == 3
    assert max(errors) < bound
    # convection in and heat stored balance to round-off over the run
    assert stepper.energy()["relative_imbalance"] < 1e-10


# -- box with all faces at a new temperature ---------------------------------------------------

BOX = np.array([0.06, 0.04, 0.03])


def box_errors(shape, dt, order):
    mesh = box_mesh(shape, size=BOX, order=order)
    cold = Boundary("temperature", Constant(0.0))
    problem = Problem(mesh, {"box": STEEL_LIKE}, {s: cold for s in mesh.group_names}, initial=100.0)
    times = (5.0, 10.0, 20.0)
    stepper = ThetaMethod(problem, TimeSettings(end=20.0, step=dt, theta=0.5, output_times=times))
    p = mesh.points
    errors = []
    for t, T in stepper.steps():
        if t in times:
            exact = 100.0 * np.prod([slab_dirichlet(p[:, i], t, ALPHA, BOX[i]) for i in range(3)], axis=0)
            errors.append(np.abs(T - exact).max())
    return max(errors)


def test_box_with_all_faces_at_a_new_temperature_is_the_product_of_three_slabs():
    # Product solution, Carslaw & Jaeger §6.3 (from memory), slab series §3.3 (from memory).
    # P2: measured max nodal error 1.21 K on 6x4x3 cubes (dt=0.5 s) and 0.098 K on 12x8x6
    # (dt=0.25 s); the corners, where the initial field jumps, dominate. Bound 1.5x.
    assert box_errors((12, 8, 6), 0.25, 2) < 0.15


def test_box_product_solution_linear_elements_converge_at_second_order():
    # Same solution; P1 measured 18.8 K (6x4x3, dt=0.5 s), 6.0 K (12x8x6, dt=0.25 s) and
    # 1.57 K (24x16x12, dt=0.125 s), all at the corners at t = 5 s: order 1.65 then 1.93.
    e1 = box_errors((12, 8, 6), 0.25, 1)
    e2 = box_errors((24, 16, 12), 0.125, 1)
    assert e2 < 2.4
    assert 1.75 < np.log2(e1 / e2) < 2.25


# -- sphere ----------------------------------------------------------------------------------

RADIUS = 0.05  # m; R^2/alpha = 250 s


def sphere_mesh(path, size, order):
    """Write a gmsh mesh of the ball of RADIUS (volume "ball", surface "surface") to ``path``."""
    gmsh = pytest.importorskip("gmsh")
    gmsh.initialize(["", "-nopopup"])
    try:
        gmsh.option.setNumber("General.Terminal", 0)
        gmsh.model.add("ball")
        vol = gmsh.model.occ.addSphere(0.0, 0.0, 0.0, RADIUS)
        gmsh.model.occ.synchronize()
        surfaces = [tag for _, tag in gmsh.model.getBoundary([(3, vol)])]
        gmsh.model.addPhysicalGroup(3, [vol], name="ball")
        gmsh.model.addPhysicalGroup(2, surfaces, name="surface")
        gmsh.option.setNumber("Mesh.MeshSizeMin", size)
        gmsh.option.setNumber("Mesh.MeshSizeMax", size)
        gmsh.model.mesh.generate(3)
        if order == 2:
            gmsh.model.mesh.setOrder(2)  # mid-edge nodes on the sphere
        gmsh.write(str(path))
    finally:
        gmsh.finalize()
    return read_mesh(path)


@pytest.mark.parametrize(
    "size, order, step, tolerance, bound",
    [
        # P1: the faceted surface and the interpolated centre give errors of order h^2:
        # measured max 3.98 K at h = R/5, 1.36 K at h = R/8 (of a 100 K drop). Bound 1.5x.
        (RADIUS / 8, 1, 0.5, None, 2.0),
        # P2 on curved cells: 0.31 K at h = R/3, 0.066 K at h = R/4 (dt = 0.5 s). Bound 1.5x.
        (RADIUS / 4, 2, 0.5, None, 0.1),
        # the same P2 sphere with adaptive steps (at most 5 s) for a time-step error of 0.02 K:
        # measured 0.076 K in 133 steps (0.065 K in 102 fixed 0.5 s steps)
        (RADIUS / 4, 2, 5.0, 0.02, 0.1),
    ],
)
def test_sphere_centre_follows_the_series_solution(tmp_path, size, order, step, tolerance, bound):
    # Carslaw & Jaeger §9.3 (from memory): (T - Ts)/(Ti - Ts) at the centre is
    # 2 sum (-1)^(n+1) exp(-n^2 pi^2 alpha t / R^2).
    mesh = sphere_mesh(tmp_path / "ball.msh", size, order)
    assert mesh.order == order
    problem = Problem(mesh, {"ball": STEEL_LIKE}, {"surface": Boundary("temperature", Constant(0.0))}, initial=100.0)
    times = (12.5, 25.0, 50.0)  # Fo = 0.05, 0.1, 0.2: centre at 96.6, 70.7, 27.7 degC
    settings = TimeSettings(end=50.0, step=step, theta=0.5, output_times=times, tolerance=tolerance)
    stepper = ThetaMethod(problem, settings)
    centre = ProbeSet(mesh, [[0.0, 0.0, 0.0]], ["centre"])
    errors = [
        abs(centre.values(T)[0] - 100.0 * sphere_centre(ALPHA * t / RADIUS**2))
        for t, T in stepper.steps()
        if t in times
    ]
    assert len(errors) == 3
    assert max(errors) < bound
