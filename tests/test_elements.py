"""Shape functions, quadrature rules and element geometry on the reference and physical cells."""

from itertools import product
from math import factorial

import numpy as np
import pytest
from heatsoak.core.mesh.generate import box_mesh
from heatsoak.core.mesh.geometry import cell_volumes, face_areas, face_jacobians, isoparametric, p1_gradients
from heatsoak.core.mesh.mesh import TET_EDGES, TET_FACES
from heatsoak.core.mesh.shape import tet_basis, tet_quadrature, tri_basis, tri_quadrature

#: Reference nodes of the 10-node tetrahedron and the 6-node triangle (node order of core.mesh).
TET_NODES = np.array([[0, 0, 0], [1, 0, 0], [0, 1, 0], [0, 0, 1]], float)
TET_NODES = np.vstack([TET_NODES, 0.5 * (TET_NODES[TET_EDGES[:, 0]] + TET_NODES[TET_EDGES[:, 1]])])
TRI_NODES = np.array([[0, 0], [1, 0], [0, 1], [0.5, 0], [0.5, 0.5], [0, 0.5]], float)


def tet_monomial(a, b, c):
    """Exact integral of x^a y^b z^c over the reference tetrahedron: a! b! c! / (a + b + c + 3)!."""
    return factorial(a) * factorial(b) * factorial(c) / factorial(a + b + c + 3)


def tri_monomial(a, b):
    """Exact integral of x^a y^b over the reference triangle: a! b! / (a + b + 2)!."""
    return factorial(a) * factorial(b) / factorial(a + b + 2)


# -- quadrature ------------------------------------------------------------------------------


@pytest.mark.parametrize("degree", [1, 2, 4, 5, 8, 12])
def test_tet_quadrature_integrates_every_monomial_up_to_its_degree(degree):
    # Calculus (Dirichlet's integral): a! b! c! / (a + b + c + 3)!.
    pts, w = tet_quadrature(degree)
    for a, b, c in product(range(degree + 1), repeat=3):
        if a + b + c <= degree:
            got = np.sum(w * pts[:, 0] ** a * pts[:, 1] ** b * pts[:, 2] ** c)
            assert got == pytest.approx(tet_monomial(a, b, c), rel=1e-13, abs=1e-15), (a, b, c)


@pytest.mark.parametrize("degree", [1, 2, 4, 5, 8, 12])
def test_tri_quadrature_integrates_every_monomial_up_to_its_degree(degree):
    pts, w = tri_quadrature(degree)
    for a, b in product(range(degree + 1), repeat=2):
        if a + b <= degree:
            got = np.sum(w * pts[:, 0] ** a * pts[:, 1] ** b)
            assert got == pytest.approx(tri_monomial(a, b), rel=1e-13, abs=1e-15), (a, b)


@pytest.mark.parametrize("rule, exact, degree", [(tet_quadrature, tet_monomial, 2), (tet_quadrature, tet_monomial, 4),
                                                   (tet_quadrature, tet_monomial, 7)])
def test_tet_quadrature_is_not_exact_one_degree_higher(rule, exact, degree):
    # The check above can fail: x^(d+1) is not integrated exactly by these rules.
    pts, w = rule(degree)
    assert abs(np.sum(w * pts[:, 0] ** (degree + 1)) - exact(degree + 1, 0, 0)) > 1e-6


def test_asking_for_a_degree_with_no_rule_is_an_error():
    with pytest.raises(ValueError, match="degree"):
        tet_quadrature(21)
    with pytest.raises(ValueError, match="degree"):
        tri_quadrature(21)


def test_quadrature_points_lie_inside_the_reference_cells():
    for d in (1, 2, 4, 8):
        pts, w = tet_quadrature(d)
        assert (pts >= 0).all() and (pts.sum(axis=1) <= 1).all()
        assert d == 4 or (w > 0).all()  # Keast's degree-4 rule has one negative weight
        pts, w = tri_quadrature(d)
        assert (pts >= 0).all() and (pts.sum(axis=1) <= 1).all() and (w > 0).all()


# -- shape functions -------------------------------------------------------------------------

CASES = [
    (tet_basis, 1, TET_NODES[:4]),
    (tet_basis, 2, TET_NODES),
    (tri_basis, 1, TRI_NODES[:3]),
    (tri_basis, 2, TRI_NODES),
]


@pytest.mark.parametrize("basis, order, nodes", CASES)
def test_shape_functions_are_one_at_their_node_and_zero_at_the_others(basis, order, nodes):
    values, _ = basis(order, nodes)
    np.testing.assert_allclose(values, np.eye(len(nodes)), atol=1e-15)


@pytest.mark.parametrize("basis, order, nodes", CASES)
def test_shape_functions_sum_to_one_and_their_gradients_to_zero(basis, order, nodes):
    rng = np.random.default_rng(1)
    xi = rng.dirichlet(np.ones(nodes.shape[1] + 1), 50)[:, 1:]
    values, grads = basis(order, xi)
    np.testing.assert_allclose(values.sum(axis=1), 1.0, rtol=1e-14)
    np.testing.assert_allclose(grads.sum(axis=1), 0.0, atol=1e-13)


