"""Sparsity pattern of the matrices on one mesh, and the map from element
matrices to it.

Every matrix of the heat equation on a mesh is symmetric and has the
node-to-node adjacency of the cells as its pattern, so the pattern is built
once and element matrices are summed into it by a precomputed map.

Only the diagonal and the strict upper triangle of each element matrix are
used: ``m = nb (nb + 1) / 2`` "element entries" per cell (10 instead of 16
for a linear tetrahedron), the ``nb`` diagonal ones first, then the pairs of
:func:`off_pairs`. They are summed into the "upper data": the ``n`` diagonal
entries of the global matrix followed by its strict upper triangle in CSR
order. ``pos[e, k]`` is where entry k of cell e goes; the full CSR data array
is one gather from the upper data.

The pattern is built without a comparison sort: two stable counting sorts
(scipy's CSR-to-CSC conversion, linear in the number of entries) order the
off-diagonal entries by (row, column), so the entries summed into the same
global entry end up next to each other. The diagonal entry of node r is r.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

import numpy as np
import scipy.sparse as sp


def off_pairs(nb: int):
    """Local index pairs (i, j), i < j, of an nb x nb element matrix, as two (m,) arrays."""
    return np.triu_indices(nb, 1)


def element_entries(nb: int):
    """Local (i, j) of the m = nb (nb + 1) / 2 element entries: the diagonal, then :func:`off_pairs`."""
    i, j = off_pairs(nb)
    d = np.arange(nb)
    return np.concatenate([d, i]), np.concatenate([d, j])


def _index_dtype(count: int):
    return np.int32 if count < np.iinfo(np.int32).max else np.int64


@dataclass(frozen=True, eq=False)
class Pattern:
    """Sparsity pattern of the matrices on one mesh.

    Attributes
    ----------
    n : int
        Number of rows (nodes).
    indptr, indices : CSR arrays of the pattern (sorted column indices)
    cells : (n_cells, nb) int
        The connectivity the pattern was built from (a reference).
    pos : (n_cells, m) int
        Position in the upper data of every element entry (see module doc).
    upper_of : (nnz,) int
        Position in the upper data of every stored entry (its mirror for
        entries below the diagonal).
    n_upper : int
        Length of the upper data: n plus the number of strict upper entries.
    """

    n: int
    indptr: np.ndarray
    indices: np.ndarray
    cells: np.ndarray
    pos: np.ndarray
    upper_of: np.ndarray
    n_upper: int

    @property
    def n_cells(self) -> int:
        return self.cells.shape[0]

    @property
    def nb(self) -> int:
        return self.cells.shape[1]

    @property
    def nnz(self) -> int:
        return self.indices.shape[0]

    @cached_property
    def keys(self) -> np.ndarray:
        """(nnz,) int64, ``row * n + col`` of every stored entry (sorted)."""
        rows = np.repeat(np.arange(self.n, dtype=np.int64), np.diff(self.indptr))
        return rows * self.n + self.indices

    @cached_property
    def _cell_ptr(self) -> np.ndarray:
        m = self.pos.shape[1]
        return np.arange(0, m * self.n_cells + 1, m, dtype=self.pos.dtype)

    def matrix(self, data: np.ndarray) -> sp.csr_matrix:
        """A CSR matrix on this pattern holding ``data`` (nnz,), sharing index arrays."""
        return sp.csr_matrix((data, self.indices, self.indptr), shape=(self.n, self.n), copy=False)

    def positions(self, rows: np.ndarray, cols: np.ndarray) -> np.ndarray:
        """Positions in the data array of entries (rows, cols), which must be in the pattern."""
        return np.searchsorted(self.keys, rows.astype(np.int64) * self.n + cols)

    def from_upper(self, upper: np.ndarray) -> sp.csr_matrix:
        """The symmetric matrix whose upper data is ``upper`` (n_upper,)."""
        return self.matrix(upper.take(self.upper_of))

    def cell_operator(self, values: np.ndarray) -> sp.csc_matrix:
        """G, (n_upper, n_cells) sparse: ``G @ c`` is the upper data of ``sum_e c_e A_e``.

        Parameters
        ----------
        values : (n_cells, m) element entries of the A_e (see :func:`element_entries`);
            the array is used as the operator's data, not copied.
        """
        data = values.reshape(-1)
        return sp.csc_matrix((data, self.pos.reshape(-1), self._cell_ptr), shape=(self.n_upper, self.n_cells),
                             copy=False)

    def assemble_entries(self, values: np.ndarray) -> sp.csr_matrix:
        """Sum element entries ``values`` (n_cells, m) into a symmetric CSR matrix."""
        return self.from_upper(self.cell_operator(values) @ np.ones(self.n_cells))

    def assemble(self, element_matrices: np.ndarray) -> sp.csr_matrix:
        """Sum symmetric (n_cells, nb, nb) element matrices into a CSR matrix on this pattern.

        Only the diagonal and upper triangle of each element matrix are read.
        """
        i, j = element_entries(self.nb)
        return self.assemble_entries(np.ascontiguousarray(element_matrices[:, i, j]))

    @cached_property
    def scatter(self) -> sp.csr_matrix:
        """(nnz, n_cells * nb * nb) 0/1 matrix summing flattened element matrices
        (cell-major, then row, then column) into the data array.

        Built on first use: the assembler does not need it; it is kept for
        callers that hold full, possibly unsymmetric element matrices.
        """
        ne, nb = self.cells.shape
        rows = np.broadcast_to(self.cells[:, :, None], (ne, nb, nb)).reshape(-1)
        cols = np.broadcast_to(self.cells[:, None, :], (ne, nb, nb)).reshape(-1)
        pos = self.positions(rows, cols)
        return sp.csr_matrix((np.ones(pos.shape[0]), (pos, np.arange(pos.shape[0]))), shape=(self.nnz, pos.shape[0]))


def _counting_sort(keys: np.ndarray, n_keys: int):
    """Stable counting sort of ``keys`` (count,) in [0, n_keys) by a CSR-to-CSC conversion.

    Returns ``(ptr, order)``: ``order`` lists the positions of the keys in
    sorted order, ``ptr`` (n_keys + 1,) starts each key's run in it.
    """
    count = keys.shape[0]
    rows = np.arange(count + 1, dtype=_index_dtype(count + 1))
    # the row index of each entry is its position; the data (one byte each) is not used
    c = sp.csr_matrix((np.zeros(count, np.int8), keys, rows), shape=(count, n_keys), copy=False).tocsc()
    return c.indptr, c.indices


def build_pattern(conn: np.ndarray, n: int) -> Pattern:
    """Compute the pattern of cells ``conn`` (n_cells, nb) on ``n`` nodes and the
    map ``pos`` from element entries to it."""
    ne, nb = conn.shape
    i, j = off_pairs(nb)
    m = nb + len(i)
    idx = _index_dtype(max(m * ne + 1, n + 1))
    ct = np.ascontiguousarray(conn.T, dtype=idx)
    pos = np.empty((ne, m), dtype=idx)
    pos[:, :nb] = conn
    a, b = ct[i], ct[j]
    lo, hi = np.minimum(a, b).reshape(-1), np.maximum(a, b).reshape(-1)
    del a, b, ct
    if np.any(lo == hi):
        raise ValueError("cells with a repeated node cannot be assembled")
    # sort by the column (hi), then stably by the row (lo): (lo, hi) lexicographic
    hi_ptr, by_hi = _counting_sort(hi, n)
    del hi
    ids = (np.arange(ne, dtype=idx) * idx(m) + np.arange(nb, m, dtype=idx)[:, None]).reshape(-1)
    c2 = sp.csr_matrix((ids.take(by_hi), lo.take(by_hi), hi_ptr), shape=(n, n), copy=False).tocsc()
    del by_hi, ids, lo
    row_ptr, cols = c2.indptr, c2.indices
    new = np.empty(cols.shape[0], dtype=bool)
    new[0] = True
    np.not_equal(cols[1:], cols[:-1], out=new[1:])
    new[row_ptr[:-1][np.diff(row_ptr) > 0]] = True
    group = np.cumsum(new, dtype=idx)
    group += idx(n - 1)
    pos.reshape(-1)[c2.data] = group
    first = np.flatnonzero(new)
    upper_ptr = np.searchsorted(first, row_ptr).astype(idx)
    upper_cols = cols.take(first)
    del new, group, first, c2, cols
    used = np.zeros(n, dtype=bool)
    used[conn.reshape(-1)] = True
    indptr, indices, upper_of = _mirror(upper_ptr, upper_cols, used)
    return Pattern(n=n, indptr=indptr, indices=indices, cells=conn, pos=pos, upper_of=upper_of,
                   n_upper=n + upper_cols.shape[0])


def _mirror(upper_ptr: np.ndarray, upper_cols: np.ndarray, used: np.ndarray):
    """Full symmetric CSR pattern from its strict upper triangle (CSR, sorted) and
    the nodes with a diagonal entry. Returns ``indptr, indices, upper_of``
    (upper data: the n diagonal entries, then the strict upper ones)."""
    n, nnz_u = used.shape[0], upper_cols.shape[0]
    idx = upper_cols.dtype
    # ids are offset by one so that none is zero (sparse addition drops zeros)
    ids = np.arange(n + 1, n + 1 + nnz_u, dtype=idx)
    upper = sp.csr_matrix((ids, upper_cols, upper_ptr), shape=(n, n), copy=False)
    nodes = np.flatnonzero(used).astype(idx)
    dptr = np.zeros(n + 1, dtype=idx)
    np.cumsum(used, out=dptr[1:])
    diag = sp.csr_matrix((nodes + 1, nodes, dptr), shape=(n, n), copy=False)
    full = (upper + upper.T.tocsr() + diag).tocsr()
    return full.indptr, full.indices, full.data - 1
