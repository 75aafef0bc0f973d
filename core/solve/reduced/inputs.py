"""The inputs of a reduced model: schedules in a fixed order and the initial field's coefficients."""

from __future__ import annotations

import dataclasses

import numpy as np
from heatsoak.core.errors import InputError
from heatsoak.core.fem.operators import initial_field, input_schedules
from heatsoak.core.problem.problem import Problem

__all__ = ["initial_coefficients", "initial_directions", "schedules", "values", "left_values"]


def schedules(problem: Problem, load_names, fixed_names):
    """(load schedules, group schedules) of ``problem`` in the model's order.

    Raises InputError naming the input when the problem's inputs are not the
    model's (a fingerprint check catches this first; this guards the order).
    """
    loads, fixed = input_schedules(problem)
    got = ([n for n, _ in loads], [n for n, _ in fixed])
    if got != (list(load_names), list(fixed_names)):
        raise InputError(f"the reduced model has inputs {list(load_names) + list(fixed_names)}, "
                         f"the case {got[0] + got[1]}")
    return [s for _, s in loads], [s for _, s in fixed]


def initial_directions(problem: Problem):
    """Nodal fields (n_nodes, n_dirs) whose combination is any initial field the model takes.

    One column per region (the field of value 1 in that region, averaged at
    shared nodes as :func:`~heatsoak.core.fem.operators.initial_field` does),
    or a single column for a nodal initial field.
    """
    init = problem.initial
    if not np.isscalar(init) and not isinstance(init, dict):
        return initial_field(problem)[:, None]
    names = problem.mesh.region_names
    cols = [initial_field(dataclasses.replace(problem, initial={r: float(r == name) for r in names}))
            for name in names]
    return np.column_stack(cols)


def initial_coefficients(problem: Problem) -> np.ndarray:
    """Weights (n_dirs,) of :func:`initial_directions` that give the problem's initial field [degC]."""
    init = problem.initial
    if isinstance(init, dict):
        return np.array([float(init[r]) for r in problem.mesh.region_names])
    if np.isscalar(init):
        return np.full(len(problem.mesh.region_names), float(init))
    return np.ones(1)


def values(scheds, t) -> np.ndarray:
    """Values (n_schedules, n_times) of ``scheds`` at times ``t`` (n_times,) [s]."""
    t = np.asarray(t, dtype=float)
    return np.array([np.broadcast_to(np.asarray(s(t), dtype=float), t.shape) for s in scheds]).reshape(-1, t.size)


def left_values(scheds, t0, t1) -> np.ndarray:
    """Values (n_schedules, n_steps) as time rises to ``t1`` within steps from ``t0``.

    Steps land on every breakpoint, so each schedule is linear within a step and
    its limit from the left at ``t1`` is 2 s((t0 + t1)/2) - s(t0), as in
    :func:`~heatsoak.core.fem.operators.left_value`, for all steps at once.
    """
    t0, t1 = np.asarray(t0, dtype=float), np.asarray(t1, dtype=float)
    return 2.0 * values(scheds, 0.5 * (t0 + t1)) - values(scheds, t0)
