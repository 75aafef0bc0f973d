"""Curved quadratic cells: matrices against scikit-fem's isoparametric P2 (MeshTet2) at its
highest rule, and the checks that refuse a cell folding over itself.

scikit-fem's degree-9 rule is first checked against its degree-8 one on the same mesh (they
agree to about 4e-11 here), so the reference is good to far better than the 1e-8 asked of us.
"""

from __future__ import annotations

import numpy as np
import pytest
from heatsoak.core.errors import MeshError
from heatsoak.core.fem import assembly
from heatsoak.core.fem.assembly import Assembler
from heatsoak.core.mesh.generate import box_mesh
from heatsoak.core.mesh.geometry import cell_volumes, curved_cells, curved_faces, isoparametric, sampled_jacobians
from heatsoak.core.mesh.read import build_mesh
from skfem import Basis, ElementTetP2, FacetBasis, LinearForm, MeshTet2
from test_assembly import TENSOR, per_quad_point, rel_diff, sk_capacity, sk_conduction, sk_tensor_conduction

SKFEM_ORDER = 9  # scikit-fem's highest tetrahedron rule


def warped(eps=0.02, n=3):
    """A quadratic unit-cube mesh (two regions) with every node moved by a smooth map of size ``eps``:
    every cell and most boundary faces are curved, none folds."""
    m = box_mesh((n, n, n), order=2, regions=lambda c: ((c[:, 0] > 0.5).astype(int), ("a", "b")))
    p = m.points
    move = np.stack([np.sin(np.pi * p[:, 1]) * np.sin(np.pi * p[:, 2]), np.sin(2 * np.pi * p[:, 0]) * p[:, 2],
                     p[:, 0] * p[:, 1] * np.cos(np.pi * p[:, 2])], axis=1)
    return build_mesh(p + eps * move, m.cells, m.cell_region, m.region_names)


@pytest.fixture(scope="module")
def curved():
    mesh = warped()
    sm = MeshTet2(np.ascontiguousarray(mesh.points.T), np.ascontiguousarray(mesh.cells.T), sort_t=False)
    bases = {k: Basis(sm, ElementTetP2(), intorder=k) for k in (SKFEM_ORDER - 1, SKFEM_ORDER)}
    dofs = bases[SKFEM_ORDER].element_dofs
    perm = np.empty(bases[SKFEM_ORDER].N, dtype=np.int64)
    perm[dofs.T] = mesh.cells
    assert np.allclose(bases[SKFEM_ORDER].doflocs.T, mesh.points[perm])  # the same nodes, curved the same way
    return mesh, sm, bases, perm


def test_the_test_mesh_is_curved_everywhere_and_a_straight_one_is_not():
    mesh = warped()
    assert curved_cells(mesh.points, mesh.cells).all() and curved_faces(mesh.points, mesh.faces).mean() > 0.5
    flat = box_mesh((2, 2, 2), order=2)
    assert not curved_cells(flat.points, flat.cells).any() and not curved_faces(flat.points, flat.faces).any()


def test_curved_conductivity_capacity_and_source_match_scikit_fem_to_1e_8(curved):
    mesh, _, bases, perm = curved
    kappa, rhoc = np.array([15.0, 0.8])[mesh.cell_region], np.array([3.9e6, 1.2e6])[mesh.cell_region]
    f = np.array([2.0e5, -3.0e4])[mesh.cell_region]
    ref = {}
    for k, b in bases.items():
        ref[k] = (sk_conduction.assemble(b, k=per_quad_point(kappa, b)), sk_capacity.assemble(b, c=per_quad_point(rhoc, b)),
                  LinearForm(lambda v, w: w["f"] * v).assemble(b, f=per_quad_point(f, b)))
    lo, hi = ref[SKFEM_ORDER - 1], ref[SKFEM_ORDER]
    assert rel_diff(lo[0], hi[0], np.arange(len(perm))) < 1e-10  # the reference is converged
    asm = Assembler(mesh)
    assert rel_diff(asm.stiffness(kappa), hi[0], perm) < 1e-8
    assert rel_diff(asm.mass(rhoc), hi[1], perm) < 1e-12  # a polynomial of degree 7: exact
    assert rel_diff(asm.source_load(f), hi[2], perm) < 1e-12


