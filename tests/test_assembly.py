"""Assembled matrices and load vectors against scikit-fem and against exact totals.

scikit-fem assembles the same Galerkin forms independently (its own reference
element, quadrature and dof numbering); its P2 dofs are mapped to our node
numbers through ``basis.element_dofs``, cell by cell. Agreement to 1e-10
relative means both compute the same matrix up to round-off.
"""

import dataclasses

import numpy as np
import pytest
import scipy.sparse as sp
from heatsoak.core.fem.assembly import Assembler
from heatsoak.core.mesh.generate import box_mesh
from heatsoak.core.mesh.mesh import TET_EDGES
from heatsoak.core.mesh.read import build_mesh
from heatsoak.core.mesh.topology import signed_volumes
from skfem import Basis, BilinearForm, ElementTetP1, ElementTetP2, FacetBasis, LinearForm, MeshTet
from skfem.helpers import dot, grad, mul

SIZE = (0.3, 0.2, 0.15)
ROT = np.linalg.qr(np.array([[2.0, 1.0, 0.3], [0.5, 1.0, -1.0], [0.2, 0.4, 1.5]]))[0]
TENSOR = ROT @ np.diag([4.0, 1.5, 0.3]) @ ROT.T


def two_regions(c):
    return (c[:, 0] + 0.5 * c[:, 1] > 0.17).astype(int), ("inner", "outer")


def perturbed(order, seed=3):
    """A box mesh with interior vertices moved randomly by up to 0.25 cell, edges kept straight."""
    mesh = box_mesh((4, 3, 3), size=SIZE, order=order, regions=two_regions)
    rng = np.random.default_rng(seed)
    p = mesh.points.copy()
    vertices = mesh.vertex_nodes()
    inner = vertices[np.all((p[vertices] > 1e-9) & (p[vertices] < np.array(SIZE) - 1e-9), axis=1)]
    p[inner] += rng.uniform(-0.25, 0.25, (len(inner), 3)) * np.array(SIZE) / (4, 3, 3)
    if order == 2:
        for k, (a, b) in enumerate(TET_EDGES):
            p[mesh.cells[:, 4 + k]] = 0.5 * (p[mesh.cells[:, a]] + p[mesh.cells[:, b]])
    assert signed_volumes(p, mesh.cells).min() > 0.2 * signed_volumes(p, mesh.cells).max()  # none inverted
    return dataclasses.replace(mesh, points=p)  # boundary nodes did not move: faces and groups hold


def skfem_of(mesh):
    """scikit-fem mesh and basis of the same cells, and the map from its dofs to our nodes."""
    sm = MeshTet(np.ascontiguousarray(mesh.points.T), np.ascontiguousarray(mesh.cells[:, :4].T))
    basis = Basis(sm, ElementTetP1() if mesh.order == 1 else ElementTetP2(), intorder=4)
    dofs = basis.element_dofs  # (nb, n_cells): skfem dof of local function i in cell e
    ours = np.empty(basis.N, dtype=np.int64)
    ours[dofs.T] = mesh.cells
    assert np.array_equal(ours[dofs.T], mesh.cells)  # one node per dof, consistently in every cell
    assert np.allclose(basis.doflocs.T, mesh.points[ours])
    return sm, basis, ours


def per_quad_point(values, basis):
    """Per-cell values (n_cells, ...) broadcast to skfem's (..., n_cells, n_qp) layout."""
    v = np.moveaxis(np.asarray(values, float), 0, -1)[..., None]
    return np.broadcast_to(v, v.shape[:-1] + (basis.X.shape[1],)).copy()


@BilinearForm
def sk_conduction(u, v, w):
    return w["k"] * dot(grad(u), grad(v))


@BilinearForm
def sk_tensor_conduction(u, v, w):
    return dot(mul(w["kt"], grad(u)), grad(v))


@BilinearForm
def sk_capacity(u, v, w):
    return w["c"] * u * v


def rel_diff(ours, theirs, perm):
    a = ours.toarray() if sp.issparse(ours) else np.asarray(ours)
    b = theirs.toarray() if sp.issparse(theirs) else np.asarray(theirs)
    a = a[np.ix_(perm, perm)] if a.ndim == 2 else a[perm]
    return np.abs(a - b).max() / np.abs(b).max()


MESHES = {
    "P1": lambda: box_mesh((3, 2, 2), size=SIZE, regions=two_regions),
    "P2": lambda: box_mesh((3, 2, 2), size=SIZE, order=2, regions=two_regions),
    "P1 perturbed": lambda: perturbed(1),
    "P2 perturbed": lambda: perturbed(2),
}


