"""Linear solvers for the symmetric positive definite systems of the theta-method.

A solver is built once for one matrix A = M/dt + theta K (one step size) and
then solves many right-hand sides. Solvers are registered by name in
:data:`SOLVERS`; :func:`choose_solver` picks one for ``solver = "auto"``.

The stepper solves for the step increment dT (A dT = b), so the iterative
solvers' stopping rule is relative to the change per step, see
:class:`CGSolver`.
"""

from __future__ import annotations

import contextlib
import importlib
import math

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla
from heatsoak.core.errors import InputError, SolverError

#: Relative tolerance of the Krylov solvers (see :class:`CGSolver`).
RTOL = 1e-10


class LinearSolver:
    """Base class: ``solve(b, x0)`` for one fixed SPD matrix.

    Attributes
    ----------
    name : str
    iterations : int
        Krylov iterations of the last solve (0 for direct solvers).
    """

    name = "base"
    #: Whether ``solve`` uses its starting guess ``x0`` (Krylov solvers do; direct ones ignore it).
    iterative = False

    def __init__(self, A: sp.spmatrix):
        self.A = A
        self.iterations = 0

    def solve(self, b: np.ndarray, x0: np.ndarray | None = None) -> np.ndarray:
        raise NotImplementedError


class DiagonalSolver(LinearSolver):
    """A diagonal matrix (lumped mass with forward Euler): one division."""

    name = "diagonal"

    def __init__(self, A):
        super().__init__(A)
        self.d = A.diagonal()

    def solve(self, b, x0=None):
        return b / self.d


def _importable(module: str) -> bool:
    try:
        importlib.import_module(module)
    except ImportError:
        return False
    return True


def cholmod_available() -> bool:
    """True when scikit-sparse's CHOLMOD can be imported (the ``cholmod`` extra)."""
    return _importable("sksparse.cholmod")


def amg_available() -> bool:
    """True when pyamg can be imported (the ``fast`` extra): ``cg-amg`` needs it."""
    return _importable("pyamg")


class DirectSolver(LinearSolver):
    """Sparse Cholesky (CHOLMOD via scikit-sparse) when installed, else SuperLU.

    SuperLU runs with the options that suit an SPD matrix: symmetric mode,
    minimum degree ordering on A^T + A, no partial pivoting (about 2.5 times
    faster and half the memory of its defaults on these matrices).
    ``backend`` says which one is used.
    """

    name = "direct"

    def __init__(self, A, backend: str | None = None):
        super().__init__(A)
        A = sp.csc_matrix(A)
        self.backend = backend or ("cholmod" if cholmod_available() else "superlu")
        if self.backend == "cholmod":
            from sksparse.cholmod import cholesky

            self._factor = cholesky(A)
        else:
            self._factor = spla.splu(
                A, permc_spec="MMD_AT_PLUS_A", diag_pivot_thresh=0.0, options={"SymmetricMode": True}
            ).solve
        self._one_thread = _OneBlasThread()

    def solve(self, b, x0=None):
        with self._one_thread():
            return self._factor(b)


class _OneBlasThread:
    """Keeps BLAS on one thread inside ``with`` (threadpoolctl, optional).

    Inside a Krylov loop each dot product is small, and a triangular solve is
    memory bound; with two BLAS threads either stalls for milliseconds
    whenever the other core is busy. The libraries are looked up once, when
    the solver is built (after its own imports), since a fresh look-up costs
    about a millisecond.
    """

    def __init__(self):
        try:
            from threadpoolctl import ThreadpoolController
        except ImportError:
            self._controller = None
        else:
            self._controller = ThreadpoolController()

    def __call__(self):
        if self._controller is None:
            return contextlib.nullcontext()
        return self._controller.limit(limits=1, user_api="blas")