@pytest.mark.parametrize("basis, order, nodes", CASES)
def test_shape_function_gradients_match_finite_differences(basis, order, nodes):
    rng = np.random.default_rng(2)
    xi = rng.dirichlet(np.ones(nodes.shape[1] + 1), 10)[:, 1:]
    _, grads = basis(order, xi)
    eps = 1e-6
    for j in range(nodes.shape[1]):
        step = np.zeros(nodes.shape[1])
        step[j] = eps
        fd = (basis(order, xi + step)[0] - basis(order, xi - step)[0]) / (2 * eps)
        np.testing.assert_allclose(grads[:, :, j], fd, atol=1e-8)


@pytest.mark.parametrize("basis, order, nodes", CASES)
def test_shape_functions_reproduce_polynomials_of_their_order(basis, order, nodes):
    # Interpolation of any polynomial of degree <= order is exact (completeness).
    rng = np.random.default_rng(3)
    xi = rng.dirichlet(np.ones(nodes.shape[1] + 1), 20)[:, 1:]
    coef = rng.normal(size=(nodes.shape[1] + 1, nodes.shape[1] + 1))

    def poly(x):
        xh = np.hstack([np.ones((len(x), 1)), x])
        return np.einsum("ni,ij,nj->n", xh, coef, xh) if order == 2 else xh @ coef[0]

    values, _ = basis(order, xi)
    np.testing.assert_allclose(values @ poly(nodes), poly(xi), atol=1e-12)


def test_unknown_element_order_is_an_error():
    with pytest.raises(ValueError, match="order"):
        tet_basis(3, TET_NODES)


# -- geometry --------------------------------------------------------------------------------


def test_p1_gradients_are_those_of_the_barycentric_coordinates():
    mesh = box_mesh((2, 2, 2), size=(0.3, 0.2, 0.1))
    g, vol = p1_gradients(mesh.points, mesh.cells)
    # the gradients reproduce any linear field: sum_i T_i grad L_i = grad T
    a = np.array([3.0, -2.0, 0.5])
    T = mesh.points @ a + 7.0
    np.testing.assert_allclose(np.einsum("eik,ei->ek", g, T[mesh.cells]), np.broadcast_to(a, (mesh.n_cells, 3)))
    assert vol.min() > 0
    assert vol.sum() == pytest.approx(0.3 * 0.2 * 0.1, rel=1e-13)


def test_straight_quadratic_cells_have_the_volumes_and_gradients_of_linear_ones():
    p1 = box_mesh((2, 2, 2), size=(0.3, 0.2, 0.1))
    p2 = box_mesh((2, 2, 2), size=(0.3, 0.2, 0.1), order=2)
    np.testing.assert_allclose(cell_volumes(p2.points, p2.cells), cell_volumes(p1.points, p1.cells), rtol=1e-13)
    # a quadratic field's physical gradient at the quadrature points is exact
    values, grads, _ = isoparametric(p2.points, p2.cells, 2)
    x = p2.points
    T = x[:, 0] ** 2 + x[:, 0] * x[:, 1] - 3 * x[:, 2]
    xq = np.einsum("qb,ebi->eqi", values, x[p2.cells])
    exact = np.stack([2 * xq[..., 0] + xq[..., 1], xq[..., 0], -3.0 + 0 * xq[..., 2]], axis=-1)
    np.testing.assert_allclose(np.einsum("eqbk,eb->eqk", grads, T[p2.cells]), exact, atol=1e-12)


def test_curved_quadratic_cell_volume_is_the_integral_of_its_jacobian():
    # Calculus: moving mid-edge node 5 (edge 1-2) of the reference cell by d n makes the map
    # x = xi + d n N5(xi), with det J = 1 + d n . grad N5, so the volume is
    # 1/6 + d * (surface integral of N5 n . nu). N5 = 4 L1 L2 integrates to area/3 on the two
    # faces holding edge 1-2: x + y + z = 1 (area sqrt(3)/2, n . nu = 1) and z = 0 (area 1/2,
    # n . nu = -1/sqrt(3)); the sum is d / (3 sqrt(3)).
    d = 0.05
    pts = TET_NODES.copy()
    pts[5] += d * np.ones(3) / np.sqrt(3.0)
    vol = cell_volumes(pts, np.arange(10)[None, :])[0]
    assert vol == pytest.approx(1.0 / 6.0 + d / (3.0 * np.sqrt(3.0)), rel=1e-12)


def test_face_normals_point_out_of_the_box_and_areas_sum_to_the_surface():
    for order in (1, 2):
        mesh = box_mesh((2, 3, 2), size=(0.3, 0.2, 0.1), order=order)
        _, w, normals = face_jacobians(mesh.points, mesh.faces, 2)
        outward = mesh.points[mesh.faces[:, :3]].mean(axis=1) - np.array([0.15, 0.1, 0.05])
        assert (np.einsum("fqi,fi->fq", normals, outward) > 0).all()
        surface = 2 * (0.3 * 0.2 + 0.3 * 0.1 + 0.2 * 0.1)
        assert face_areas(mesh.points, mesh.faces).sum() == pytest.approx(surface, rel=1e-13)
        assert w.sum() == pytest.approx(surface, rel=1e-13)


def test_tet_faces_are_outward_and_opposite_their_vertex():
    p = TET_NODES[:4]
    for i, face in enumerate(TET_FACES[:, :3]):
        assert i not in face
        a, b, c = p[face]
        normal = np.cross(b - a, c - a)
        assert normal @ (a - p[i]) > 0