@pytest.fixture(params=list(MESHES))
def mesh(request):
    return MESHES[request.param]()


# -- against scikit-fem --------------------------------------------------------------------


def test_conductivity_and_capacity_match_scikit_fem(mesh):
    # scikit-fem's laplace and mass forms with the same per-cell coefficients (two regions).
    _, basis, perm = skfem_of(mesh)
    kappa = np.array([15.0, 0.8])[mesh.cell_region]
    rhoc = np.array([3.9e6, 1.2e6])[mesh.cell_region]
    asm = Assembler(mesh)
    K_sk = sk_conduction.assemble(basis, k=per_quad_point(kappa, basis))
    M_sk = sk_capacity.assemble(basis, c=per_quad_point(rhoc, basis))
    assert rel_diff(asm.stiffness(kappa), K_sk, perm) < 1e-10
    assert rel_diff(asm.mass(rhoc), M_sk, perm) < 1e-10


def test_tensor_conductivity_matches_scikit_fem(mesh):
    # One rotated tensor in one region, another (scaled, isotropic part added) in the other.
    _, basis, perm = skfem_of(mesh)
    tensors = np.array([TENSOR, 0.5 * TENSOR + np.eye(3)])[mesh.cell_region]
    K_sk = sk_tensor_conduction.assemble(basis, kt=per_quad_point(tensors, basis))
    asm = Assembler(mesh)
    assert rel_diff(asm.stiffness(tensors), K_sk, perm) < 1e-10
    # a single (3, 3) tensor is the same as that tensor in every cell
    one = asm.stiffness(TENSOR)
    every = asm.stiffness(np.broadcast_to(TENSOR, (mesh.n_cells, 3, 3)).copy())
    assert abs(one - every).max() <= 1e-12 * abs(every).max()


def _face_values(centroids):
    """A coefficient that differs on every boundary face: a smooth function of its centroid."""
    c = np.asarray(centroids)
    return 5.0 + 30.0 * c[:, 0] + 70.0 * c[:, 1] ** 2 + 11.0 * c[:, 2]


def test_convection_matrix_and_flux_load_match_scikit_fem_facet_assembly(mesh):
    # scikit-fem FacetBasis on the boundary facets, coefficient per facet.
    sm, basis, perm = skfem_of(mesh)
    facets = sm.boundary_facets()
    fb = FacetBasis(sm, basis.elem, facets=facets, intorder=4)
    h_sk = _face_values(sm.p[:, sm.facets[:, facets]].mean(axis=1).T)
    h_ours = _face_values(mesh.points[mesh.faces[:, :3]].mean(axis=1))
    H_sk = sk_capacity.assemble(fb, c=per_quad_point(h_sk, fb))
    load_sk = LinearForm(lambda v, w: w["q"] * v).assemble(fb, q=per_quad_point(h_sk, fb))
    asm = Assembler(mesh)
    assert len(facets) == mesh.n_faces
    assert rel_diff(asm.boundary_mass(h_ours), H_sk, perm) < 1e-10
    assert rel_diff(asm.boundary_load(h_ours), load_sk, perm) < 1e-10


def test_source_load_matches_scikit_fem(mesh):
    _, basis, perm = skfem_of(mesh)
    f = np.array([2.0e5, -3.0e4])[mesh.cell_region]
    load_sk = LinearForm(lambda v, w: w["f"] * v).assemble(basis, f=per_quad_point(f, basis))
    assert rel_diff(Assembler(mesh).source_load(f), load_sk, perm) < 1e-10


# -- exact properties ------------------------------------------------------------------------


def test_conductivity_annihilates_constants(mesh):
    # grad 1 = 0, so K @ 1 = 0 for any conductivity.
    asm = Assembler(mesh)
    for kappa in (7.0, np.array([15.0, 0.8])[mesh.cell_region], TENSOR):
        K = asm.stiffness(kappa)
        assert np.abs(K @ np.ones(mesh.n_nodes)).max() < 1e-12 * abs(K).max()
        assert abs(K - K.T).max() < 1e-12 * abs(K).max()


def test_capacity_sums_to_the_integral_of_rho_c(mesh):
    # sum_ij M_ij = integral of rho c over the body (partition of unity); box volume exact.
    asm = Assembler(mesh)
    rhoc = np.array([3.9e6, 1.2e6])
    per_cell = rhoc[mesh.cell_region]
    volumes = np.array([asm.source_load((mesh.cell_region == r) * 1.0).sum() for r in range(2)])
    assert volumes.sum() == pytest.approx(np.prod(SIZE), rel=1e-12)
    assert asm.mass(per_cell).sum() == pytest.approx(rhoc @ volumes, rel=1e-12)
    assert asm.lumped_mass(per_cell).sum() == pytest.approx(rhoc @ volumes, rel=1e-12)


