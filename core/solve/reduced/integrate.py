"""Time integration of the reduced system in modal form: z' + lam z = f(t), lam (r,) [1/s].

Two ways, both vectorised over modes and over steps except for one short loop
over the steps (a few microseconds each):

* :func:`theta_steps`: the theta-method on the case's own time grid (steps on
  every breakpoint, damped start steps), exactly the full run's scheme applied
  to the projected system, so the two differ only by the basis error;
* :func:`exact_steps`: exact for piecewise-linear inputs (ramps, tables,
  constants): each interval is integrated in closed form, so there is no
  time-step error at all.

Forcing: f = Fr s(t) - Kp g(t) - Mp g'(t) with s the load schedules and g the
temperature-group schedules. A jump of g moves the prescribed nodes only, as
in the full run (the free nodes are continuous).
"""

from __future__ import annotations

import numpy as np
from heatsoak.core.solve.reduced.inputs import left_values, values

__all__ = ["exact_steps", "theta_steps"]


def _recurrence(z0: np.ndarray, alpha: np.ndarray, beta: np.ndarray) -> np.ndarray:
    """z_{n+1} = alpha_n z_n + beta_n; returns (r, n_steps + 1) with z0 first.

    A parallel prefix scan over the steps (Hillis & Steele, CACM 29 (1986), from memory):
    log2(n) vectorised passes, each composing every affine step map with the one 2^k
    steps before it. Only products of the alphas (|alpha| <= 1 for stable steps) occur,
    so nothing overflows.
    """
    a, b = np.array(alpha.T), np.array(beta.T)  # (n, r) copies
    if b.shape[0]:
        b[0] += a[0] * z0
    s = 1
    while s < b.shape[0]:
        b[s:] += a[s:] * b[:-s]
        a[s:] *= a[:-s]
        s *= 2
    return np.vstack([z0[None, :], b]).T


def _inputs(sys, loads, groups, t0, t1):
    """Schedule values over steps: loads at t0 and left of t1, groups likewise, (n_inputs, n_steps)."""
    return values(loads, t0), left_values(loads, t0, t1), values(groups, t0), left_values(groups, t0, t1)


def theta_steps(sys, loads, groups, times: np.ndarray, thetas: np.ndarray, z0: np.ndarray) -> np.ndarray:
    """Modal coordinates (r, n_times) of the theta-method on ``times`` (first 0).

    Parameters
    ----------
    sys : object with ``lam`` (r,), ``Fr`` (r, n_loads), ``Kp``, ``Mp`` (r, n_groups)
    loads, groups : lists of schedules
    times : (n_times,) [s], times[0] = 0
    thetas : (n_times - 1,) theta of each step
    z0 : (r,) initial modal coordinates
    """
    t0, t1 = times[:-1], times[1:]
    dt = t1 - t0
    s0, s1, g0, g1 = _inputs(sys, loads, groups, t0, t1)
    th = thetas[None, :]
    f = sys.Fr @ (th * s1 + (1 - th) * s0) - sys.Kp @ (th * g1 + (1 - th) * g0) - sys.Mp @ ((g1 - g0) / dt)
    lam = sys.lam[:, None]
    den = 1.0 + th * lam * dt
    return _recurrence(z0, 1.0 - dt * lam / den, dt * f / den)


def _phi(x: np.ndarray):
    """(1 - e^-x)/x and (x - 1 + e^-x)/x^2, stable near x = 0."""
    small = np.abs(x) < 1e-4
    xs = np.where(small, 1.0, x)
    em = -np.expm1(-xs)
    p1 = np.where(small, 1 - x / 2 + x * x / 6, em / xs)
    p2 = np.where(small, 0.5 - x / 6 + x * x / 24, (xs - em) / (xs * xs))
    return p1, p2


def exact_steps(sys, loads, groups, times: np.ndarray, z0: np.ndarray) -> np.ndarray:
    """Modal coordinates (r, n_times) integrated exactly between ``times``.

    Exact when every schedule is linear within each interval of ``times``
    (true when ``times`` contains every breakpoint, as the run's grid does).
    """
    t0, t1 = times[:-1], times[1:]
    h = t1 - t0
    s0, s1, g0, g1 = _inputs(sys, loads, groups, t0, t1)
    rate = (g1 - g0) / h
    f0 = sys.Fr @ s0 - sys.Kp @ g0 - sys.Mp @ rate
    c = (sys.Fr @ (s1 - s0) - sys.Kp @ (g1 - g0)) / h
    x = sys.lam[:, None] * h
    p1, p2 = _phi(x)
    return _recurrence(z0, np.exp(-x), h * p1 * f0 + h * h * p2 * c)
