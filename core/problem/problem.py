"""Plain data describing a transient heat-conduction problem.

The physics is rho c dT/dt = div(kappa grad T) + f on the mesh, with on each
surface group one of: a prescribed temperature (Dirichlet), a heat flux into
the body (Neumann), convection to an ambient temperature (Robin), or nothing
(insulated, the default). Temperatures are in degrees Celsius, everything
else in SI units.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from heatsoak.core.mesh.mesh import Mesh

#: Boundary condition kinds, in the words of the trade.
BOUNDARY_KINDS = ("temperature", "heat_flux", "convection", "insulated")
#: Mass matrix choices.
MASS_KINDS = ("consistent", "lumped")


@dataclass
class Material:
    """Material of a volume region.

    Attributes
    ----------
    density : float
        rho [kg/m3], > 0.
    specific_heat : float
        c [J/(kg K)], > 0.
    conductivity : float or (3, 3) array
        kappa [W/(m K)]: isotropic value or symmetric positive definite tensor.
    source : Schedule, optional
        Volumetric heat source f(t) [W/m3].
    label : str
        Free text, e.g. the name of a built-in material and its source.
    """

    density: float
    specific_heat: float
    conductivity: float | np.ndarray
    source: object | None = None
    label: str = ""

    @property
    def heat_capacity(self) -> float:
        """rho * c [J/(m3 K)]."""
        return float(self.density) * float(self.specific_heat)


@dataclass
class Boundary:
    """Condition on one surface group.

    Attributes
    ----------
    kind : str
        One of :data:`BOUNDARY_KINDS`.
    value : Schedule, optional
        Temperature [degC] for "temperature", heat flux into the body
        [W/m2] for "heat_flux".
    h : float
        Convection coefficient [W/(m2 K)] for "convection".
    ambient : Schedule, optional
        Ambient temperature [degC] for "convection".
    """

    kind: str = "insulated"
    value: object | None = None
    h: float = 0.0
    ambient: object | None = None


@dataclass
class Probe:
    """A point where the temperature is recorded every step.

    Attributes
    ----------
    name : str
    point : (3,) array
        Position in metres.
    threshold : float, optional
        Temperature [degC] whose first crossing time is reported.
    """

    name: str
    point: np.ndarray
    threshold: float | None = None


@dataclass
class TimeSettings:
    """How to march in time.

    Attributes
    ----------
    end : float
        End time [s] (the run starts at t = 0).
    step : float
        Nominal time step [s]; steps are shortened to land on schedule
        breakpoints and on ``output_times``.
    theta : float
        0 forward Euler, 1/2 Crank-Nicolson, 2/3 Galerkin, 1 backward Euler.
    mass : str
        "consistent" or "lumped".
    start_steps : int, optional
        Number of backward-Euler half steps taken at the start, and again
        after every jump in a schedule's value, instead of the first theta
        steps, to damp the oscillations Crank-Nicolson shows after a sudden
        change (Rannacher, Numer. Math. 43 (1984), from memory).
        None means 4 when 0.5 <= theta < 1, else 0.
    solver : str
        Linear solver name ("auto", "direct", "cg-jacobi", "cg-amg").
    output_times : tuple of float
        Extra times [s] the stepper must land on exactly.
    tolerance : float, optional
        Adaptive steps: largest estimated time-step error [K]; ``step`` is
        then the largest step. None: fixed steps of ``step``.
    error_estimate : bool
        Also march a companion run at half the step to estimate the time
        error of every step (always on with a tolerance).
    """

    end: float
    step: float
    theta: float = 1.0
    mass: str = "consistent"
    start_steps: int | None = None
    solver: str = "auto"
    output_times: tuple = ()
    tolerance: float | None = None
    error_estimate: bool = False


@dataclass
class Problem:
    """Mesh, materials, boundary conditions and initial temperature.

    Attributes
    ----------
    mesh : Mesh
    materials : dict of str to Material
        Keyed by region name; every region of the mesh needs one.
    boundaries : dict of str to Boundary
        Keyed by surface group name; groups not listed are insulated.
    initial : float, dict of str to float, or (n_nodes,) array
        Initial temperature [degC]: uniform, per region name, or nodal.
        Nodes of prescribed-temperature groups take their schedule value
        at t = 0 instead.
    """

    mesh: Mesh
    materials: dict
    boundaries: dict = field(default_factory=dict)
    initial: float | dict | np.ndarray = 20.0
