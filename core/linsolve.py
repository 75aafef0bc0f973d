"""Linear solvers for the symmetric positive definite systems of the theta-method.

A solver is built once for one matrix A (one time step size) and then solves
many right-hand sides. Solvers are registered by name in :data:`SOLVERS`.
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla

from .errors import InputError, SolverError


class LinearSolver:
    """Base class: ``solve(b, x0)`` for one fixed SPD matrix.

    Attributes
    ----------
    name : str
    iterations : int
        Krylov iterations of the last solve (0 for direct solvers).
    """

    name = "base"

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


class DirectSolver(LinearSolver):
    """Sparse Cholesky (CHOLMOD via scikit-sparse) when installed, else SuperLU.

    SuperLU runs with the options that suit an SPD matrix: symmetric mode,
    minimum degree ordering on A^T + A, no partial pivoting.
    """

    name = "direct"

    def __init__(self, A):
        super().__init__(A)
        A = sp.csc_matrix(A)
        try:
            from sksparse.cholmod import cholesky  # optional accelerator
        except ImportError:
            cholesky = None
        if cholesky is not None:
            self._factor = cholesky(A)
            self.backend = "cholmod"
        else:
            self._factor = spla.splu(
                A, permc_spec="MMD_AT_PLUS_A", diag_pivot_thresh=0.0, options={"SymmetricMode": True}
            ).solve
            self.backend = "superlu"

    def solve(self, b, x0=None):
        return self._factor(b)


class CGSolver(LinearSolver):
    """Preconditioned conjugate gradients, warm-started from ``x0``.

    Stopping rule: the residual norm falls below ``rtol`` times the norm of
    the right-hand side of the system (the caller solves for the step
    increment, so this bounds the error relative to the change per step).

    Parameters
    ----------
    A : SPD sparse matrix
    preconditioner : "jacobi" or "amg" (smoothed aggregation, pyamg)
    rtol : float
    """

    name = "cg"

    def __init__(self, A, preconditioner: str = "jacobi", rtol: float = 1e-10, maxiter: int = 5000):
        super().__init__(sp.csr_matrix(A))
        self.rtol, self.maxiter = rtol, maxiter
        if preconditioner == "jacobi":
            d = 1.0 / self.A.diagonal()
            self.M = spla.LinearOperator(A.shape, matvec=lambda x: d * x, dtype=float)
        elif preconditioner == "amg":
            try:
                import pyamg
            except ImportError:
                raise InputError("solver 'cg-amg' needs pyamg: pip install 'heatsoak[fast]'") from None
            self.M = pyamg.smoothed_aggregation_solver(self.A, symmetry="symmetric").aspreconditioner(cycle="V")
        else:
            raise InputError(f"preconditioner must be 'jacobi' or 'amg', got {preconditioner!r}")
        self.name = f"cg-{preconditioner}"

    def solve(self, b, x0=None):
        count = [0]

        def cb(_):
            count[0] += 1

        x, info = spla.cg(self.A, b, x0=x0, rtol=self.rtol, atol=0.0, maxiter=self.maxiter, M=self.M, callback=cb)
        self.iterations = count[0]
        if info != 0:
            raise SolverError(f"{self.name} did not converge in {self.maxiter} iterations (info={info})")
        return x


SOLVERS = {
    "direct": DirectSolver,
    "cg-jacobi": lambda A: CGSolver(A, "jacobi"),
    "cg-amg": lambda A: CGSolver(A, "amg"),
}


def choose_solver(n: int, name: str = "auto"):
    """Pick a solver name for a system of ``n`` unknowns.

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
    return "direct", f"{n} unknowns: a sparse factorisation reused for every step"


def make_solver(A, name: str) -> LinearSolver:
    """Build solver ``name`` for matrix A; a diagonal A always gets :class:`DiagonalSolver`."""
    if A.nnz == A.shape[0] and np.array_equal(sp.csr_matrix(A).indices, np.arange(A.shape[0])):
        return DiagonalSolver(A)
    return SOLVERS[name](A)