def test_curved_tensor_conductivity_matches_scikit_fem(curved):
    mesh, _, bases, perm = curved
    b = bases[SKFEM_ORDER]
    tensors = np.array([TENSOR, 0.5 * TENSOR + np.eye(3)])[mesh.cell_region]
    K_sk = sk_tensor_conduction.assemble(b, kt=per_quad_point(tensors, b))
    assert rel_diff(Assembler(mesh).stiffness(tensors), K_sk, perm) < 1e-8


def test_curved_faces_convection_and_flux_match_scikit_fem(curved):
    mesh, sm, bases, perm = curved
    facets = sm.boundary_facets()
    fb = FacetBasis(sm, ElementTetP2(), facets=facets, intorder=SKFEM_ORDER)
    h = 5.0 + 30.0 * np.arange(len(facets)) % 7  # a coefficient per face, matched through the vertex sets
    ours_key = {tuple(k): i for i, k in enumerate(np.sort(mesh.faces[:, :3], axis=1).tolist())}
    theirs = np.sort(perm[sm.facets[:, facets].T], axis=1)
    h_ours = np.empty(mesh.n_faces)
    h_ours[[ours_key[tuple(k)] for k in theirs.tolist()]] = h
    H_sk = sk_capacity.assemble(fb, c=per_quad_point(h, fb))
    load_sk = LinearForm(lambda v, w: w["q"] * v).assemble(fb, q=per_quad_point(h, fb))
    asm = Assembler(mesh)
    assert rel_diff(asm.boundary_mass(h_ours), H_sk, perm) < 1e-8
    assert rel_diff(asm.boundary_load(h_ours), load_sk, perm) < 1e-8


def test_the_straight_cell_rule_on_curved_cells_misses_by_far_more(curved, monkeypatch):
    # what the comparison above guards against: degree 2 on curved cells (measured 1.5e-3)
    mesh, _, bases, perm = curved
    monkeypatch.setattr(assembly, "CURVED_DEGREE", 2)
    K_sk = sk_conduction.assemble(bases[SKFEM_ORDER], k=per_quad_point(np.ones(mesh.n_cells), bases[SKFEM_ORDER]))
    assert rel_diff(Assembler(mesh).stiffness(1.0), K_sk, perm) > 1e-4


def _one_cell(offset):
    """The reference tetra10 (scaled by 0.1 m) with the mid-node of edge 0-1 moved by ``offset`` (x, y, z)."""
    p = 0.1 * np.vstack([np.zeros(3), np.eye(3)])
    mid = 0.5 * (p[[0, 1, 0, 0, 1, 2]] + p[[1, 2, 2, 3, 3, 3]])
    mid[0] += 0.1 * np.asarray(offset)
    return np.vstack([p, mid]), np.arange(10)[None]


def test_a_strongly_curved_cell_that_does_not_fold_is_accepted_with_its_exact_volume():
    points, cells = _one_cell([0.0, -0.15, -0.15])  # bulging out of the cell, 0.21 of the edge off it
    mesh = build_mesh(points, cells, [0], ["solid"])
    assert sampled_jacobians(mesh.points, mesh.cells)[0][0] > 0
    # det J of a tetra10 is a cubic polynomial: any rule of degree >= 3 gives the volume exactly
    exact = isoparametric(mesh.points, mesh.cells, 20)[2].sum()
    assert exact > 1.05 * 0.1**3 / 6  # the bulge adds volume to the straight cell
    np.testing.assert_allclose(cell_volumes(mesh.points, mesh.cells), exact, rtol=1e-13)


def test_a_cell_folding_over_itself_is_refused_as_a_negative_jacobian_not_a_node_order():
    points, cells = _one_cell([0.3, 0.3, 0.3])  # the mid-node of edge 0-1 pushed far into the cell
    with pytest.raises(MeshError, match=r"1 curved quadratic elements of the mesh have a negative Jacobian "
                                        r"at a sample point .*worst: element 0"):
        build_mesh(points, cells, [0], ["solid"])
