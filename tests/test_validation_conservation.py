"""Conservation of heat: an insulated body heated through one face or by a source.

With no other boundary condition, the total heat of the semi-discrete system,
1^T M T, changes only by what flows in, because 1^T K = 0 (common practice,
no source). The theta-method keeps this exactly for any step when the load
is piecewise linear and steps land on its corners, so the mean temperature
rises as q A t / (rho c V) to round-off.
"""

import numpy as np
import pytest
from heatsoak.core.fem.assembly import Assembler
from heatsoak.core.mesh.generate import box_mesh
from heatsoak.core.problem.problem import Boundary, Material, Problem, TimeSettings
from heatsoak.core.problem.schedule import Constant, Ramp
from heatsoak.core.solve.stepping import ThetaMethod

SIZE = (0.4, 0.2, 0.1)  # m
AREA, VOLUME = 0.2 * 0.1, 0.4 * 0.2 * 0.1  # xmin face [m2], body [m3]
RHOC = 3.5e6  # J/(m3 K)
Q = 5000.0  # W/m2


def heated(order, mass, theta, schedule, source=None, dt=1.0, end=20.0, boundaries=None):
    """Run the box; return times, mean temperatures 1^T M T / (rho c V) and the stepper."""
    mesh = box_mesh((4, 2, 2), size=SIZE, order=order)
    mat = Material(RHOC, 1.0, 40.0, source=source)
    bcs = boundaries if boundaries is not None else {"xmin": Boundary("heat_flux", schedule)}
    problem = Problem(mesh, {"box": mat}, bcs, initial=15.0)
    stepper = ThetaMethod(problem, TimeSettings(end=end, step=dt, theta=theta, mass=mass))
    asm = Assembler(mesh)
    weights = asm.lumped_mass(RHOC) if mass == "lumped" else np.asarray(asm.mass(RHOC).sum(axis=0)).ravel()
    ts, means = [], []
    for t, T in stepper.steps():
        ts.append(t)
        means.append(weights @ T / (RHOC * VOLUME))
    return np.array(ts), np.array(means), stepper


@pytest.mark.parametrize("order", [1, 2])
@pytest.mark.parametrize("mass", ["consistent", "lumped"])
@pytest.mark.parametrize("theta", [1.0, 0.5])
def test_mean_temperature_rises_exactly_as_the_heat_put_in(order, mass, theta):
    # Conservation: rho c V dTmean/dt = q A.
    t, mean, stepper = heated(order, mass, theta, Constant(Q))
    np.testing.assert_allclose(mean, 15.0 + Q * AREA * t / (RHOC * VOLUME), rtol=1e-13)
    e = stepper.energy()
    assert e["stored_J"] == pytest.approx(Q * AREA * 20.0, rel=1e-12)
    assert e["boundary_in_J"] == pytest.approx(Q * AREA * 20.0, rel=1e-12)
    assert e["relative_imbalance"] < 1e-12


@pytest.mark.parametrize("theta", [1.0, 0.5, 0.0])
@pytest.mark.parametrize(
    "schedule, on",
    [
        (Ramp(0.0, Q, 10.0, 0.0), lambda t: np.maximum(t - 10.0, 0.0)),  # switched on at 10 s
        (Ramp(Q, 0.0, 10.0, 0.0), lambda t: np.minimum(t, 10.0)),  # switched off at 10 s
    ],
)
def test_flux_switched_at_a_time_puts_in_heat_from_that_time_only(theta, schedule, on):
    # Conservation: the heat put in is q A times the time the flux was on; a switch
    # at 10 s must not leak heat into the step that ends there.
    dt = 0.5 if theta == 0.0 else 1.0  # forward Euler needs a step below its limit
    t, mean, stepper = heated(1, "lumped", theta, schedule, dt=dt)
    np.testing.assert_allclose(mean, 15.0 + Q * AREA * on(t) / (RHOC * VOLUME), rtol=1e-13)
    assert stepper.energy()["relative_imbalance"] < 1e-12


@pytest.mark.parametrize("theta", [1.0, 0.5])
def test_source_switched_on_heats_from_that_time_only(theta):
    # Conservation: rho c dTmean/dt = f once the source is on.
    f = 2.0e5  # W/m3
    insulated = {}
    t, mean, stepper = heated(2, "consistent", theta, None, source=Ramp(0.0, f, 7.0, 0.0), boundaries=insulated)
    np.testing.assert_allclose(mean, 15.0 + f * np.maximum(t - 7.0, 0.0) / RHOC, rtol=1e-13)
    assert stepper.energy()["source_in_J"] == pytest.approx(f * VOLUME * 13.0, rel=1e-12)


@pytest.mark.parametrize("theta", [1.0, 0.5])
def test_temperature_jump_after_the_start_acts_from_its_time_and_balances(theta):
    # Conservation: what the prescribed-temperature face puts in is what is stored; and
    # causality: a face that jumps at 4 s cannot have warmed the body before 4 s.
    mesh = box_mesh((4, 2, 2), size=SIZE)
    bcs = {"xmin": Boundary("temperature", Ramp(15.0, 80.0, 4.0, 0.0))}
    problem = Problem(mesh, {"box": Material(RHOC, 1.0, 40.0)}, bcs, initial=15.0)
    stepper = ThetaMethod(problem, TimeSettings(end=20.0, step=1.0, theta=theta))
    face = mesh.group_nodes("xmin")
    inside = np.setdiff1d(np.arange(mesh.n_nodes), face)
    fields = dict(stepper.steps())
    np.testing.assert_array_equal(fields[4.0][face], 80.0)  # right-continuous: the new value applies at 4 s
    np.testing.assert_allclose(fields[4.0][inside], 15.0, rtol=0, atol=1e-12)
    assert fields[5.0][inside].max() > 15.05  # and has started to warm the body one step later
    e = stepper.energy()
    assert e["stored_J"] > 0.1 * RHOC * VOLUME  # the body warmed by more than 0.1 K on average
    assert e["relative_imbalance"] < 1e-12
