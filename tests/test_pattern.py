"""The sort-free sparsity pattern and the element-entry map agree with scipy's own COO summation."""

import numpy as np
import pytest
import scipy.sparse as sp
from heatsoak.core.fem.pattern import build_pattern, element_entries
from heatsoak.core.mesh.generate import box_mesh


def scrambled_cells(order=1, seed=0):
    """Box cells with nodes renumbered at random and cells shuffled: no structure left to lean on."""
    mesh = box_mesh((4, 3, 5), order=order)
    rng = np.random.default_rng(seed)
    perm = rng.permutation(mesh.n_nodes)
    cells = perm[mesh.cells][rng.permutation(mesh.n_cells)]
    return cells, mesh.n_nodes


def coo_sum(cells, n, element_matrices):
    nb = cells.shape[1]
    rows = np.repeat(cells, nb, axis=1).ravel()
    cols = np.tile(cells, (1, nb)).ravel()
    return sp.coo_matrix((element_matrices.ravel(), (rows, cols)), shape=(n, n)).tocsr()


def random_symmetric(ne, nb, seed=1):
    a = np.random.default_rng(seed).standard_normal((ne, nb, nb))
    return a + a.transpose(0, 2, 1)


@pytest.mark.parametrize("order", [1, 2])
def test_pattern_and_sums_match_scipy_coo_summation(order):
    cells, n = scrambled_cells(order)
    pat = build_pattern(cells, n)
    ke = random_symmetric(*cells.shape)
    ref = coo_sum(cells, n, ke)
    ref.sort_indices()
    np.testing.assert_array_equal(pat.indptr, ref.indptr)
    np.testing.assert_array_equal(pat.indices, ref.indices)
    np.testing.assert_allclose(pat.assemble(ke).data, ref.data, rtol=1e-13, atol=1e-13)


def test_cell_operator_is_linear_in_the_per_cell_coefficient():
    cells, n = scrambled_cells()
    pat = build_pattern(cells, n)
    ke = random_symmetric(*cells.shape)
    i, j = element_entries(4)
    c = np.random.default_rng(2).uniform(1.0, 3.0, len(cells))
    G = pat.cell_operator(np.ascontiguousarray(ke[:, i, j]))
    np.testing.assert_allclose(pat.from_upper(G @ c).toarray(), coo_sum(cells, n, ke * c[:, None, None]).toarray(),
                               rtol=1e-13, atol=1e-12)


def test_positions_and_the_scatter_matrix_address_the_same_entries():
    cells, n = scrambled_cells()
    pat = build_pattern(cells, n)
    ke = random_symmetric(*cells.shape)
    np.testing.assert_allclose(pat.scatter @ ke.ravel(), pat.assemble(ke).data, rtol=1e-13, atol=1e-13)
    rows, cols = cells[:, 0], cells[:, 3]
    pos = pat.positions(rows, cols)
    assert np.all(pat.indices[pos] == cols)
    assert np.all((pat.indptr[rows] <= pos) & (pos < pat.indptr[rows + 1]))


def test_a_node_used_by_no_cell_gets_an_empty_row():
    cells, n = scrambled_cells()
    pat = build_pattern(cells, n + 1)
    assert pat.indptr[-1] == pat.indptr[-2]
    assert pat.assemble(random_symmetric(*cells.shape)).shape == (n + 1, n + 1)


def test_a_cell_with_a_repeated_node_is_refused():
    cells, n = scrambled_cells()
    cells = cells.copy()
    cells[3, 1] = cells[3, 0]
    with pytest.raises(ValueError, match="repeated node"):
        build_pattern(cells, n)
