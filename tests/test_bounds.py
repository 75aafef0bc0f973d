"""The maximum-principle check: warn when the computed range leaves the data's range."""

import numpy as np
from heatsoak.core.mesh.generate import box_mesh
from heatsoak.core.problem.problem import Boundary, Material, Problem, TimeSettings
from heatsoak.core.problem.schedule import Constant, Ramp
from heatsoak.core.results.record import bound_warnings, data_bounds
from heatsoak.core.solve.stepping import ThetaMethod

MESH = box_mesh((6, 6, 3), (0.06, 0.06, 0.03))


def _run(problem, mass="lumped", end=600.0, step=30.0):
    lo, hi = np.inf, -np.inf
    for _, T in ThetaMethod(problem, TimeSettings(end=end, step=step, mass=mass)).steps():
        lo, hi = min(lo, T.min()), max(hi, T.max())
    return lo, hi


def test_bounds_span_initial_prescribed_and_ambient_values_over_the_run():
    bcs = {"xmin": Boundary("temperature", Ramp(20, 180, 100, 600)),
           "xmax": Boundary("convection", h=10, ambient=Constant(-5))}
    problem = Problem(MESH, {"box": Material(7900, 477, 14.9)}, bcs, 40.0)
    assert data_bounds(problem, 400.0) == (-5.0, 20 + 160 * 300 / 600)  # ramp only half way by t = 400 s


def test_a_heat_flux_or_a_source_leaves_the_bounds_open():
    flux = Problem(MESH, {"box": Material(1, 1, 1)}, {"zmin": Boundary("heat_flux", Constant(5.0))}, 0.0)
    src = Problem(MESH, {"box": Material(1, 1, 1, source=Constant(1.0))}, {}, 0.0)
    assert data_bounds(flux, 10.0) is None and data_bounds(src, 10.0) is None


def test_isotropic_cooling_with_lumped_mass_stays_in_bounds_and_is_not_flagged():
    bcs = {"zmin": Boundary("temperature", Constant(20.0)), "zmax": Boundary("convection", h=10, ambient=Constant(20))}
    problem = Problem(MESH, {"box": Material(7900, 477, 14.9)}, bcs, 120.0)
    lo, hi = _run(problem)
    assert 20.0 - 1e-9 <= lo and hi <= 120.0 + 1e-9
    assert bound_warnings(problem, 600.0, lo, hi) == []


def test_strong_anisotropy_overshoots_and_the_run_is_flagged():
    # Conductivity 1000:1 in a rotated frame on this mesh makes K far from an M-matrix: the
    # discrete solution leaves the data range, which the exact solution never does.
    c, s = np.cos(np.pi / 5), np.sin(np.pi / 5)
    R = np.array([[c, -s, 0], [s, c, 0], [0, 0, 1]])
    kappa = R @ np.diag([1000.0, 1.0, 1.0]) @ R.T
    bcs = {"xmin": Boundary("temperature", Constant(20.0))}
    problem = Problem(MESH, {"box": Material(2210, 709, kappa)}, bcs, 120.0)
    lo, hi = _run(problem, end=60.0, step=2.0)
    warnings = bound_warnings(problem, 60.0, lo, hi)
    assert (hi > 120.0 + 1e-6) or (lo < 20.0 - 1e-6)
    assert warnings and "maximum principle" in warnings[0]