class CGSolver(LinearSolver):
    """Preconditioned conjugate gradients, warm-started from ``x0``.

    Stopping rule: the iteration stops when the residual of the
    (Jacobi-scaled, for ``"jacobi"``) system is below ``rtol`` times its
    right-hand side, ``||r_k|| <= rtol ||b||``, or below ``1e-14 ||r_0||``
    (nothing left to gain in double precision). The stepper solves for the
    step increment, so b is the change per step seen through A: the error of
    the increment is at most cond(A) * rtol relative to it. With
    rtol = 1e-10 and cond(A) below 1e3 (A = M/dt + theta K, Jacobi-scaled,
    for alpha dt / h^2 up to about 100) the increment is exact to 1e-7 of
    itself, while the backward-Euler error of a step is of order
    dt lambda / 2 of it for a mode decaying at rate lambda (1e-3 and more for
    the modes a step resolves): the solver error stays orders of magnitude
    below the time-discretisation error.

    Parameters
    ----------
    A : SPD sparse matrix
    preconditioner : "jacobi" (diagonal scaling) or "amg" (smoothed
        aggregation, one V-cycle per iteration, see :mod:`heatsoak.core.solve.amg`)
    rtol : float
    maxiter : int
    """

    name = "cg"
    iterative = True

    def __init__(self, A, preconditioner: str = "jacobi", rtol: float = RTOL, maxiter: int = 10000):
        A = sp.csr_matrix(A)
        self.rtol, self.maxiter = rtol, maxiter
        self.scale = None
        self._precond = None
        if preconditioner == "jacobi":
            # CG on D^-1/2 A D^-1/2 is Jacobi-preconditioned CG with one vector operation less
            s = 1.0 / np.sqrt(A.diagonal())
            A = sp.csr_matrix((A.data * s[_rows(A)] * s[A.indices], A.indices, A.indptr), shape=A.shape)
            self.scale = s
        elif preconditioner == "amg":
            try:
                import pyamg  # noqa: F401
            except ImportError:
                raise InputError("solver 'cg-amg' needs pyamg: pip install 'heatsoak[fast]'") from None
            from heatsoak.core.solve.amg import AmgPreconditioner

            self._precond = AmgPreconditioner(A)
        else:
            raise InputError(f"preconditioner must be 'jacobi' or 'amg', got {preconditioner!r}")
        super().__init__(A)
        self.name = f"cg-{preconditioner}"
        self._one_thread = _OneBlasThread()

    def solve(self, b, x0=None):
        s = self.scale
        if s is not None:
            b = b * s
            x0 = None if x0 is None else x0 / s
        with self._one_thread():
            x, self.iterations = _pcg(self.A, b, x0, self._precond, self.rtol, self.maxiter)
        if self.iterations < 0:
            raise SolverError(f"{self.name} did not converge in {self.maxiter} iterations")
        return x if s is None else x * s


def _rows(A: sp.csr_matrix) -> np.ndarray:
    return np.repeat(np.arange(A.shape[0], dtype=A.indices.dtype), np.diff(A.indptr))


def _pcg(A, b, x0, precond, rtol: float, maxiter: int):
    """Conjugate gradients with in-place BLAS updates; returns (x, iterations) or (x, -1).

    ``precond`` None means the identity (the Jacobi-scaled system).
    """
    from scipy.linalg.blas import daxpy, ddot, dscal

    x = np.zeros_like(b) if x0 is None else np.array(x0, dtype=float)
    r = b - A @ x if x0 is not None else b.copy()
    rr = ddot(r, r)
    tol2 = max(rtol * rtol * ddot(b, b), 1e-28 * rr, 1e-300)
    if rr <= tol2:
        return x, 0
    z = r if precond is None else precond(r)
    p = z.copy()
    rz = rr if precond is None else ddot(r, z)
    for k in range(1, maxiter + 1):
        q = A @ p
        alpha = rz / ddot(p, q)
        x = daxpy(p, x, a=alpha)
        r = daxpy(q, r, a=-alpha)
        rr = ddot(r, r)
        if rr <= tol2:
            return x, k
        if precond is None:
            z, rz, rz_old = r, rr, rz
        else:
            z = precond(r)
            rz, rz_old = ddot(r, z), rz
        p = daxpy(z, dscal(rz / rz_old, p))
    return x, -1


SOLVERS = {
    "direct": DirectSolver,
    "cg-jacobi": lambda A: CGSolver(A, "jacobi"),
    "cg-amg": lambda A: CGSolver(A, "amg"),
}


