"""Estimate of the time-discretisation error of a run: Richardson extrapolation with a companion run.

Beside the run (steps dt), a companion marches the same problem from the same
initial state taking two steps of dt/2 over every step of the run, with the
same theta (backward Euler where the run is damped), landing on the same
times. If the run's global error behaves as C dt^p, the companion's is
C (dt/2)^p, and

    E_n = (T_n - U_n) 2^p / (2^p - 1)

estimates the error T_n - T(t_n) of the run at every node (global Richardson
extrapolation, "step doubling"; Richardson 1911; Hairer, Norsett & Wanner,
Solving ODEs I, sec. II.4, and Skeel, Numer. Math. 48 (1986), "Thirteen ways
to estimate global error", from memory). The estimate is of the time error
only: the companion uses the same mesh.

The factor 2^p / (2^p - 1) is taken with p = 1 for every theta. Backward
Euler is first order. Crank-Nicolson is second order only once dt is small
against the time constants of the mesh's fastest modes; at the steps people
take (alpha dt / h^2 of 1 and more) those modes are amplified by about -1 per
step in both runs and their error does not shrink by 4 when dt halves.
Measured against runs with a step 32x smaller (tests/test_time_error.py):
with p = 2 the estimate of Crank-Nicolson runs was 0.56-0.65 of the true
error on such steps, with p = 1 it is 0.84-1.0 there and at most 1.5x
(the factor 2 over 4/3) once the steps are small.

For step-size control the error made in one step is wanted, not the total.
The error of the run obeys e_{n+1} = R e_n + l_n with R the homogeneous step
(the run's own matrices), so

    l_n ~ E_{n+1} - R E_n

costs one more solve with the step's cached matrix; it is scaled from the
run's p to the step's own order (a damped backward-Euler step in a
Crank-Nicolson run is first order).

Cost: two companion solves per step (the half-step matrices are factorised
once per step size, like the run's) and, when the local error is asked for,
one more.
"""

from __future__ import annotations

import numpy as np


def richardson_factor(order: int) -> float:
    """2^p / (2^p - 1): the error of the coarser of two runs of step ratio 2 over their difference."""
    return 2.0**order / (2.0**order - 1.0)


def step_order(theta: float) -> int:
    """Order of accuracy in time of the theta-method: 2 at theta = 1/2, else 1."""
    return 2 if theta == 0.5 else 1


class StepDoubling:
    """Companion run at half the step and the error estimate it gives.

    Parameters
    ----------
    stepper : ThetaMethod
        Provides ``bare_step(t, t_new, T, theta)`` and ``propagate(dt, theta, E)``.

    Attributes
    ----------
    error : (n_nodes,) array
        Estimated error of the run's temperatures at the last accepted step [K].
    local : float
        Estimated error made in the last attempted step, max over nodes [K]
        (only when :meth:`step` was asked for it).
    carried : float
        Max over nodes of the error before that step carried through it [K] (likewise).
    """

    #: 2^p / (2^p - 1) with p = 1 (see the module doc).
    factor = richardson_factor(1)

    def __init__(self, stepper):
        self.stepper = stepper
        self.error = None
        self.local = 0.0
        self.carried = 0.0
        self._U = None
        self._pending = None

    def start(self, T0: np.ndarray) -> None:
        """Start the companion from the run's initial state ``T0`` (n_nodes,) [degC]."""
        self._U = np.array(T0, dtype=float)
        self.error = np.zeros_like(self._U)
        self._pending = None

    def step(self, t: float, t_new: float, T_new: np.ndarray, theta: float, local: bool = False,
             increment=None) -> None:
        """March the companion over the run's step from ``t`` to ``t_new`` (two half steps) and
        estimate the error of the run's ``T_new``; kept pending until :meth:`accept`.

        ``increment``: the run's free-node increment over the step [K]; half of it starts an
        iterative solver on each half step.
        """
        tm = t + 0.5 * (t_new - t)
        guess = None if increment is None else 0.5 * increment
        U = self.stepper.bare_step(t, tm, self._U, theta, guess)
        U = self.stepper.bare_step(tm, t_new, U, theta, guess)
        E = self.factor * (T_new - U)
        if local:
            carried = self.stepper.propagate(t_new - t, theta, self.error)
            self.carried = float(np.max(np.abs(carried), initial=0.0))
            scale = richardson_factor(step_order(theta)) / self.factor
            self.local = scale * float(np.max(np.abs(E - carried), initial=0.0))
        self._pending = (U, E)

    def accept(self) -> None:
        """Keep the pending step (the run accepted it)."""
        self._U, self.error = self._pending
        self._pending = None

    def reject(self) -> None:
        """Forget the pending step (the run takes it again, shorter)."""
        self._pending = None
