"""Vectorised Galerkin assembly of the heat equation's matrices and vectors.

All matrices of one mesh share one sparsity pattern (:class:`Pattern`),
computed once; an element-matrix array of shape (n_cells, nb, nb) is turned
into the CSR data array by one sparse mat-vec with a precomputed 0/1 scatter
matrix. No Python loop runs over elements: element matrices are computed with
batched numpy in blocks of cells (a loop over blocks keeps temporaries in
cache).

Matrices (SI units, temperatures in K or degC alike):

* K, conductivity: K_ij = int kappa grad N_i . grad N_j dV   [W/K]
* M, mass (heat capacity): M_ij = int rho c N_i N_j dV       [J/K]
* H, convection: H_ij = int_S h N_i N_j dS                   [W/K]
* boundary load: b_i = int_S q N_i dS                        [W]
* source load: f_i = int_V f N_i dV                          [W]
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

import numpy as np
import scipy.sparse as sp

from .geometry import face_jacobians, isoparametric, p1_gradients
from .mesh import Mesh

#: Cells per block of element-matrix computation.
BLOCK = 16384


@dataclass(frozen=True, eq=False)
class Pattern:
    """Sparsity pattern of the matrices on one mesh.

    Attributes
    ----------
    n : int
        Number of rows (nodes).
    indptr, indices : CSR arrays of the pattern (sorted column indices)
    keys : (nnz,) int64, ``row * n + col`` of every stored entry (sorted)
    scatter : (nnz, n_cells * nb * nb) sparse 0/1 matrix mapping the
        flattened element matrices (cell-major, then row, then column) to
        the CSR data array.
    """

    n: int
    indptr: np.ndarray
    indices: np.ndarray
    keys: np.ndarray
    scatter: sp.csr_matrix

    @property
    def nnz(self) -> int:
        return self.indices.shape[0]

    def matrix(self, data: np.ndarray) -> sp.csr_matrix:
        """A CSR matrix on this pattern holding ``data`` (nnz,), sharing index arrays."""
        return sp.csr_matrix((data, self.indices, self.indptr), shape=(self.n, self.n), copy=False)

    def positions(self, rows: np.ndarray, cols: np.ndarray) -> np.ndarray:
        """Positions in the data array of entries (rows, cols), which must be in the pattern."""
        pos = np.searchsorted(self.keys, rows.astype(np.int64) * self.n + cols)
        return pos

    def assemble(self, element_matrices: np.ndarray) -> sp.csr_matrix:
        """Sum (n_cells, nb, nb) element matrices into a CSR matrix on this pattern."""
        return self.matrix(self.scatter @ element_matrices.reshape(-1))


def build_pattern(conn: np.ndarray, n: int) -> Pattern:
    """Compute the pattern and scatter matrix of cells ``conn`` (n_cells, nb) on ``n`` nodes."""
    ne, nb = conn.shape
    rows = np.broadcast_to(conn[:, :, None], (ne, nb, nb)).reshape(-1)
    cols = np.broadcast_to(conn[:, None, :], (ne, nb, nb)).reshape(-1)
    ones = np.ones(rows.shape[0], dtype=np.float64)
    a = sp.csr_matrix((ones, (rows, cols)), shape=(n, n))
    a.sum_duplicates()
    indptr, indices = a.indptr, a.indices
    keys = np.repeat(np.arange(n, dtype=np.int64), np.diff(indptr)) * n + indices
    pos = np.searchsorted(keys, rows.astype(np.int64) * n + cols)
    scatter = sp.csr_matrix((ones, (pos, np.arange(rows.shape[0]))), shape=(keys.shape[0], rows.shape[0]))
    return Pattern(n=n, indptr=indptr, indices=indices, keys=keys, scatter=scatter)


def _per_cell(value, n_cells: int, name: str) -> np.ndarray:
    """Broadcast a scalar or per-cell array to (n_cells,) floats."""
    arr = np.asarray(value, dtype=float)
    if arr.ndim == 0:
        return np.full(n_cells, float(arr))
    if arr.shape != (n_cells,):
        raise ValueError(f"{name}: expected a scalar or shape ({n_cells},), got {arr.shape}")
    return arr


def _conductivity(kappa, n_cells: int) -> np.ndarray:
    """kappa as (n_cells, 3, 3) tensors from a scalar, (n_cells,), (3, 3) or (n_cells, 3, 3)."""
    k = np.asarray(kappa, dtype=float)
    if k.ndim <= 1:
        return _per_cell(k, n_cells, "kappa")[:, None, None] * np.eye(3)
    if k.shape == (3, 3):
        return np.broadcast_to(k, (n_cells, 3, 3))
    if k.shape == (n_cells, 3, 3):
        return k
    raise ValueError(f"kappa: expected scalar, ({n_cells},), (3, 3) or ({n_cells}, 3, 3), got {k.shape}")


class Assembler:
    """Matrices and load vectors of the heat equation on one mesh.

    The pattern and the element geometry are computed on first use and
    cached, so re-assembly with new coefficients only recomputes element
    matrices and one scatter.

    Parameters
    ----------
    mesh : Mesh
    """

    def __init__(self, mesh: Mesh):
        self.mesh = mesh
        self.order = mesh.order

    # -- cached geometry -------------------------------------------------
    @cached_property
    def pattern(self) -> Pattern:
        return build_pattern(self.mesh.cells, self.mesh.n_nodes)

    @cached_property
    def _p1(self):
        return p1_gradients(self.mesh.points, self.mesh.cells)

    def _p2(self, degree: int, start: int, stop: int):
        return isoparametric(self.mesh.points, self.mesh.cells[start:stop], degree)

    @cached_property
    def _face_pos(self) -> np.ndarray:
        f = self.mesh.faces
        nf, nb = f.shape
        rows = np.broadcast_to(f[:, :, None], (nf, nb, nb)).reshape(-1)
        cols = np.broadcast_to(f[:, None, :], (nf, nb, nb)).reshape(-1)
        return self.pattern.positions(rows, cols)

    # -- element matrices ------------------------------------------------
    def _blocks(self):
        ne = self.mesh.n_cells
        for start in range(0, ne, BLOCK):
            yield start, min(ne, start + BLOCK)

    def stiffness(self, kappa) -> sp.csr_matrix:
        """Conductivity matrix K [W/K].

        Parameters
        ----------
        kappa : float, (n_cells,), (3, 3) or (n_cells, 3, 3)
            Conductivity [W/(m K)], isotropic or a symmetric tensor per cell.
        """
        ne = self.mesh.n_cells
        nb = self.mesh.cells.shape[1]
        tensor = np.asarray(kappa).ndim >= 2
        kap = _conductivity(kappa, ne) if tensor else _per_cell(kappa, ne, "kappa")
        out = np.empty((ne, nb, nb))
        for s, e in self._blocks():
            if self.order == 1:
                g, vol = self._p1[0][s:e], np.abs(self._p1[1][s:e])
                if tensor:
                    out[s:e] = np.einsum("eik,ekl,ejl->eij", g, kap[s:e], g) * vol[:, None, None]
                else:
                    out[s:e] = np.einsum("eik,ejk->eij", g, g) * (vol * kap[s:e])[:, None, None]
            else:
                _, g, w = self._p2(2, s, e)
                if tensor:
                    out[s:e] = np.einsum("eqik,ekl,eqjl,eq->eij", g, kap[s:e], g, w)
                else:
                    out[s:e] = np.einsum("eqik,eqjk,eq->eij", g, g, w) * kap[s:e, None, None]
        return self.pattern.assemble(out)

    def element_mass(self, rhoc, start: int = 0, stop: int | None = None) -> np.ndarray:
        """Consistent element mass matrices (stop - start, nb, nb) [J/K]."""
        ne = self.mesh.n_cells
        stop = ne if stop is None else stop
        c = _per_cell(rhoc, ne, "rho*c")[start:stop]
        if self.order == 1:
            local = (np.ones((4, 4)) + np.eye(4)) / 20.0
            return (np.abs(self._p1[1][start:stop]) * c)[:, None, None] * local
        out = np.empty((stop - start, 10, 10))
        for s in range(start, stop, BLOCK):
            e = min(stop, s + BLOCK)
            v, _, w = self._p2(4, s, e)
            out[s - start : e - start] = np.einsum("qi,qj,eq->eij", v, v, w) * c[s - start : e - start, None, None]
        return out

    def mass(self, rhoc) -> sp.csr_matrix:
        """Consistent mass (heat capacity) matrix M [J/K]; rhoc [J/(m3 K)] scalar or (n_cells,)."""
        return self.pattern.assemble(self.element_mass(rhoc))

    def lumped_mass(self, rhoc) -> np.ndarray:
        """Diagonal of the lumped mass matrix, (n_nodes,) [J/K].

        Linear cells: row sums. Quadratic cells: diagonal scaling of the
        consistent element matrix to the element's total heat capacity
        (Hinton, Rock and Zienkiewicz, Earthquake Eng. Struct. Dyn. 4 (1976),
        from memory), because row sums give zero or negative vertex masses.
        """
        me = self.element_mass(rhoc)
        if self.order == 1:
            d = me.sum(axis=2)
        else:
            diag = np.einsum("eii->ei", me)
            d = diag * (me.sum(axis=(1, 2)) / diag.sum(axis=1))[:, None]
        return np.bincount(self.mesh.cells.ravel(), weights=d.ravel(), minlength=self.mesh.n_nodes)

    # -- boundary and sources --------------------------------------------
    def _face_matrices(self, coef: np.ndarray) -> np.ndarray:
        f = self.mesh.faces
        if f.shape[1] == 3:
            p = self.mesh.points[f]
            area = 0.5 * np.linalg.norm(np.cross(p[:, 1] - p[:, 0], p[:, 2] - p[:, 0]), axis=1)
            local = (np.ones((3, 3)) + np.eye(3)) / 12.0
            return (area * coef)[:, None, None] * local
        v, w, _ = face_jacobians(self.mesh.points, f, 4)
        return np.einsum("qi,qj,fq->fij", v, v, w) * coef[:, None, None]

    def boundary_mass(self, h) -> sp.csr_matrix:
        """Convection matrix H [W/K] on this mesh's pattern.

        Parameters
        ----------
        h : (n_faces,) array
            Heat transfer coefficient of each boundary face [W/(m2 K)];
            zero on faces without convection.
        """
        h = np.asarray(h, dtype=float)
        data = np.zeros(self.pattern.nnz)
        sel = np.flatnonzero(h != 0)
        if sel.size:
            fm = self._face_matrices(h)[sel].reshape(-1)
            nb2 = self.mesh.faces.shape[1] ** 2
            pos = self._face_pos.reshape(-1, nb2)[sel].reshape(-1)
            data = np.bincount(pos, weights=fm, minlength=self.pattern.nnz)
        return self.pattern.matrix(data)

    def boundary_load(self, q) -> np.ndarray:
        """Load vector of a heat flux q (n_faces,) [W/m2] into the body, (n_nodes,) [W]."""
        q = np.asarray(q, dtype=float)
        f = self.mesh.faces
        if f.shape[1] == 3:
            p = self.mesh.points[f]
            area = 0.5 * np.linalg.norm(np.cross(p[:, 1] - p[:, 0], p[:, 2] - p[:, 0]), axis=1)
            loc = np.repeat((area * q / 3.0)[:, None], 3, axis=1)
        else:
            v, w, _ = face_jacobians(self.mesh.points, f, 4)
            loc = np.einsum("qi,fq->fi", v, w) * q[:, None]
        return np.bincount(f.ravel(), weights=loc.ravel(), minlength=self.mesh.n_nodes)

    def source_load(self, f) -> np.ndarray:
        """Load vector of a volumetric source f (scalar or (n_cells,)) [W/m3], (n_nodes,) [W]."""
        ne = self.mesh.n_cells
        c = _per_cell(f, ne, "source")
        if self.order == 1:
            loc = np.repeat((np.abs(self._p1[1]) * c / 4.0)[:, None], 4, axis=1)
        else:
            loc = np.empty((ne, 10))
            for s, e in self._blocks():
                v, _, w = self._p2(4, s, e)
                loc[s:e] = np.einsum("qi,eq->ei", v, w) * c[s:e, None]
        return np.bincount(self.mesh.cells.ravel(), weights=loc.ravel(), minlength=self.mesh.n_nodes)