def stiffness_ratio(K_diag: np.ndarray, M_diag: np.ndarray, dt: float, theta: float) -> float:
    """q = theta dt K_ii / M_ii (median over nodes): how far A = M/dt + theta K is from its mass part.

    On the six-tetrahedra-per-cube grid of edge h with consistent mass,
    K_ii / M_ii = 15 alpha / h^2 at interior nodes, so q / 15 estimates the
    mesh Fourier number alpha dt / h^2 (6 instead of 15 with lumped mass).
    Krylov iteration counts grow like sqrt(1 + q); a direct solver does not care.
    """
    if K_diag.size == 0:
        return 0.0
    return float(theta * dt * np.median(K_diag / M_diag))


#: A Krylov solver within NEAR_TIE of the direct one is taken instead when the factor would hold
#: more than SMALL_FACTOR_GB: its memory grows like the mesh (a factor's like n^(4/3)) and it has
#: no factorisation to repeat when the step changes.
NEAR_TIE, SMALL_FACTOR_GB = 1.2, 0.1
#: When the direct solver's whole run is estimated under this [s], it is taken: exact to
#: round-off (so is the energy balance), and no faster solver could save a noticeable time.
QUICK_RUN_S = 1.0


def choose_solver(n: int, name: str = "auto", *, nnz: int | None = None, ratio: float | None = None,
                  steps: int | None = None, budget_gb: float | None = None):
    """Pick a solver name for a system of ``n`` unknowns.

    Parameters
    ----------
    n : int
        Unknowns (free nodes).
    name : str
        "auto" or one of :data:`SOLVERS` (then returned as is).
    nnz : int, optional
        Stored entries of the system matrix (default 15 n, linear tetrahedra).
    ratio : float, optional
        :func:`stiffness_ratio` of the largest step (default 15, alpha dt/h^2 about 1).
    steps : int, optional
        Number of steps expected with one matrix (default 1000).
    budget_gb : float, optional
        Memory a direct factor may take (default :func:`memory_budget_gb`).

    The choice is the solver of least estimated time (:func:`estimate_costs`)
    among those that fit the memory budget, with two exceptions: the fastest
    Krylov solver is taken over a faster direct one when it is within
    :data:`NEAR_TIE` of it and the factor would hold more than
    :data:`SMALL_FACTOR_GB`; the direct solver is taken when its whole run
    is estimated under :data:`QUICK_RUN_S`.

    Returns
    -------
    name : str
    reason : str
        One line saying why, for the run report.
    """
    if name != "auto":
        if name not in SOLVERS:
            raise InputError(f"solver must be 'auto' or one of {list(SOLVERS)}, got {name!r}")
        return name, "chosen by the user"
    nnz = 15 * n if nnz is None else int(nnz)
    ratio = 15.0 if ratio is None else float(ratio)
    steps = 1000 if steps is None else max(int(steps), 1)
    costs = estimate_costs(n, nnz, ratio, steps, budget_gb)
    best = min(costs, key=costs.get)
    detail = ", ".join(f"{k} {v:.3g} s" for k, v in sorted(costs.items(), key=lambda kv: kv[1]))
    reason = (f"{n} unknowns, theta dt K_ii/M_ii = {ratio:.3g} (alpha dt/h^2 about {ratio / 15:.2g}), "
              f"{steps} steps per matrix: estimated {detail}")
    if "direct" in costs:
        krylov = min((k for k in costs if k != "direct"), key=costs.get)
        factor_gb = factor_memory_gb(n)
        if best == "direct" and factor_gb > SMALL_FACTOR_GB and costs[krylov] <= NEAR_TIE * costs["direct"]:
            best = krylov
            reason += f"; {krylov} taken: within {NEAR_TIE:g}x of direct, without its factor of about {factor_gb:.2g} GB"
        elif best != "direct" and costs["direct"] < QUICK_RUN_S:
            best = "direct"
            reason += f"; direct taken: under {QUICK_RUN_S:g} s either way and exact to round-off"
    if "direct" not in costs:
        budget = memory_budget_gb() if budget_gb is None else budget_gb
        reason += f"; direct left out: its factor would need about {factor_memory_gb(n):.1f} GB > {budget:.1f} GB"
    return best, reason


def memory_budget_gb() -> float:
    """Memory a direct factor may take in ``auto``: a quarter of the machine's [GB] (4 GB if unknown)."""
    try:
        with open("/proc/meminfo") as f:
            kb = next(int(line.split()[1]) for line in f if line.startswith("MemTotal"))
        return kb / 2**20 / 4.0
    except (OSError, StopIteration, ValueError):
        return 4.0


