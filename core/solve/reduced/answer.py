"""Answers of a reduced model: outputs over time from small matrices, the error estimate, and
nodal fields rebuilt only where asked."""

from __future__ import annotations

import time as _time
from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
from heatsoak.core.errors import InputError
from heatsoak.core.problem.problem import Problem, TimeSettings
from heatsoak.core.solve.reduced.fingerprint import stale_reasons
from heatsoak.core.solve.reduced.inputs import initial_coefficients, schedules, values
from heatsoak.core.solve.reduced.integrate import exact_steps, theta_steps
from heatsoak.core.solve.reduced.model import ModalSystem, ReducedModel, time_grid

__all__ = ["Answer", "Outputs", "answer", "half_step_coordinates", "output_rows", "reconstruct"]

#: Relative round-off level of an answer: the error estimate never reports less than this times the span.
ROUNDOFF = 1e-9

METHODS = {False: "theta-method on the run's time grid", True: "exact in time for piecewise-linear schedules"}


@dataclass
class Outputs:
    """Output matrices of a model: y = Cz z + Cg g(t) for the whole and the coarse basis.

    Attributes
    ----------
    Cz : (k, r); Cz_coarse : (k, r_coarse); Cg : (k, n_groups)
    """

    Cz: np.ndarray
    Cz_coarse: np.ndarray
    Cg: np.ndarray


@dataclass
class Answer:
    """What a reduced model says for one set of schedules.

    Attributes
    ----------
    times : (n_times,) [s], from 0
    outputs : (k, n_times) output values (probe temperatures, region means) [degC]
    z : (r, n_times) modal coordinates; groups : (n_groups, n_times) group temperatures [degC]
    error_estimate : float
        Largest change of any output at any time between this basis and the basis without
        its last shift [K] (the estimate of the error against the full model).
    method : str
        How time was integrated (see :data:`METHODS`).
    answer_s : float
        Wall time of the answer [s].
    """

    times: np.ndarray
    outputs: np.ndarray
    z: np.ndarray
    groups: np.ndarray
    error_estimate: float
    method: str
    answer_s: float


def output_rows(model: ReducedModel, rows) -> Outputs:
    """Output matrices of ``rows`` (k, n_nodes) sparse or dense: each row weights nodal temperatures."""
    rows = sp.csr_matrix(rows)
    if rows.shape[1] != model.n_nodes:
        raise InputError(f"output rows have {rows.shape[1]} columns; the model's mesh has {model.n_nodes} nodes")
    Cz = np.asarray(rows[:, model.free] @ model.basis)
    ng = len(model.group_names)
    E = sp.csr_matrix((np.ones(model.fixed.size), (np.arange(model.fixed.size), model.fixed_which)),
                      shape=(model.fixed.size, ng))
    Cg = np.asarray((rows[:, model.fixed] @ E).todense()).reshape(rows.shape[0], ng)
    return Outputs(Cz=Cz, Cz_coarse=Cz @ model.coarse_map, Cg=Cg)


def _integrate(sys, loads, groups, times, thetas, z0, exact: bool):
    return exact_steps(sys, loads, groups, times, z0) if exact else theta_steps(sys, loads, groups, times, thetas, z0)


def answer(model: ReducedModel, problem: Problem, time: TimeSettings, outputs: Outputs,
           exact_time: bool = False, check: bool = True) -> Answer:
    """Answer ``problem``'s schedules with ``model`` on the run's time grid.

    Parameters
    ----------
    model : ReducedModel
    problem : Problem
        Same mesh, materials, boundary kinds and h as the model (else InputError naming what changed).
    time : TimeSettings
    outputs : Outputs
    exact_time : bool
        Integrate exactly for piecewise-linear schedules instead of with the run's theta-method.
    check : bool
        Compare the problem with the model's fingerprint first (a caller answering many
        schedule changes of one checked case may skip it).
    """
    stale = stale_reasons(model, problem, time) if check else []
    if stale:
        raise InputError("the reduced model is stale: " + "; ".join(stale))
    t0 = _time.perf_counter()
    loads, groups = schedules(problem, model.load_names, model.group_names)
    times, thetas = time_grid(problem, time)
    c0 = initial_coefficients(problem)
    # the model and its coarse part marched together: one pass over the steps for both
    both = ModalSystem(*(np.concatenate([getattr(model.system, k), getattr(model.coarse, k)])
                         for k in ("lam", "Fr", "Kp", "Mp", "G0")))
    Z = _integrate(both, loads, groups, times, thetas, both.G0 @ c0, exact_time)
    z, zc = Z[:model.size], Z[model.size:]
    g = values(groups, times)
    y = outputs.Cz @ z + outputs.Cg @ g
    yc = outputs.Cz_coarse @ zc + outputs.Cg @ g
    span = float(np.ptp(y)) if y.size else 0.0
    est = float(np.abs(y - yc).max()) if y.size else 0.0
    return Answer(times=times, outputs=y, z=z, groups=g, error_estimate=max(est, ROUNDOFF * max(span, 1.0)),
                  method=METHODS[bool(exact_time)], answer_s=_time.perf_counter() - t0)


def reconstruct(model: ReducedModel, ans: Answer, steps=None, nodes=None) -> np.ndarray:
    """Nodal temperatures (n_steps, n) [degC] at the answer's ``steps`` (indices; default all),
    at ``nodes`` (default every node of the mesh)."""
    steps = np.arange(ans.times.size) if steps is None else np.atleast_1d(steps)
    nodes = np.arange(model.n_nodes) if nodes is None else np.asarray(nodes)
    pos = np.full(model.n_nodes, -1)
    pos[model.free] = np.arange(model.free.size)
    fixed_pos = np.full(model.n_nodes, -1)
    fixed_pos[model.fixed] = np.arange(model.fixed.size)
    out = np.empty((steps.size, nodes.size))
    f = pos[nodes] >= 0
    out[:, f] = (model.basis[pos[nodes[f]]] @ ans.z[:, steps]).T
    p = ~f
    out[:, p] = ans.groups[model.fixed_which[fixed_pos[nodes[p]]]][:, steps].T
    return out


def half_step_coordinates(model: ReducedModel, problem: Problem, time: TimeSettings) -> np.ndarray:
    """Modal coordinates (r, n_times) of a companion answer that takes two half steps (same theta)
    over every step of the run's grid, at the run's times: the step-doubling partner of
    :func:`answer` for the run's time-error estimate."""
    loads, groups = schedules(problem, model.load_names, model.group_names)
    times, thetas = time_grid(problem, time)
    fine = np.empty(2 * times.size - 1)
    fine[0::2], fine[1::2] = times, 0.5 * (times[:-1] + times[1:])
    z0 = model.system.G0 @ initial_coefficients(problem)
    return theta_steps(model.system, loads, groups, fine, np.repeat(thetas, 2), z0)[:, 0::2]
