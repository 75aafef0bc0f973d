"""Adaptive steps: grow and shrink the step to keep the estimated error per step under a tolerance.

Step sizes are ``dt_max / 2^k`` (k = 0 .. :data:`MAX_LEVEL`), so a direct
solver factorises each size once and reuses it whenever the step comes back
to it; the companion run of the error estimate halves them, which is the
next size down. A step is shortened (or stretched by at most a quarter) only
to land exactly on a schedule corner, a jump or an output time.

The controller is the usual one for an error per step (Hairer, Norsett &
Wanner, Solving ODEs I, sec. II.4, from memory): with l the estimated local
error of a step of size h and order p, the next size is
h * min(GROW, max(SHRINK, SAFETY (tol_l / l)^(1/(p+1)))), rounded down to a
cached size; a step with l > tol_l is taken again with the smaller size.

Errors of many steps add up before diffusion damps them: on a slow ramp the
lag of backward Euler grows over all its steps, and a plain error-per-step
control left the total 1.5-4x above the tolerance (measured on the bar
cases of tests/test_time_error.py). So each step may add what is left of
G = GLOBAL_SHARE tol once the estimated total error so far, carried through
the step, is taken off, and at least its share of G by length:

    tol_l = max(G - |R E_n|, G h / end).

|E_{n+1}| <= |R E_n| + l_n: the total stays under G while the first term
rules, and the second adds at most G over the whole run, so the total stays
under 2 G = tol as long as the homogeneous step does not amplify errors
(diffusion damps them). The second term lets the step grow again once the
field settles, when the error of an earlier ramp is still being carried.
"""

from __future__ import annotations

import numpy as np
from heatsoak.core.solve.stepping.base import MERGE
from heatsoak.core.solve.stepping.error import step_order

#: Without a step in the case file, the largest step of an adaptive run is end / ADAPTIVE_STEPS
#: (so probe curves have at least this many points).
ADAPTIVE_STEPS = 32
#: Smallest step is dt_max / 2^MAX_LEVEL.
MAX_LEVEL = 30
#: First step: dt_max / 2^START_LEVEL (the controller grows it within a few steps).
START_LEVEL = 6
#: A step may be stretched by this share of its size to land on a mark.
STRETCH = 0.25
#: Share of the tolerance the estimated total error is held to.
GLOBAL_SHARE = 0.5
#: Controller constants (common practice, no source).
SAFETY, GROW, SHRINK = 0.9, 4.0, 0.1


def next_level(level: int, taken: float, dt_max: float, local: float, tol: float, order: int) -> int:
    """Level k of the next step size dt_max / 2^k after a step of size ``taken`` [s] made
    the local error ``local`` [K] (tolerance ``tol`` [K], order ``order``)."""
    fac = GROW if local <= 0.0 else min(GROW, max(SHRINK, SAFETY * (tol / local) ** (1.0 / (order + 1))))
    h = taken * fac
    if fac >= 1.0:
        h = max(h, dt_max / 2.0**level)
    k = int(np.ceil(np.log2(dt_max / h) - 1e-9))
    return int(min(max(k, 0), MAX_LEVEL))


def adaptive_march(stepper, T: np.ndarray, tolerance: float, dt_max: float, marks, restarts, start_steps: int):
    """Generator of (t_new, T_new) of an adaptive run of ``stepper`` from ``T`` at t = 0.

    Parameters
    ----------
    stepper : ThetaMethod
        With an error estimator; provides ``_attempt``, ``snapshot``, ``restore``.
    tolerance : float
        Largest estimated error [K] (see the module doc).
    dt_max : float
        Largest step [s].
    marks : array of float
        Times [s] steps must land on (the end included).
    restarts : set of float
        Times [s] after which the first ``start_steps`` steps are damped (backward Euler).
    """
    marks = np.unique(np.append(np.asarray(marks, dtype=float), stepper.end))
    goal = GLOBAL_SHARE * tolerance
    t, level, damped = 0.0, START_LEVEL, start_steps
    est = stepper.estimator
    while t < stepper.end:
        h = dt_max / 2.0**level
        mark = marks[np.searchsorted(marks, t, side="right")]
        # a step within a quarter of its size of a mark goes to the mark: no sliver step after it
        t_new = float(mark) if t + (1.0 + STRETCH) * h >= mark - MERGE * h else t + h
        theta = 1.0 if damped > 0 else stepper.theta
        saved = stepper.snapshot()
        T_new = stepper._attempt(t, t_new, T, theta, local=True)
        order = step_order(theta)
        tol = max(goal - est.carried, goal * (t_new - t) / stepper.end)
        if est.local > tol and level < MAX_LEVEL:
            est.reject()
            stepper.restore(saved)
            stepper.rejected += 1
            level = max(level + 1, next_level(level, t_new - t, dt_max, est.local, tol, order))
            continue
        est.accept()
        level = next_level(level, t_new - t, dt_max, est.local, tol, order)
        damped = start_steps if t_new in restarts else damped - 1
        t, T = t_new, T_new
        yield t, T
