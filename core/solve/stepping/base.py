"""Bookkeeping shared by time integrators: time grid, progress, cancellation.

A subclass implements :meth:`Integrator._advance`, one step from ``t`` to
``t + dt``; the base class owns the time, the step count, the status, the
landing on breakpoints and output times, and the progress reports.
"""

from __future__ import annotations

import time as _time
from dataclasses import dataclass

import numpy as np
from heatsoak.core.errors import InputError
from heatsoak.core.fem.operators import jump_times, problem_schedules

#: Relative tolerance for merging a grid time with a breakpoint [fraction of dt].
MERGE = 1e-6
#: Most steps a run may take (1e7 steps of even a tiny mesh take hours).
MAX_STEPS = 10_000_000


@dataclass
class Progress:
    """Where a run is, for progress bars.

    Attributes
    ----------
    step : int
        Steps done.
    t, end : float
        Simulated time reached and end time [s].
    fraction : float
        t / end.
    elapsed_s, eta_s : float
        Wall time spent stepping and estimated wall time of the steps left [s].
    total : int
        Steps the run will take (0 when unknown).
    """

    step: int
    t: float
    end: float
    fraction: float
    elapsed_s: float
    eta_s: float
    total: int = 0


def step_times(end: float, dt: float, marks=()) -> np.ndarray:
    """End times of every step: the grid k*dt plus the marks in (0, end], merged.

    Grid points closer than ``MERGE * dt`` to a mark are replaced by the mark,
    so no sliver steps appear.

    Parameters
    ----------
    end, dt : float [s]
    marks : iterable of float [s]
        Times the steps must land on exactly (schedule breakpoints, outputs).

    Returns
    -------
    (n_steps,) increasing array ending with ``end``.
    """
    count = end / dt if dt > 0 else np.inf
    if not count <= MAX_STEPS:
        raise InputError(f"time end {end:g} s with step {dt:g} s gives {count:.3g} steps; "
                         f"at most {MAX_STEPS:d} are allowed, use a larger step")
    n = int(np.floor(count * (1 + 1e-12)))
    grid = dt * np.arange(1, n + 1)
    marks = np.asarray(marks, dtype=float).ravel()
    marks = np.unique(marks[(marks > 0.0) & (marks < end)])
    pts = np.concatenate([grid[grid < end], marks, [end]])
    pts.sort()
    keep = np.concatenate([[True], np.diff(pts) > MERGE * dt])
    pts = pts[keep]
    # prefer the exact mark where a grid point merged with it
    if marks.size:
        right = np.clip(np.searchsorted(pts, marks), 1, len(pts) - 1)
        left = right - 1
        nearest = np.where(np.abs(pts[left] - marks) <= np.abs(pts[right] - marks), left, right)
        pts[nearest] = marks
    pts[-1] = end
    return pts


def default_start_steps(theta: float, start_steps: int | None) -> int:
    """Backward-Euler half steps at the start and after jumps: as given, else 4 for
    0.5 <= theta < 1 (where Crank-Nicolson-like methods ring after a sudden change), else 0."""
    if start_steps is not None:
        return int(start_steps)
    return 4 if 0.5 <= theta < 1.0 else 0


def plan_steps(end: float, dt: float, marks=(), jumps=(), start_steps: int = 0):
    """Step end times with the damped start steps, and which of them are damped.

    After t = 0 and after every jump time in ``jumps``, the first
    ``(start_steps + 1) // 2`` steps of :func:`step_times` are split into
    backward-Euler half steps, ``start_steps`` steps in all (Rannacher start).

    Returns
    -------
    grid : (n_steps,) increasing array ending with ``end`` [s]
    damped : (k,) array, the end times of the damped steps [s]
    """
    grid = step_times(end, dt, marks)
    if start_steps <= 0:
        return grid, np.zeros(0)
    n_full = (start_steps + 1) // 2
    restarts = np.concatenate([[0.0], np.asarray(jumps, dtype=float)])
    restarts = np.unique(restarts[restarts < end])
    damped = []
    for r in restarts:  # one pass per jump, each a binary search
        i = int(np.searchsorted(grid, r, side="right"))
        lead = np.concatenate([[r], grid[i:i + n_full]])
        damped.append(np.sort(np.concatenate([0.5 * (lead[:-1] + lead[1:]), lead[1:]]))[:start_steps])
    damped = np.concatenate(damped)
    return np.unique(np.concatenate([damped, grid])), damped


