"""Building, saving and loading a reduced model."""

from __future__ import annotations

import json
import time as _time
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import scipy.sparse as sp
from heatsoak.core.errors import InputError
from heatsoak.core.fem.operators import build_operators, input_schedules
from heatsoak.core.problem.problem import Problem, TimeSettings
from heatsoak.core.solve.reduced.basis import extend, shift_list, shift_moments, shifted_solver, solve_columns
from heatsoak.core.solve.reduced.fingerprint import fingerprint
from heatsoak.core.solve.reduced.inputs import initial_coefficients, initial_directions
from heatsoak.core.solve.reduced.integrate import theta_steps
from heatsoak.core.solve.stepping.base import planned_steps

__all__ = ["ModalSystem", "ReducedModel", "build_reduced", "load_model", "save_model", "time_grid"]

#: Version of the saved file layout; a file of another version is rebuilt.
FORMAT = 1


@dataclass
class ModalSystem:
    """z' + diag(lam) z = Fr s(t) - Kp g(t) - Mp g'(t), z(0) = G0 c (modal coordinates).

    Attributes
    ----------
    lam : (r,) eigenvalues of the reduced K on the M-orthonormal basis [1/s]
    Fr : (r, n_loads) projected load vectors [W per unit of schedule]
    Kp, Mp : (r, n_groups) projected coupling to the temperature groups (K and M blocks)
    G0 : (r, n_dirs) M-projections of the initial-field directions
    """

    lam: np.ndarray
    Fr: np.ndarray
    Kp: np.ndarray
    Mp: np.ndarray
    G0: np.ndarray


@dataclass
class ReducedModel:
    """A reduced model of one case's mesh, materials, convection and time settings.

    Attributes
    ----------
    basis : (n_free, r) modal basis vectors on the free nodes (V^T M V = I, V^T K V = diag lam)
    system : ModalSystem of the whole basis
    coarse : ModalSystem of the basis without its last shift (for the error estimate)
    coarse_map : (r, r_coarse) the coarse basis in coordinates of ``basis``
    free, fixed : node numbers; fixed_which : (n_fixed,) group of each fixed node
    n_nodes : int
    load_names, group_names : case keys of the inputs, in order
    fingerprint : dict, see :func:`~heatsoak.core.solve.reduced.fingerprint.fingerprint`
    info : dict, build facts (shifts, sizes, times)
    """

    basis: np.ndarray
    system: ModalSystem
    coarse: ModalSystem
    coarse_map: np.ndarray
    free: np.ndarray
    fixed: np.ndarray
    fixed_which: np.ndarray
    n_nodes: int
    load_names: list
    group_names: list
    fingerprint: dict
    info: dict = field(default_factory=dict)

    @property
    def size(self) -> int:
        return self.basis.shape[1]


def time_grid(problem: Problem, time: TimeSettings):
    """(times (n+1,) from 0, thetas (n,)) of the steps a full run of ``problem`` takes."""
    grid, damped = planned_steps(problem, time)
    thetas = np.where(np.isin(grid, damped), 1.0, float(time.theta))
    return np.concatenate([[0.0], grid]), thetas


