"""Vectorised Galerkin assembly of the heat equation's matrices and vectors.

All matrices of one mesh share one sparsity pattern (:class:`~.pattern.Pattern`),
computed once without a comparison sort. Element matrices are symmetric, so
only their upper triangles are computed and summed (see :mod:`.pattern`).
No Python loop runs over elements: element matrices are computed with batched
numpy in blocks of cells (a loop over blocks keeps temporaries in cache).

For linear cells with a scalar (per-cell) conductivity and heat capacity,
K and M are linear in the per-cell coefficient: the assembler keeps two
sparse (nnz_upper, n_cells) matrices, G_K and G_M, holding the element
matrices of unit coefficient, so assembling K or M for new coefficients is
one sparse mat-vec ``G @ c``. Tensor conductivities and quadratic cells take
the element-matrix path.

Matrices (SI units, temperatures in K or degC alike):

* K, conductivity: K_ij = int kappa grad N_i . grad N_j dV   [W/K]
* M, mass (heat capacity): M_ij = int rho c N_i N_j dV       [J/K]
* H, convection: H_ij = int_S h N_i N_j dS                   [W/K]
* boundary load: b_i = int_S q N_i dS                        [W]
* source load: f_i = int_V f N_i dV                          [W]
"""

from __future__ import annotations

from functools import cached_property

import numpy as np
import scipy.sparse as sp
from heatsoak.core.fem.pattern import Pattern, build_pattern, element_entries
from heatsoak.core.mesh.geometry import curved_cells, curved_faces, face_jacobians, reference_jacobians
from heatsoak.core.mesh.mesh import Mesh

__all__ = ["BLOCK", "Assembler", "Pattern", "build_pattern"]

#: Cells per block of element-matrix computation.
BLOCK = 16384

#: Quadrature degree on curved quadratic cells and faces, whose integrands are rational
#: (stiffness) or polynomials of degree up to 7 (mass); straight ones keep the rules exact
#: for them (2 for stiffness, 4 for mass and loads). Checked against scikit-fem's highest
#: rule in tests/test_assembly_curved.py.
CURVED_DEGREE = 8
#: Curved cells per block at that degree (125 points each).
CURVED_BLOCK = 1024

#: Consistent mass matrix of a linear tetrahedron divided by its volume: (1 + delta_ij) / 20.
_P1_MASS = (np.ones((4, 4)) + np.eye(4)) / 20.0


def _cross(a: np.ndarray, b: np.ndarray, out: np.ndarray) -> np.ndarray:
    """Cross product of (3, b) component arrays into ``out`` (3, b)."""
    np.multiply(a[1], b[2], out=out[0])
    out[0] -= a[2] * b[1]
    np.multiply(a[2], b[0], out=out[1])
    out[1] -= a[0] * b[2]
    np.multiply(a[0], b[1], out=out[2])
    out[2] -= a[1] * b[0]
    return out


def p1_area_vectors(coords: np.ndarray, cells: np.ndarray):
    """Area vectors of the faces of straight tetrahedra, and their Jacobian determinants.

    Parameters
    ----------
    coords : (3, n_nodes) node coordinates, component-major [m]
    cells : (b, >=4) int

    Returns
    -------
    det : (b,) 6 x signed volume [m^3]
    area : (4, 3, b) ``area[i] = det * grad N_i`` [m^2] (twice the area vector of
        the face opposite vertex i, pointing inwards)
    """
    c = cells[:, :4].T
    x = np.empty((3, 4, c.shape[1]))
    for k in range(3):  # take is several times faster than fancy indexing here
        np.take(coords[k], c, out=x[k])
    d = x[:, 1:] - x[:, :1]  # (3 components, 3 edges, b)
    e1, e2, e3 = d[:, 0], d[:, 1], d[:, 2]
    area = np.empty((4, 3, x.shape[2]))
    _cross(e2, e3, area[1])
    _cross(e3, e1, area[2])
    _cross(e1, e2, area[3])
    np.add(area[1], area[2], out=area[0])
    area[0] += area[3]
    np.negative(area[0], out=area[0])
    det = np.einsum("kb,kb->b", e1, area[1])
    return det, area


def _dot(a: np.ndarray, b: np.ndarray, out: np.ndarray) -> np.ndarray:
    """Dot products of (3, b) component arrays into ``out`` (b,)."""
    np.multiply(a[0], b[0], out=out)
    out += a[1] * b[1]
    out += a[2] * b[2]
    return out


