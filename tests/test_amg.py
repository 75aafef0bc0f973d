"""The multigrid preconditioner: pyamg's own V-cycle on the same hierarchy, symmetric, definite, effective."""

import numpy as np
import pytest
import scipy.sparse as sp
from heatsoak.core.fem.assembly import Assembler
from heatsoak.core.mesh.generate import box_mesh
from heatsoak.core.solve.linear import CGSolver

pyamg = pytest.importorskip("pyamg")
from heatsoak.core.solve.amg import AmgPreconditioner  # noqa: E402


def _system(n=14, fourier=20.0, perturb=0.0):
    """A = M/dt + K on a unit cube with alpha dt / h^2 = fourier (alpha = 1), nodes optionally jiggled."""
    mesh = box_mesh((n, n, n))
    if perturb:
        rng = np.random.default_rng(3)
        mesh.points[:] += perturb / n * rng.uniform(-1, 1, mesh.points.shape)
    asm = Assembler(mesh)
    K, M = asm.stiffness(1.0), asm.mass(1.0)
    return sp.csr_matrix(M / (fourier / n**2) + K)


@pytest.mark.parametrize("smooth", ["energy", "jacobi"])
def test_the_lean_v_cycle_equals_pyamgs_own_v_cycle_on_the_same_hierarchy(smooth):
    # pyamg estimates spectral radii from random vectors: the same seed gives both the same hierarchy
    A = _system(perturb=0.2)
    np.random.seed(7)
    ours = AmgPreconditioner(A, smooth=smooth, max_coarse=50)
    np.random.seed(7)
    ml = pyamg.smoothed_aggregation_solver(
        A, symmetry="symmetric", strength="symmetric", smooth=smooth, improve_candidates=None, max_coarse=50,
        presmoother=("gauss_seidel", {"sweep": "forward"}), postsmoother=("gauss_seidel", {"sweep": "backward"}),
        coarse_solver="cholesky")
    assert ours.levels == len(ml.levels) >= 3
    theirs = ml.aspreconditioner(cycle="V")
    rng = np.random.default_rng(0)
    for _ in range(3):
        r = rng.standard_normal(A.shape[0])
        np.testing.assert_allclose(ours(r), theirs @ r, rtol=1e-10, atol=1e-12 * np.abs(theirs @ r).max())


def test_the_v_cycle_is_a_symmetric_positive_definite_operator():
    A = _system(perturb=0.2)
    B = AmgPreconditioner(A)
    rng = np.random.default_rng(1)
    X = rng.standard_normal((A.shape[0], 4))
    BX = np.column_stack([B(x) for x in X.T])
    G = X.T @ BX
    np.testing.assert_allclose(G, G.T, rtol=1e-11, atol=1e-11 * np.abs(G).max())
    assert np.linalg.eigvalsh(0.5 * (G + G.T)).min() > 0


@pytest.mark.parametrize("fourier", [1.0, 20.0, 100.0])
def test_multigrid_cg_takes_few_iterations_and_far_fewer_than_jacobi_on_long_steps(fourier):
    A = _system(fourier=fourier)
    b = A @ np.random.default_rng(2).standard_normal(A.shape[0])
    amg, jacobi = CGSolver(A, "amg"), CGSolver(A, "jacobi")
    xa, xj = amg.solve(b), jacobi.solve(b)
    np.testing.assert_allclose(xa, xj, rtol=0, atol=1e-7 * np.abs(xj).max())
    assert amg.iterations <= 20
    if fourier >= 20:
        assert amg.iterations * 4 < jacobi.iterations


def test_a_system_smaller_than_the_coarsest_level_is_solved_exactly_by_one_cycle():
    A = _system(n=4)
    B = AmgPreconditioner(A)
    assert B.levels == 1
    b = np.arange(A.shape[0], dtype=float)
    np.testing.assert_allclose(A @ B(b), b, rtol=1e-10, atol=1e-9)