def test_lumped_capacity_is_positive(mesh):
    d = Assembler(mesh).lumped_mass(np.array([3.9e6, 1.2e6])[mesh.cell_region])
    assert d.shape == (mesh.n_nodes,)
    assert d.min() > 0


def test_linear_lumped_capacity_is_the_row_sum():
    mesh = perturbed(1)
    asm = Assembler(mesh)
    np.testing.assert_allclose(asm.lumped_mass(2.0e6), asm.mass(2.0e6).sum(axis=1).A1, rtol=1e-13)


def test_quadratic_lumping_is_hrz_diagonal_scaling_on_one_cell():
    # Hinton, Rock & Zienkiewicz (HRZ) lumping (from memory): keep the diagonal of the
    # consistent matrix, scaled to the element's total. The consistent diagonal of a straight
    # 10-node tetrahedron is V/70 at vertices and 8V/105 at mid-edges (checked here against
    # scikit-fem), so HRZ gives V/36 and 4V/27, summing to V.
    vertices = np.array([[0.0, 0.0, 0.0], [0.2, 0.01, 0.0], [0.03, 0.15, 0.02], [0.05, 0.04, 0.3]])
    points = np.vstack([vertices, 0.5 * (vertices[TET_EDGES[:, 0]] + vertices[TET_EDGES[:, 1]])])
    mesh = build_mesh(points, np.arange(10)[None, :], [0], ["solid"])
    volume = abs(np.linalg.det(vertices[1:] - vertices[0])) / 6.0
    _, basis, perm = skfem_of(mesh)
    M_sk = sk_capacity.assemble(basis, c=per_quad_point([1.0], basis)).toarray()
    diag = np.diag(M_sk)[np.argsort(perm)]
    np.testing.assert_allclose(diag, volume * np.array([1 / 70] * 4 + [8 / 105] * 6), rtol=1e-12)
    lumped = Assembler(mesh).lumped_mass(1.0)
    np.testing.assert_allclose(lumped[mesh.cells[0]], volume * np.array([1 / 36] * 4 + [4 / 27] * 6), rtol=1e-12)


def test_boundary_totals_are_coefficient_times_area(mesh):
    # sum of H = sum of h * area; sum of the flux load = q * area; per group, six sides.
    asm = Assembler(mesh)
    areas = {"xmin": SIZE[1] * SIZE[2], "ymin": SIZE[0] * SIZE[2], "zmin": SIZE[0] * SIZE[1]}
    areas.update({k.replace("min", "max"): v for k, v in areas.items()})
    coef = np.array([10.0, 20.0, 35.0, 1.0, 0.5, 300.0])  # per group, in BOX_SIDES order
    per_face = coef[mesh.face_group]
    expected = sum(coef[mesh.group_index(g)] * a for g, a in areas.items())
    assert asm.boundary_mass(per_face).sum() == pytest.approx(expected, rel=1e-12)
    assert asm.boundary_load(per_face).sum() == pytest.approx(expected, rel=1e-12)
    # faces with h = 0 add nothing: the matrix of the xmin side alone has the xmin total
    only = asm.boundary_mass(np.where(mesh.face_group == mesh.group_index("xmin"), 10.0, 0.0))
    assert only.sum() == pytest.approx(10.0 * areas["xmin"], rel=1e-12)
    assert set(np.unique(only.nonzero()[0])) <= set(mesh.group_nodes("xmin"))


def test_source_total_is_source_times_volume(mesh):
    f = np.array([2.0e5, -3.0e4])
    asm = Assembler(mesh)
    volumes = np.array([asm.mass((mesh.cell_region == r) * 1.0).sum() for r in range(2)])
    assert asm.source_load(f[mesh.cell_region]).sum() == pytest.approx(f @ volumes, rel=1e-12)
    assert asm.source_load(3.0).sum() == pytest.approx(3.0 * np.prod(SIZE), rel=1e-12)


def test_mass_and_conductivity_are_symmetric_positive_definite_on_free_nodes():
    # Energy: T^T K T = integral kappa |grad T|^2 > 0 once one side is fixed; T^T M T > 0.
    mesh = perturbed(2)
    asm = Assembler(mesh)
    free = np.setdiff1d(np.arange(mesh.n_nodes), mesh.group_nodes("xmin"))
    K = asm.stiffness(TENSOR)[free][:, free].toarray()
    M = asm.mass(1.0).toarray()
    assert np.linalg.eigvalsh(K).min() > 0
    assert np.linalg.eigvalsh(M).min() > 0