def planned_steps(problem, time):
    """(step end times [s], end times of the damped steps) a run of ``problem`` with ``time``
    (TimeSettings) will take, found from its schedules without assembling anything."""
    scheds = problem_schedules(problem)
    marks = [np.asarray(s.breakpoints(), dtype=float) for s in scheds]
    marks.append(np.asarray(time.output_times, dtype=float))
    jumps = np.concatenate([np.zeros(0), *(jump_times(s) for s in scheds)])
    start = default_start_steps(float(time.theta), time.start_steps)
    return plan_steps(time.end, time.step, np.concatenate(marks), jumps, start)


def planned_step_times(problem, time) -> np.ndarray:
    """The step end times [s] a run of ``problem`` with ``time`` will take (for ``check``)."""
    return planned_steps(problem, time)[0]


class Integrator:
    """Base class of time integrators of M dT/dt + K T = F(t).

    Parameters
    ----------
    end : float
        End time [s].
    progress : callable, optional
        Called with a :class:`Progress` after every step.
    """

    def __init__(self, end: float, progress=None):
        self.end = float(end)
        self.progress = progress
        self.t = 0.0
        self.step_count = 0
        self.status = "ready"
        self._cancel = False

    def cancel(self):
        """Ask the run to stop after the current step; the generator then ends."""
        self._cancel = True

    def initial_state(self) -> np.ndarray:
        raise NotImplementedError

    def prepare(self) -> None:
        """Build what the first step needs (a factorisation, a preconditioner) ahead of it,
        so the time of :meth:`steps` is the time of the steps alone. Optional."""

    def times(self) -> np.ndarray:
        """End times of the steps (see :func:`step_times`)."""
        raise NotImplementedError

    def _advance(self, t: float, t_new: float, T: np.ndarray) -> np.ndarray:
        """Return the state at ``t_new`` from the state ``T`` at ``t``."""
        raise NotImplementedError

    def _march(self, T: np.ndarray):
        """Generator of (t_new, T_new), one pair per step from the state ``T`` at ``self.t``.

        The default takes the fixed grid of :meth:`times`; an adaptive
        integrator overrides it and picks each step as it goes.
        """
        for t_new in self.times():
            T = self._advance(self.t, float(t_new), T)
            yield float(t_new), T

    def _steps_expected(self) -> int | None:
        """Number of steps the run will take, if known in advance (for the time left)."""
        return None

    def steps(self):
        """Generator of (t, T): first (0, T0), then one pair per step.

        T is a new (n_nodes,) array every time [degC].
        """
        T0 = self.initial_state()
        self.status = "running"
        start = _time.perf_counter()
        yield self.t, T0.copy()
        expected = self._steps_expected()
        if self._cancel:
            self.status = "cancelled"
            return
        for t_new, T in self._march(T0):
            self.t = t_new
            self.step_count += 1
            if self.progress is not None:
                el = _time.perf_counter() - start
                frac = self.t / self.end
                if expected:
                    eta = el * (expected - self.step_count) / self.step_count
                else:
                    eta = el * (1.0 - frac) / max(frac, 1e-300)
                self.progress(Progress(self.step_count, self.t, self.end, frac, el, eta, expected or 0))
            yield self.t, T.copy()
            if self._cancel and self.t < self.end:
                self.status = "cancelled"
                return
        self.status = "complete"
