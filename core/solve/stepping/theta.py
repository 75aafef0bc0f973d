"""The theta-method with time-dependent prescribed temperatures.

For nodes split into free (f) and prescribed (p) ones, a step from t_n to
t_{n+1} = t_n + dt solves

    (M_ff/dt + theta K_ff) T_f^{n+1} =
        (M_ff/dt - (1-theta) K_ff) T_f^n
      - M_fp (T_p^{n+1} - T_p^n)/dt - K_fp (theta T_p^{n+1} + (1-theta) T_p^n)
      + theta F_f^{n+1} + (1-theta) F_f^n,

the theta-method applied to the full system M dT/dt + K T = F with the
prescribed values and their rate of change entering through the coupling
blocks of M and K. It is exact in the sense of the theta-method when T_p is
linear in time over the step (a ramp), since steps land on ramp corners.
No penalty, no large numbers.

Stability (common practice, no source; see e.g. Zienkiewicz & Taylor,
The Finite Element Method, vol. 1, ch. on time stepping, from memory):
theta >= 1/2 is unconditionally stable; theta < 1/2 needs
dt <= 2 / ((1 - 2 theta) lambda_max) with lambda_max the largest eigenvalue
of K v = lambda M v on the free nodes.
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla
from heatsoak.core.errors import InputError, StabilityError
from heatsoak.core.fem.assembly import Assembler
from heatsoak.core.fem.operators import build_operators, left_value
from heatsoak.core.problem.problem import Problem, TimeSettings
from heatsoak.core.solve.linear import choose_solver, make_solver, stiffness_ratio
from heatsoak.core.solve.stepping.adaptive import adaptive_march
from heatsoak.core.solve.stepping.base import Integrator, default_start_steps, plan_steps
from heatsoak.core.solve.stepping.error import StepDoubling

#: Named values of theta.
THETA_PRESETS = {"forward-euler": 0.0, "crank-nicolson": 0.5, "galerkin": 2.0 / 3.0, "backward-euler": 1.0}

#: Largest number of step sizes whose factorisations are kept.
CACHE_SIZE = 8


def lambda_max(K: sp.spmatrix, M) -> float:
    """Largest eigenvalue of K v = lambda M v [1/s] (M a sparse matrix or a diagonal array)."""
    n = K.shape[0]
    if n == 0:
        return 0.0
    if not sp.issparse(M):
        s = 1.0 / np.sqrt(M)
        A = sp.diags(s) @ K @ sp.diags(s)
        if n < 50:
            return float(np.linalg.eigvalsh(A.toarray())[-1])
        return float(spla.eigsh(A, k=1, which="LA", tol=1e-6, return_eigenvectors=False)[0])
    if n < 50:
        import scipy.linalg as sla

        return float(sla.eigh(K.toarray(), M.toarray(), eigvals_only=True)[-1])
    Minv = spla.factorized(sp.csc_matrix(M))
    op = spla.LinearOperator(K.shape, matvec=lambda x: Minv(K @ x), dtype=float)
    # M^-1 K is self-adjoint in the M inner product; a plain Arnoldi on it converges to the top eigenvalue.
    return float(np.max(spla.eigs(op, k=1, which="LR", tol=1e-6, return_eigenvectors=False).real))


def _dot(a: np.ndarray, b: np.ndarray) -> float:
    """a . b without BLAS: a threaded BLAS dot stalls for milliseconds when the other core is busy."""
    return float(np.einsum("i,i->", a, b))


def _matvec(A: np.ndarray, x: np.ndarray) -> np.ndarray:
    """Dense (n, k) @ (k,) without BLAS, for the same reason as :func:`_dot`."""
    return np.einsum("ij,j->i", A, x)


def warm_start(rates: list, t: float, dt: float) -> np.ndarray | None:
    """Initial guess for the increment of the step from t to t + dt [K], shape (free nodes,).

    ``rates`` holds up to two (mid-step time [s], increment / step [K/s]) pairs
    of the steps just taken. With two, the rate is extrapolated linearly to
    this step's middle (an error of order dt^2 where the field evolves
    smoothly, against order dt for the last increment alone); with one, the
    last increment is scaled to this step's length; with none there is no
    guess. Only the iteration count of a Krylov solver depends on it.
    """
    if not rates:
        return None
    m1, r1 = rates[-1]
    if len(rates) == 1:
        return r1 * dt
    m0, r0 = rates[-2]
    w = (t + 0.5 * dt - m1) / (m1 - m0)
    return ((1.0 + w) * r1 - w * r0) * dt


class ThetaMethod(Integrator):
    """Theta-method time stepper of a :class:`Problem`.

    Parameters
    ----------
    problem : Problem
    time : TimeSettings
    progress : callable, optional
        Called with a :class:`~heatsoak.core.solve.stepping.base.Progress` after every step.
    assembler : Assembler, optional
        To reuse a mesh's cached pattern across runs.

    Attributes
    ----------
    factorizations : int
        Number of system matrices factorised (or preconditioners built).
    estimator : StepDoubling or None
        The time-error estimate (``time.error_estimate`` or ``time.tolerance``);
        its ``error`` is the estimated error of the last state yielded [K].
    rejected : int
        Adaptive steps taken again with a smaller size.
    """

    def __init__(self, problem: Problem, time: TimeSettings, progress=None, assembler: Assembler | None = None):
        super().__init__(time.end, progress)
        theta = float(time.theta)
        if not 0.0 <= theta <= 1.0:
            raise InputError(f"theta must be in [0, 1], got {theta}")
        if not (time.step > 0 and time.end > 0):
            raise InputError(f"time step and end must be positive, got step={time.step}, end={time.end}")
        self.problem, self.settings, self.theta = problem, time, theta
        self.ops = build_operators(problem, time.mass, assembler)
        f, p = self.ops.free, self.ops.fixed
        K, M = self.ops.stiffness, self.ops.mass
        self._Kff, self._Kfp = K[f][:, f].tocsr(), K[f][:, p].tocsr()
        if self.ops.lumped:
            self._Mff, self._Mfp = M[f], None
        else:
            self._Mff, self._Mfp = M[f][:, f].tocsr(), M[f][:, p].tocsr()
        self.solver_name, self.solver_reason = self._choose_solver()
        self._precompute_step_terms()
        self._solvers = {}
        self.factorizations = 0
        self.dt_critical = None
        self.tolerance = time.tolerance
        if theta < 0.5:
            self._check_stability()
        self.start_steps = default_start_steps(theta, time.start_steps)
        self._energy = dict(stored_J=0.0, boundary_in_J=0.0, source_in_J=0.0, dirichlet_in_J=0.0)
        self._rates = []  # (mid-step time [s], free-node increment / step [K/s]) of the last two steps
        self._jump_times = set(self.ops.jumps().tolist())
        if self.tolerance is not None and not self.tolerance > 0:
            raise InputError(f"time tolerance must be positive, got {self.tolerance}")
        wanted = time.error_estimate or self.tolerance is not None
        self.estimator = StepDoubling(self) if wanted else None
        self.rejected = 0

    # -- setup -------------------------------------------------------------
    def _choose_solver(self):
        """choose_solver with this problem's size, stiffness ratio (largest step) and step count."""
        s = self.settings
        if len(self.ops.free) == 0:
            return choose_solver(0, s.solver)
        M_diag = self._Mff if self.ops.lumped else self._Mff.diagonal()
        ratio = stiffness_ratio(self._Kff.diagonal(), M_diag, s.step, self.theta)
        steps = int(np.ceil(self.end / s.step))
        return choose_solver(len(self.ops.free), s.solver, nnz=self._Kff.nnz, ratio=ratio, steps=steps)

    def _precompute_step_terms(self):
        """Fixed parts of a step's right-hand side and energy balance, so a step costs one
        mat-vec besides the solve: loads restricted to free nodes, and column sums that
        turn the balance's sums of mat-vecs into dot products."""
        ops, f, p = self.ops, self.ops.free, self.ops.fixed
        n = ops.stiffness.shape[0]
        vecs = [vec for _, vec, _ in ops.loads]
        self._V_f = np.column_stack([v[f] for v in vecs]) if vecs else np.zeros((len(f), 0))
        self._load_sum = np.array([v.sum() for v in vecs])
        self._load_fixed_sum = np.array([v[p].sum() for v in vecs])
        self._load_kind = np.array([k for _, _, k in ops.loads], dtype=object)
        ones_p = np.zeros(n)
        ones_p[p] = 1.0
        self._m_all = ops.mass_apply(np.ones(n))  # 1^T M (M symmetric)
        self._m_fixed = ops.mass_apply(ones_p)  # 1_p^T M
        self._k_fixed = ops.stiffness.T @ ones_p  # 1_p^T (K + H)
        self._h_all = ops.convection.T @ np.ones(n)  # 1^T H

    def _load_coefficients(self, t: float, t_new: float, theta: float) -> np.ndarray:
        """theta-weighted schedule values of the loads over a step, (n_loads,)."""
        s0 = np.array([float(sched(t)) for sched, _, _ in self.ops.loads])
        s1 = np.array([left_value(sched, t, t_new) for sched, _, _ in self.ops.loads])
        return theta * s1 + (1.0 - theta) * s0

    def _check_stability(self):
        lam = lambda_max(self._Kff, self._Mff)
        self.dt_critical = np.inf if lam <= 0 else 2.0 / ((1.0 - 2.0 * self.theta) * lam)
        if self.tolerance is None and self.settings.step > self.dt_critical * (1 + 1e-9):
            raise StabilityError(
                f"time step {self.settings.step:g} s is above the stability limit {self.dt_critical:.4g} s of "
                f"theta = {self.theta:g} on this mesh (largest eigenvalue {lam:.4g} 1/s); use step <= "
                f"{self.dt_critical:.4g} s, or theta >= 0.5, which has no step limit"
            )

    def initial_state(self) -> np.ndarray:
        T = self.ops.initial.copy()
        T[self.ops.fixed] = self.ops.fixed_values(0.0)
        self._T0 = T.copy()
        self._rates = []
        if self.estimator is not None:
            self.estimator.start(T)
        return T

    def snapshot(self):
        """What a step changes besides the state (energy balance, warm-start rates), to undo it."""
        return dict(self._energy), list(self._rates)

    def restore(self, saved) -> None:
        """Undo the steps after :meth:`snapshot` returned ``saved``."""
        self._energy, self._rates = dict(saved[0]), list(saved[1])

    def _march(self, T: np.ndarray):
        if self.tolerance is None:
            yield from super()._march(T)
            return
        dt_max = self.settings.step
        if self.dt_critical is not None:
            dt_max = min(dt_max, self.dt_critical)
        marks = [*self.ops.breakpoints(), *self.settings.output_times]
        restarts = {j for j in self._jump_times if 0 < j < self.end}
        yield from adaptive_march(self, T, self.tolerance, dt_max, marks, restarts, self.start_steps)

    def _steps_expected(self):
        return None if self.tolerance is not None else len(self.times())

    def times(self) -> np.ndarray:
        marks = np.concatenate([self.ops.breakpoints(), np.asarray(self.settings.output_times, dtype=float)])
        # Rannacher start: after t = 0 and after every jump of a schedule, the first steps are
        # replaced by backward-Euler half steps (their end times are kept in self._damped).
        grid, damped = plan_steps(self.end, self.settings.step, marks, self.ops.jumps(), self.start_steps)
        self._damped = set(damped.tolist())
        return grid

    def prepare(self) -> None:
        """Factorise (or precondition) the system of the first step now (fixed steps only:
        an adaptive run picks its first step as it goes)."""
        grid = self.times() if self.tolerance is None else ()
        if len(grid) and len(self.ops.free):
            first = float(grid[0])
            self._solver(first - self.t, 1.0 if first in self._damped else self.theta)

    def _solver(self, dt: float, theta: float):
        # steps of one size differ in their last bits (t_new - t): match cached sizes to 1e-9
        key = next((k for k in self._solvers if k[1] == theta and abs(k[0] - dt) <= 1e-9 * dt), (dt, theta))
        s = self._solvers.pop(key, None)
        if s is None:
            if self.ops.lumped:
                A = sp.diags(self._Mff / dt) + theta * self._Kff if theta > 0 else sp.diags(self._Mff / dt)
            else:
                A = self._Mff / dt + theta * self._Kff
            s = make_solver(sp.csr_matrix(A), self.solver_name)
            self.factorizations += 1
            if len(self._solvers) >= CACHE_SIZE:
                self._solvers.pop(next(iter(self._solvers)))  # the least recently used
        self._solvers[key] = s  # last in the order: most recently used
        return s

    # -- one step ------------------------------------------------------------
    def _theta_for(self, t_new: float) -> float:
        """theta of the fixed-grid step ending at ``t_new`` (1 for the damped start)."""
        return 1.0 if t_new in self._damped else self.theta

    def _step(self, t: float, t_new: float, T: np.ndarray, theta: float, x0=None):
        """One theta step of the state ``T`` at ``t`` to ``t_new``, nothing recorded.

        Returns (T_new (n_nodes,) before any jump at ``t_new``, free-node
        increment, theta-weighted load coefficients).
        """
        ops, f, p = self.ops, self.ops.free, self.ops.fixed
        dt = t_new - t
        # values inside the step: at t_new the limit from the left, so a jump at t_new acts after it
        Tp0, Tp1 = T[p], ops.fixed_values(t_new, start=t)
        coef = self._load_coefficients(t, t_new, theta)
        Tf = T[f]
        # solve for the increment so iterative solvers stop relative to the change per step:
        # b = rhs - A Tf = F_theta - K_ff Tf - (coupling to prescribed nodes); M_ff Tf / dt cancels
        b = _matvec(self._V_f, coef) - self._Kff @ Tf
        if p.size:
            Tp_th = theta * Tp1 + (1.0 - theta) * Tp0
            b -= self._Kfp @ Tp_th
            if self._Mfp is not None:
                b -= self._Mfp @ ((Tp1 - Tp0) / dt)
        solver = self._solver(dt, theta)
        dTf = solver.solve(b, x0=x0) if solver.iterative else solver.solve(b)
        T_new = T.copy()
        T_new[f] = Tf + dTf
        T_new[p] = Tp1
        return T_new, dTf, coef

    def _jump(self, t_new: float, T_new: np.ndarray) -> float:
        """Apply, in place, the jumps of prescribed temperatures at ``t_new``; the heat they take [J]."""
        p = self.ops.fixed
        jump = self.ops.fixed_values(t_new) - T_new[p]
        if not np.any(jump != 0.0):
            return 0.0
        T_new[p] += jump
        return float(self.ops.mass_apply(np.bincount(p, weights=jump, minlength=T_new.shape[0])).sum())

    def bare_step(self, t: float, t_new: float, T: np.ndarray, theta: float, x0=None) -> np.ndarray:
        """The state at ``t_new`` from ``T`` at ``t`` by one theta step, jumps at ``t_new`` included;
        nothing is recorded (for error estimates). ``x0``: a guess of the free-node increment."""
        T_new = self._step(t, t_new, T, theta, x0)[0]
        self._jump(t_new, T_new)
        return T_new

    def propagate(self, dt: float, theta: float, E: np.ndarray) -> np.ndarray:
        """A perturbation ``E`` (n_nodes,) [K] carried through one homogeneous theta step of size ``dt``:
        (M/dt + theta K)^-1 (M/dt - (1 - theta) K) E on the free nodes, zero on prescribed ones."""
        f = self.ops.free
        out = np.zeros_like(E)
        out[f] = E[f] + self._solver(dt, theta).solve(-(self._Kff @ E[f]))
        return out

    def _attempt(self, t: float, t_new: float, T: np.ndarray, theta: float, local: bool = False) -> np.ndarray:
        """One recorded step (energy balance, warm start, error estimate left pending)."""
        dt = t_new - t
        x0 = None
        iterative = self._solver(dt, theta).iterative
        if iterative:
            if t in self._jump_times:  # rates before a jump say nothing of its slope after it
                self._rates = self._rates[-1:]
            x0 = warm_start(self._rates, t, dt)
        T_new, dTf, coef = self._step(t, t_new, T, theta, x0)
        if iterative:
            self._rates = [*self._rates[-1:], (t + 0.5 * dt, dTf / dt)]
        self._account(T, T_new, dt, theta, coef)
        # a prescribed temperature that jumps at t_new does so instantly: the heat it takes
        # is stored at once and counted as entering through those nodes
        dE = self._jump(t_new, T_new)
        self._energy["stored_J"] += dE
        self._energy["dirichlet_in_J"] += dE
        if self.estimator is not None:
            self.estimator.step(t, t_new, T_new, theta, local=local, increment=dTf)
        return T_new

    def _advance(self, t: float, t_new: float, T: np.ndarray) -> np.ndarray:
        T_new = self._attempt(t, t_new, T, self._theta_for(t_new))
        if self.estimator is not None:
            self.estimator.accept()
        return T_new

    def _account(self, T0, T1, dt, theta, coef):
        """Add this step's heat to the energy balance (all nodes, theta-weighted).

        With r = M (T1 - T0)/dt + (K + H) T_theta - F_theta the nodal heat
        residual, stored heat is sum M (T1 - T0), boundary heat sum F_b - sum H T_theta,
        source heat sum F_s and the heat through prescribed nodes sum of r over them;
        each sum of a mat-vec is a dot product with precomputed column sums.
        """
        Tth = theta * T1 + (1 - theta) * T0
        d = T1 - T0
        kind = self._load_kind
        Fb = float(coef[kind == "boundary"] @ self._load_sum[kind == "boundary"])
        Fs = float(coef[kind == "source"] @ self._load_sum[kind == "source"])
        r_fixed = _dot(self._m_fixed, d) / dt + _dot(self._k_fixed, Tth) - coef @ self._load_fixed_sum
        self._energy["stored_J"] += _dot(self._m_all, d)
        self._energy["boundary_in_J"] += dt * (Fb - _dot(self._h_all, Tth))
        self._energy["source_in_J"] += dt * Fs
        self._energy["dirichlet_in_J"] += dt * float(r_fixed)

    # -- reports ---------------------------------------------------------------
    def energy(self) -> dict:
        """Heat stored versus heat that entered, since t = 0 [J].

        ``boundary_in_J`` is heat flux plus convection, ``dirichlet_in_J`` the
        heat that flowed in through prescribed-temperature nodes;
        ``relative_imbalance`` is the imbalance over the largest of the heat
        stored, the heat that entered and the heat capacity of the body times 1 K.
        """
        e = dict(self._energy)
        inflow = e["boundary_in_J"] + e["source_in_J"] + e["dirichlet_in_J"]
        e["imbalance_J"] = e["stored_J"] - inflow
        # relative to the larger of the heats moved and the heat that warms the whole body by 1 K,
        # so that a run in which nearly nothing happens does not divide round-off by round-off
        scale = max(abs(e["stored_J"]), abs(inflow), float(self._m_all.sum()) * 1.0, 1e-300)
        e["relative_imbalance"] = abs(e["imbalance_J"]) / scale
        return e

    def report(self) -> dict:
        """What was run: solver, why, factorisations, steps, stability limit."""
        return dict(
            solver=self.solver_name,
            reason=self.solver_reason,
            factorizations=self.factorizations,
            steps=self.step_count,
            theta=self.theta,
            mass=self.settings.mass,
            start_steps=self.start_steps,
            dt_critical=self.dt_critical,
            tolerance=self.tolerance,
            rejected_steps=self.rejected,
            warnings=list(self.ops.warnings),
        )
