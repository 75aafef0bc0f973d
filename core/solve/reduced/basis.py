"""Rational Krylov basis: M-orthonormal columns spanning (K + s M)^-1 B at real shifts s.

Moment matching at a shift s makes the reduced transfer function agree with
the full one near the Laplace variable s (common practice, no source; e.g.
Antoulas, Approximation of Large-Scale Dynamical Systems, ch. 11, from
memory). Shifts from 0.1/end (or a third of the slowest decay rate, when
that is higher: below it the static block already holds everything) to
10/step cover the decay rates a run on that time grid can show; they are taken in bisection order of a log-spaced list so
every prefix spans the whole range, and the basis grows one shift at a time
until the answer stops changing (:mod:`.model`).
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp
from heatsoak.core.solve.linear import choose_solver, make_solver, stiffness_ratio

__all__ = ["bisection_order", "extend", "shift_list", "shift_moments", "shifted_solver", "solve_columns"]

#: A new direction whose M-norm, after removing what the basis already holds, is below this
#: fraction of its own norm is dropped (already spanned to that accuracy).
DROP = 1e-7


def bisection_order(n: int) -> list:
    """Indices 0..n-1 ordered ends first, then midpoints of ever finer halves."""
    if n <= 2:
        return list(range(n))
    order, seen = [0, n - 1], {0, n - 1}
    parts = [(0, n - 1)]
    while parts:
        nxt = []
        for a, b in parts:
            m = (a + b) // 2
            if m not in seen:
                order.append(m)
                seen.add(m)
            if m - a > 1:
                nxt.append((a, m))
            if b - m > 1:
                nxt.append((m, b))
        parts = nxt
    return order


def shift_list(lo: float, hi: float, count: int = 17) -> np.ndarray:
    """``count`` real shifts [1/s] log-spaced from ``lo`` to ``hi``, in :func:`bisection_order`."""
    grid = np.geomspace(lo, max(hi, 10 * lo), count)
    return grid[bisection_order(count)]


def shifted_solver(K, M, s: float, columns: int, solver: str = "auto"):
    """A linear solver of K + s M (the one ``solver`` = "auto" picks for ``columns`` solves).

    Parameters
    ----------
    K : csr (n, n) [W/K]
    M : csr (n, n) or (n,) lumped diagonal [J/K]
    s : float, shift [1/s]
    columns : int, how many right-hand sides it will solve
    solver : str
        A solver name of :mod:`heatsoak.core.solve.linear` or "auto".
    """
    Md = M if not sp.issparse(M) else M.diagonal()
    A = sp.csr_matrix(K + s * (sp.diags(M) if not sp.issparse(M) else M) if s > 0 else K)
    ratio = stiffness_ratio(K.diagonal(), Md, 1.0 / s if s > 0 else 1e12, 1.0)
    name, _ = choose_solver(A.shape[0], solver, nnz=A.nnz, ratio=ratio, steps=columns)
    return make_solver(A, name)


def solve_columns(lin, B: np.ndarray) -> np.ndarray:
    """X (n, k) with A X = B for the solver ``lin`` of A."""
    return np.column_stack([lin.solve(np.ascontiguousarray(b)) for b in B.T]) if B.shape[1] else B.copy()


def shift_moments(lin, M, B: np.ndarray, moments: int = 2) -> np.ndarray:
    """[A^-1 B, (A^-1 M) A^-1 B, ...]: ``moments`` blocks from one factor of A = K + s M."""
    X = solve_columns(lin, B)
    out = [X]
    for _ in range(moments - 1):
        X = solve_columns(lin, _m_apply(M, X))
        out.append(X)
    return np.hstack(out)


def _m_apply(M, X):
    return M[:, None] * X if not sp.issparse(M) else M @ X


def extend(V: np.ndarray, MV: np.ndarray, X: np.ndarray, M):
    """Append the M-orthonormal part of ``X`` not yet in ``V``.

    Parameters
    ----------
    V : (n, r) with V^T M V = I
    MV : (n, r) M @ V
    X : (n, k) candidate directions
    M : mass, csr or lumped diagonal

    Returns
    -------
    V, MV with the new columns appended, and the number added.
    """
    MX = _m_apply(M, X)
    norms = np.sqrt(np.maximum(np.einsum("ij,ij->j", X, MX), 0.0))
    keep = norms > 0
    X = X[:, keep] / norms[keep]
    for _ in range(2):  # classical Gram-Schmidt twice: orthogonal to round-off
        X = X - V @ (MV.T @ X)
    X, MX = _orthonormal(X, M, drop=DROP)
    if X.shape[1]:
        # a second pass: the first divided by norms down to DROP, which magnifies round-off
        X = X - V @ (MV.T @ X)
        X, MX = _orthonormal(X, M, drop=0.0)
    return np.hstack([V, X]), np.hstack([MV, MX]), X.shape[1]


def _orthonormal(X, M, drop: float):
    """M-orthonormal basis of the columns of X, dropping directions of relative M-norm <= drop."""
    MX = _m_apply(M, X)
    G = X.T @ MX
    w, U = np.linalg.eigh(0.5 * (G + G.T))
    sel = w > max(drop**2, 0.0) * max(w.max(initial=0.0), 1.0) if drop > 0 else w > 0
    W = U[:, sel] / np.sqrt(w[sel])
    return X @ W, MX @ W