def factor_memory_gb(n: int) -> float:
    """Memory of a direct factorisation of a 3-D linear-tetrahedra matrix of n unknowns [GB].

    A nested-dissection Cholesky factor of a 3-D mesh has about 9 n^(4/3)
    entries (measured: 26.5 M for n = 69 k); with the workspace, 1.3 times
    that in doubles. SuperLU stores an LU pair and more fill: about 4 times.
    """
    chol = 8.0 * 9.3 * n ** (4.0 / 3.0) * 1.3 / 1e9
    return chol if cholmod_available() else 4.0 * chol


def krylov_iterations(ratio: float, n: int, per_row: float = 14.0) -> dict:
    """Estimated mean iterations per step of each Krylov solver at ``RTOL``.

    Fitted to ``heatsoak bench`` cubes (2 k to 275 k nodes) with the
    extrapolated warm start: Jacobi-CG about 4 + 5.1 sqrt(1 + q), bounded by
    3.5 n^(1/3) (the mesh's own conditioning); multigrid-CG about
    4.3 + 1.3 ln(1 + q), at most 11, for linear cells (about 14 stored
    entries per row). Quadratic cells (about 27 per row) took 1.6-1.9 times
    as many multigrid iterations on the same cube: the count is scaled by
    (per_row / 14)^0.8. q = :func:`stiffness_ratio`.
    """
    q = max(float(ratio), 0.0)
    digits = -math.log10(RTOL) / 10.0
    denser = max(1.0, per_row / 14.0) ** 0.8
    return {
        "cg-jacobi": digits * min(4.0 + 5.1 * math.sqrt(1.0 + q), 3.5 * max(n, 1) ** (1.0 / 3.0)),
        "cg-amg": digits * denser * min(4.3 + 1.3 * math.log1p(q), 11.0),
    }


def estimate_costs(n: int, nnz: int, ratio: float, steps: int, budget_gb: float | None = None) -> dict:
    """Estimated wall time [s] of ``steps`` steps, solver setup included, for each solver.

    Power laws fitted to ``heatsoak bench`` on a two-core machine (unit cubes
    of 2 k to 275 k nodes, alpha dt / h^2 = 0.2 to 100); only their ratios
    matter for the choice. A step costs its solve plus about 0.3 ms + 40 ns
    per unknown of right-hand side and bookkeeping; a Jacobi-CG iteration
    about 0.85 ns per stored entry (more once the matrix leaves the cache), a
    multigrid-CG iteration 0.15 ms + 4.3 ns per entry; iteration counts from
    :func:`krylov_iterations`. The direct solver is left out when its factor
    would need more than ``budget_gb`` (default :func:`memory_budget_gb`);
    multigrid when pyamg is not installed.
    """
    its = krylov_iterations(ratio, n, nnz / max(n, 1))
    overhead = 3e-4 + 4e-8 * n
    t_jacobi = 2.5e-5 + 8.5e-10 * nnz * max(1.0, math.sqrt(nnz / 1.5e6))
    t_amg = 1.5e-4 + 4.3e-9 * nnz
    costs = {"cg-jacobi": steps * (overhead + its["cg-jacobi"] * t_jacobi)}
    if amg_available():
        costs["cg-amg"] = 0.008 + 3e-7 * nnz + steps * (overhead + its["cg-amg"] * t_amg)
    budget = memory_budget_gb() if budget_gb is None else budget_gb
    if factor_memory_gb(n) <= budget:
        if cholmod_available():
            factor, solve = 0.005 + 6.2e-8 * n**1.55, 3.8e-8 * n**1.25
        else:
            factor, solve = 0.005 + 6.5e-9 * n**2.0, 3.5 * 3.8e-8 * n**1.25
        costs["direct"] = factor + steps * (overhead + solve)
    return costs


def make_solver(A, name: str) -> LinearSolver:
    """Build solver ``name`` for matrix A; a diagonal A always gets :class:`DiagonalSolver`."""
    if A.nnz == A.shape[0] and np.array_equal(sp.csr_matrix(A).indices, np.arange(A.shape[0])):
        return DiagonalSolver(A)
    return SOLVERS[name](A)