class _Blocks:
    """The free/fixed blocks of a problem's operators and the static lifting."""

    def __init__(self, problem: Problem, time: TimeSettings):
        ops = build_operators(problem, time.mass)
        f, p = ops.free, ops.fixed
        K, M = ops.stiffness, ops.mass
        self.ops, self.K = ops, K[f][:, f].tocsr()
        self.Kfp = K[f][:, p].tocsr()
        self.M = M[f] if ops.lumped else M[f][:, f].tocsr()
        self.Mfp = None if ops.lumped else M[f][:, p].tocsr()
        ng = len(ops.fixed_schedules)
        self.E = sp.csr_matrix((np.ones(p.size), (np.arange(p.size), ops.fixed_which)), shape=(p.size, ng))
        self.loads = np.column_stack([v[f] for _, v, _ in ops.loads]) if ops.loads else np.zeros((f.size, 0))
        self.D0 = initial_directions(problem)[f]
        self.singular = ng == 0 and ops.convection.nnz == 0  # insulated and flux only: K has constants
        KE = (self.Kfp @ self.E).toarray()
        self.solver = time.solver
        self.static = None if self.singular else shifted_solver(self.K, self.M, 0.0, 3 * ng + 8, time.solver)
        self.L = -solve_columns(self.static, KE) if ng else np.zeros((f.size, 0))
        ME = (self.Mfp @ self.E).toarray() if self.Mfp is not None else np.zeros_like(self.L)
        self.rates = self._m(self.L) + ME

    def _m(self, X):
        return self.M[:, None] * X if not sp.issparse(self.M) else self.M @ X

    def moments(self, s: float, B: np.ndarray, count: int) -> np.ndarray:
        """``count`` moment blocks of the inputs ``B`` at shift ``s`` (the static factor reused at 0)."""
        lin = self.static if s == 0 else shifted_solver(self.K, self.M, s, count * B.shape[1], self.solver)
        return shift_moments(lin, self.M, B, count)

    def rhs(self) -> np.ndarray:
        """Input columns of the Krylov solves: loads, group rates, initial directions (through M)."""
        return np.hstack([self.loads, self.rates, self._m(self.D0), self._m(self.L)])

    def modal(self, V: np.ndarray, MV: np.ndarray):
        """(eigenvector rotation Q, ModalSystem) of basis V."""
        Kr = V.T @ (self.K @ V)
        lam, Q = np.linalg.eigh(0.5 * (Kr + Kr.T))
        W = V @ Q
        Mp = W.T @ (self.Mfp @ self.E).toarray() if self.Mfp is not None else np.zeros((W.shape[1], self.E.shape[1]))
        return Q, ModalSystem(lam=lam, Fr=W.T @ self.loads, Kp=W.T @ (self.Kfp @ self.E).toarray(), Mp=Mp,
                              G0=(MV @ Q).T @ self.D0)


def _training_field(W, sys, problem, time):
    """The case's own answer on the free nodes (n_free, n_samples) at its first 8 steps and
    16 more spread over the run (where the basis error of a start or a jump shows first)."""
    loads, groups = ([s for _, s in x] for x in input_schedules(problem))
    times, thetas = time_grid(problem, time)
    Z = theta_steps(sys, loads, groups, times, thetas, sys.G0 @ initial_coefficients(problem))
    n = len(times)
    idx = np.unique(np.concatenate([np.arange(min(n, 9)), np.linspace(0, n - 1, 16).astype(int)]))
    return W @ Z[:, idx]