def p1_unit_stiffness(det: np.ndarray, area: np.ndarray) -> np.ndarray:
    """Element conductivity matrices of unit conductivity, as element entries (10, b) [W/K per W/(m K)].

    From :func:`p1_area_vectors`: K_ij = vol grad N_i . grad N_j = area_i . area_j / (6 |det|).
    Only the Gram matrix of area_1..3 is computed; row 0 and column 0 follow
    from the rows of K summing to zero (constants are in the kernel).
    Entry order as :func:`~.pattern.element_entries`: 00 11 22 33 01 02 03 12 13 23.
    """
    a = area[1:]
    k = np.empty((10, det.shape[0]))
    _dot(a[0], a[0], k[1])
    _dot(a[1], a[1], k[2])
    _dot(a[2], a[2], k[3])
    _dot(a[0], a[1], k[7])
    _dot(a[0], a[2], k[8])
    _dot(a[1], a[2], k[9])
    for out, (x, y, z) in ((4, (1, 7, 8)), (5, (7, 2, 9)), (6, (8, 9, 3)), (0, (4, 5, 6))):
        np.add(k[x], k[y], out=k[out])
        k[out] += k[z]
        np.negative(k[out], out=k[out])
    k *= 1.0 / (6.0 * np.abs(det))
    return k


#: Upper triangle (row, column) of a symmetric 3 x 3 matrix.
_UPPER = np.triu_indices(3)


def _gradient_pairs(dref: np.ndarray) -> np.ndarray:
    """(nq * 6, nb * nb): row (q, k <= l), column (i, j) holds the (i, j) entry of
    dref[q, :, k] dref[q, :, l]^T + its transpose for k < l, so a symmetric 3 x 3 matrix
    per point given by its upper triangle gives sum_q dref_q mid_q dref_q^T in one product."""
    nq, nb, _ = dref.shape
    pairs = np.einsum("qik,qjl->qklij", dref, dref)
    pairs = pairs + np.swapaxes(pairs, 1, 2) * (1 - np.eye(3))[None, :, :, None, None]
    return pairs[:, _UPPER[0], _UPPER[1]].reshape(nq * 6, nb * nb)


def _row_products(a: np.ndarray) -> np.ndarray:
    """a a^T for a stack of 3 x 3 matrices (..., 3, 3), entry by entry."""
    out = np.empty(a.shape)
    for k in range(3):
        for m in range(k, 3):
            out[..., k, m] = a[..., k, 0] * a[..., m, 0] + a[..., k, 1] * a[..., m, 1] + a[..., k, 2] * a[..., m, 2]
            out[..., m, k] = out[..., k, m]
    return out