def build_reduced(problem: Problem, time: TimeSettings, tol: float = 1e-4, max_shifts: int = 17,
                  min_shifts: int = 4, moments: int = 2, progress=None) -> ReducedModel:
    """Build the reduced model of ``problem`` for ``time`` settings.

    Shifts (:func:`~heatsoak.core.solve.reduced.basis.shift_list`) are added one at a time;
    after each, the case's own schedules are answered and the basis stops growing when the
    field at 12 sampled times changed by at most ``tol`` times its span (never below 1 K)
    at every free node. One sparse solve per shift and input column.

    Parameters
    ----------
    problem : Problem
    time : TimeSettings
    tol : float
        Relative change that ends the growth (default 1e-4).
    max_shifts, min_shifts : int
        Bounds on the number of shifts beyond the static one.
    moments : int
        Moments matched per shift (blocks A^-1 B, A^-1 M A^-1 B, ... from one factor).
    progress : callable, optional
        Called with a line of text after each shift.
    """
    t_start = _time.perf_counter()
    b = _Blocks(problem, time)
    V, MV = np.zeros((b.K.shape[0], 0)), np.zeros((b.K.shape[0], 0))
    V, MV, _ = extend(V, MV, np.hstack([b.L, b.D0]), b.M)
    B = b.rhs()
    lo = 0.1 / time.end
    if not b.singular:
        V, MV, _ = extend(V, MV, b.moments(0.0, B, moments), b.M)
        Kr = V.T @ (b.K @ V)
        lo = max(lo, np.linalg.eigvalsh(0.5 * (Kr + Kr.T))[0] / 3.0)
    shifts = ([0.0] if not b.singular else []) + list(shift_list(lo, 10.0 / time.step, max_shifts))
    sizes, used, changes, last = [], [], [], None
    for k, s in enumerate(shifts):
        if k > 0 or b.singular:
            V, MV, added = extend(V, MV, b.moments(s, B, moments), b.M)
            if added == 0:  # this shift's directions are all in the basis already: not a stage
                continue
        sizes.append(V.shape[1])
        used.append(float(s))
        Q, sys = b.modal(V, MV)
        field_now = _training_field(V @ Q, sys, problem, time)
        if last is not None:
            changes.append(float(np.abs(field_now - last).max()) / max(float(np.ptp(field_now)), 1.0))
        last = field_now
        if progress is not None:
            progress(f"shift {k + 1}/{len(shifts)}: s = {s:.3g} 1/s, basis {V.shape[1]}, "
                     f"change {changes[-1] if changes else float('nan'):.2e}")
        if len(used) > min_shifts and max(changes[-2:]) <= tol:
            break
    if len(sizes) < 3:
        raise InputError(f"the reduced model found only {len(sizes)} independent shift blocks; "
                         "it needs three (raise max_shifts)")
    Q, sys = b.modal(V, MV)
    # the coarse model lacks the last two shifts: its answers differ from the model's by about the
    # coarse model's own error, which is larger than the model's, so the estimate errs on the safe side
    rc = sizes[-3]
    Qc, coarse = b.modal(V[:, :rc], MV[:, :rc])
    coarse_map = Q.T[:, :rc] @ Qc
    loads, fixed = input_schedules(problem)
    info = {"shifts": used, "sizes": sizes, "changes": changes, "tol": tol,
            "build_s": _time.perf_counter() - t_start, "free_nodes": int(b.K.shape[0]),
            "warnings": list(b.ops.warnings)}
    return ReducedModel(basis=V @ Q, system=sys, coarse=coarse, coarse_map=coarse_map, free=b.ops.free,
                        fixed=b.ops.fixed, fixed_which=b.ops.fixed_which, n_nodes=problem.mesh.n_nodes,
                        load_names=[n for n, _ in loads], group_names=[n for n, _ in fixed],
                        fingerprint=fingerprint(problem, time), info=info)


_ARRAYS = ("basis", "coarse_map", "free", "fixed", "fixed_which")
_SYSTEM = ("lam", "Fr", "Kp", "Mp", "G0")


def save_model(model: ReducedModel, path) -> None:
    """Write ``model`` to ``path`` (.npz), atomically."""
    path = Path(path)
    arrays = {k: getattr(model, k) for k in _ARRAYS}
    for which in ("system", "coarse"):
        arrays.update({f"{which}_{k}": getattr(getattr(model, which), k) for k in _SYSTEM})
    meta = {"format": FORMAT, "n_nodes": model.n_nodes, "load_names": model.load_names,
            "group_names": model.group_names, "fingerprint": model.fingerprint, "info": model.info}
    tmp = path.with_name(path.name + ".tmp.npz")
    np.savez(tmp, meta=np.array(json.dumps(meta)), **arrays)
    tmp.replace(path)


def load_model(path) -> ReducedModel | None:
    """The model saved at ``path``, or None when there is none or it has another format."""
    path = Path(path)
    if not path.is_file():
        return None
    with np.load(path, allow_pickle=False) as z:
        meta = json.loads(str(z["meta"]))
        if meta.get("format") != FORMAT:
            return None
        systems = {w: ModalSystem(**{k: z[f"{w}_{k}"] for k in _SYSTEM}) for w in ("system", "coarse")}
        return ReducedModel(**{k: z[k] for k in _ARRAYS}, **systems, n_nodes=meta["n_nodes"],
                            load_names=meta["load_names"], group_names=meta["group_names"],
                            fingerprint=meta["fingerprint"], info=meta["info"])