def _mass(values: np.ndarray, weights: np.ndarray) -> np.ndarray:
    """sum_q weights[e, q] values[q, i] values[q, j]: (e, nb, nb)."""
    nq, nb = values.shape
    return (weights @ (values[:, :, None] * values[:, None, :]).reshape(nq, nb * nb)).reshape(-1, nb, nb)


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
    cached, so re-assembly with new coefficients only recomputes what
    depends on them (one sparse mat-vec for linear cells and scalar
    coefficients).

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
    def _coords(self) -> np.ndarray:
        return np.ascontiguousarray(self.mesh.points.T, dtype=float)

    @cached_property
    def _volumes(self) -> np.ndarray:
        """Cell volumes (n_cells,) [m^3]."""
        if self.order == 1:
            vol = np.empty(self.mesh.n_cells)
            for s, e in self._blocks():
                vol[s:e] = np.abs(p1_area_vectors(self._coords, self.mesh.cells[s:e])[0]) / 6.0
            return vol
        return np.concatenate([self._p2(4, s, e, False)[3].sum(axis=1) for s, e in self._blocks()])

    @cached_property
    def _unit_operators(self):
        """(G_K, G_M), (n_upper, n_cells) sparse: the upper data of K and M for per-cell
        scalar conductivity and heat capacity c is ``G @ c`` (linear cells)."""
        i, j = element_entries(4)
        ne = self.mesh.n_cells
        kv = np.empty((ne, len(i)))
        vol = np.empty(ne)
        for s, e in self._blocks():
            det, area = p1_area_vectors(self._coords, self.mesh.cells[s:e])
            vol[s:e] = np.abs(det) / 6.0
            kv[s:e] = p1_unit_stiffness(det, area).T
        self.__dict__.setdefault("_volumes", vol)
        pat = self.pattern
        return pat.cell_operator(kv), pat.cell_operator(vol[:, None] * _P1_MASS[i, j])

    def _p2(self, degree: int, start: int, stop: int, inverse: bool = True):
        return reference_jacobians(self.mesh.points, self.mesh.cells[start:stop], degree, inverse)

    @cached_property
    def _curved(self) -> np.ndarray:
        """Sorted indices of the curved quadratic cells."""
        return np.flatnonzero(curved_cells(self.mesh.points, self.mesh.cells))

    def _p2_cells(self, degree: int, s: int, e: int, local, inverse: bool = True) -> np.ndarray:
        """Per-cell arrays ``local(cell indices, values, dref, inv, weights)`` (see
        :func:`~heatsoak.core.mesh.geometry.reference_jacobians`) of quadratic cells s:e, with the
        degree-``degree`` rule on straight cells and :data:`CURVED_DEGREE` on curved ones."""
        out = local(np.arange(s, e), *self._p2(degree, s, e, inverse))
        c = self._curved
        curved = c[np.searchsorted(c, s) : np.searchsorted(c, e)]
        high = max(degree, CURVED_DEGREE)
        for k in range(0, len(curved), CURVED_BLOCK):
            idx = curved[k : k + CURVED_BLOCK]
            out[idx - s] = local(idx, *reference_jacobians(self.mesh.points, self.mesh.cells[idx], high, inverse))
        return out

    @cached_property
    def _curved_faces(self) -> np.ndarray:
        return curved_faces(self.mesh.points, self.mesh.faces)

    def _p2_faces(self, local) -> np.ndarray:
        """Per-face arrays ``local(face indices, values, weights)`` of 6-node faces, degree 4 on
        flat faces and :data:`CURVED_DEGREE` on curved ones (their area element is not polynomial)."""
        f = self.mesh.faces
        v, w, _ = face_jacobians(self.mesh.points, f, 4)
        out = local(np.arange(len(f)), v, w)
        idx = np.flatnonzero(self._curved_faces)
        if len(idx):
            v, w, _ = face_jacobians(self.mesh.points, f[idx], CURVED_DEGREE)
            out[idx] = local(idx, v, w)
        return out

    @cached_property
    def _face_pos(self) -> np.ndarray:
        f = self.mesh.faces
        nf, nb = f.shape
        rows = np.broadcast_to(f[:, :, None], (nf, nb, nb)).reshape(-1)
        cols = np.broadcast_to(f[:, None, :], (nf, nb, nb)).reshape(-1)
        return self.pattern.positions(rows, cols)

    # -- element matrices ------------------------------------------------
    def _blocks(self, start: int = 0, stop: int | None = None):
        stop = self.mesh.n_cells if stop is None else stop
        for s in range(start, stop, BLOCK):
            yield s, min(stop, s + BLOCK)

    def stiffness(self, kappa) -> sp.csr_matrix:
        """Conductivity matrix K [W/K].

        Parameters
        ----------
        kappa : float, (n_cells,), (3, 3) or (n_cells, 3, 3)
            Conductivity [W/(m K)], isotropic or a symmetric tensor per cell.
        """
        ne = self.mesh.n_cells
        tensor = np.asarray(kappa).ndim >= 2
        kap = _conductivity(kappa, ne) if tensor else _per_cell(kappa, ne, "kappa")
        if self.order == 1 and not tensor:
            return self.pattern.from_upper(self._unit_operators[0] @ kap)
        return self._assemble_blocks(lambda s, e: self._stiffness_block(kap, tensor, s, e))

    def _stiffness_block(self, kap, tensor: bool, s: int, e: int) -> np.ndarray:
        """Element conductivity matrices of cells s:e, (e - s, nb, nb)."""
        if self.order == 1:
            det, area = p1_area_vectors(self._coords, self.mesh.cells[s:e])
            k = kap[s:e] if tensor else kap[s:e, None, None] * np.eye(3)
            return np.einsum("ikb,bkl,jlb->bij", area, k, area) / (6.0 * np.abs(det))[:, None, None]
        def local(idx, _, dref, inv, w):
            # K_e = sum_q w_q |det J| dref_q J^-1 kappa J^-T dref_q^T: the 3 x 3 middle per point,
            # then one product with the fixed pairs of reference gradients
            if tensor:
                mid = inv @ kap[idx][:, None] @ np.swapaxes(inv, 2, 3)
            else:
                mid = _row_products(inv) * kap[idx, None, None, None]
            mid *= w[:, :, None, None]
            nb = dref.shape[1]
            return (mid[..., _UPPER[0], _UPPER[1]].reshape(len(idx), -1) @ _gradient_pairs(dref)).reshape(-1, nb, nb)

        return self._p2_cells(2, s, e, local)

    def _assemble_blocks(self, block) -> sp.csr_matrix:
        """Sum the symmetric element matrices ``block(s, e)`` (e - s, nb, nb) of all cells."""
        pat = self.pattern
        i, j = element_entries(pat.nb)
        values = np.empty((pat.n_cells, len(i)))
        for s, e in self._blocks():
            values[s:e] = block(s, e)[:, i, j]
        return pat.assemble_entries(values)

    def element_mass(self, rhoc, start: int = 0, stop: int | None = None) -> np.ndarray:
        """Consistent element mass matrices (stop - start, nb, nb) [J/K]."""
        ne = self.mesh.n_cells
        stop = ne if stop is None else stop
        c = _per_cell(rhoc, ne, "rho*c")[start:stop]
        if self.order == 1:
            return (self._volumes[start:stop] * c)[:, None, None] * _P1_MASS
        out = np.empty((stop - start, 10, 10))
        for s, e in self._blocks(start, stop):
            out[s - start : e - start] = self._p2_cells(
                4, s, e, lambda idx, v, _, __, w: _mass(v, w * c[idx - start, None]), False)
        return out

    def mass(self, rhoc) -> sp.csr_matrix:
        """Consistent mass (heat capacity) matrix M [J/K]; rhoc [J/(m3 K)] scalar or (n_cells,)."""
        c = _per_cell(rhoc, self.mesh.n_cells, "rho*c")
        if self.order == 1:
            return self.pattern.from_upper(self._unit_operators[1] @ c)
        return self._assemble_blocks(lambda s, e: self.element_mass(c, s, e))

    def lumped_mass(self, rhoc) -> np.ndarray:
        """Diagonal of the lumped mass matrix, (n_nodes,) [J/K].

        Linear cells: row sums (a quarter of the cell's heat capacity per
        vertex). Quadratic cells: diagonal scaling of the consistent element
        matrix to the element's total heat capacity (Hinton, Rock and
        Zienkiewicz, Earthquake Eng. Struct. Dyn. 4 (1976), from memory),
        because row sums give zero or negative vertex masses.
        """
        cells, n = self.mesh.cells, self.mesh.n_nodes
        if self.order == 1:
            quarter = self._volumes * _per_cell(rhoc, self.mesh.n_cells, "rho*c") / 4.0
            return np.bincount(cells.ravel(), weights=np.repeat(quarter, 4), minlength=n)
        me = self.element_mass(rhoc)
        diag = np.einsum("eii->ei", me)
        d = diag * (me.sum(axis=(1, 2)) / diag.sum(axis=1))[:, None]
        return np.bincount(cells.ravel(), weights=d.ravel(), minlength=n)

    # -- boundary and sources --------------------------------------------
    def _face_matrices(self, coef: np.ndarray) -> np.ndarray:
        f = self.mesh.faces
        if f.shape[1] == 3:
            p = self.mesh.points[f]
            area = 0.5 * np.linalg.norm(np.cross(p[:, 1] - p[:, 0], p[:, 2] - p[:, 0]), axis=1)
            local = (np.ones((3, 3)) + np.eye(3)) / 12.0
            return (area * coef)[:, None, None] * local
        return self._p2_faces(lambda idx, v, w: _mass(v, w * coef[idx, None]))

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
            loc = self._p2_faces(lambda idx, v, w: (w * q[idx, None]) @ v)
        return np.bincount(f.ravel(), weights=loc.ravel(), minlength=self.mesh.n_nodes)

    def source_load(self, f) -> np.ndarray:
        """Load vector of a volumetric source f (scalar or (n_cells,)) [W/m3], (n_nodes,) [W]."""
        ne = self.mesh.n_cells
        c = _per_cell(f, ne, "source")
        if self.order == 1:
            loc = np.repeat((self._volumes * c / 4.0)[:, None], 4, axis=1)
        else:
            loc = np.empty((ne, 10))
            for s, e in self._blocks():
                loc[s:e] = self._p2_cells(4, s, e, lambda idx, v, _, __, w: (w * c[idx, None]) @ v, False)
        return np.bincount(self.mesh.cells.ravel(), weights=loc.ravel(), minlength=self.mesh.n_nodes)
