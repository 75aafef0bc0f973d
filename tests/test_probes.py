"""Probes: locating points and interpolating nodal fields.

Exactness checks: a P1 (P2) Lagrange interpolant reproduces every linear
(quadratic) polynomial exactly, so sampling it anywhere must give the
polynomial's value (common practice, no source).
"""

import numpy as np
import pytest
from heatsoak.core.errors import ProbeError
from heatsoak.core.mesh.generate import box_mesh
from heatsoak.core.results.probes import ProbeSet, distance_to_boundary, locate


def _linear(x):
    return 3.0 + 2.0 * x[:, 0] - 5.0 * x[:, 1] + 7.0 * x[:, 2]


def _quadratic(x):
    return 1.0 + x[:, 0] ** 2 - 3.0 * x[:, 0] * x[:, 1] + 2.0 * x[:, 2] ** 2 + x[:, 1]


@pytest.fixture(scope="module")
def pts():
    rng = np.random.default_rng(0)
    inner = rng.uniform(0, 1, (200, 3)) * [2.0, 1.0, 0.5]
    on_surface = np.array([[0, 0, 0], [2, 1, 0.5], [1, 0.5, 0.5], [0.5, 0, 0.25], [2, 0.3, 0.1]])
    return np.vstack([inner, on_surface])


def test_p1_interpolation_of_a_linear_field_is_exact(pts):
    mesh = box_mesh((5, 4, 3), size=(2.0, 1.0, 0.5))
    probes = ProbeSet(mesh, pts, [f"p{i}" for i in range(len(pts))])
    np.testing.assert_allclose(probes.values(_linear(mesh.points)), _linear(pts), atol=1e-12)


def test_p1_interpolation_of_a_quadratic_field_is_not_exact(pts):
    mesh = box_mesh((5, 4, 3), size=(2.0, 1.0, 0.5))
    probes = ProbeSet(mesh, pts, [f"p{i}" for i in range(len(pts))])
    assert np.abs(probes.values(_quadratic(mesh.points)) - _quadratic(pts)).max() > 1e-3


def test_p2_interpolation_of_a_quadratic_field_is_exact(pts):
    mesh = box_mesh((3, 2, 2), size=(2.0, 1.0, 0.5), order=2)
    probes = ProbeSet(mesh, pts, [f"p{i}" for i in range(len(pts))])
    np.testing.assert_allclose(probes.values(_quadratic(mesh.points)), _quadratic(pts), atol=1e-12)


def test_p2_probes_in_curved_cells_reproduce_a_linear_field_exactly():
    # Isoparametric cells reproduce linear fields exactly (common practice, no source); taking
    # the curved cell as straight-sided would miss by about the mid-node offset times the gradient.
    from heatsoak.core.mesh.shape import tet_basis

    mesh = box_mesh((3, 3, 3), size=(1.0, 1.0, 1.0), order=2)
    rng = np.random.default_rng(4)
    mid = np.unique(mesh.cells[:, 4:])
    mesh.points[mid] += 0.04 * rng.uniform(-1, 1, (mid.size, 3))  # curve every edge (h = 1/3)
    cells = rng.choice(mesh.n_cells, 12, replace=False)
    xi = 0.25 + 0.06 * rng.uniform(-1, 1, (12, 3))  # well inside each cell
    N, _ = tet_basis(2, xi)
    pts = np.einsum("ka,kad->kd", N, mesh.points[mesh.cells[cells]])
    probes = ProbeSet(mesh, pts, [f"p{i}" for i in range(len(pts))])
    np.testing.assert_allclose(probes.values(_linear(mesh.points)), _linear(pts), rtol=0, atol=1e-10)
    # the straight-sided reading of the same cells is visibly off
    straight = np.einsum("ka,ka->k", tet_basis(2, locate(mesh, pts)[1][:, 1:])[0],
                         _linear(mesh.points)[mesh.cells[probes.cells]])
    assert np.abs(straight - _linear(pts)).max() > 1e-3


def test_points_are_found_on_a_strongly_graded_mesh(pts):
    grade = [lambda s: s**4, lambda s: s**3, None]
    mesh = box_mesh((8, 6, 3), size=(2.0, 1.0, 0.5), grading=grade)
    cells, lam = locate(mesh, pts)
    assert (cells >= 0).all()
    assert lam.min() > -1e-8 and np.allclose(lam.sum(axis=1), 1.0)
    probes = ProbeSet(mesh, pts, [f"p{i}" for i in range(len(pts))])
    np.testing.assert_allclose(probes.values(_linear(mesh.points)), _linear(pts), atol=1e-11)


def test_point_outside_names_the_probe_and_its_distance_in_the_user_unit():
    mesh = box_mesh((2, 2, 2), size=(0.1, 0.1, 0.1))
    points = np.array([[0.05, 0.05, 0.05], [0.15, 0.05, 0.05], [0.13, 0.14, 0.05]])
    with pytest.raises(ProbeError) as info:
        ProbeSet(mesh, points, ["ok", "beside", "corner"], unit="mm")
    msg = str(info.value)
    assert "'ok'" not in msg
    assert "probe 'beside' at (150, 50, 50) mm is outside the mesh, 50 mm from its surface" in msg
    assert "'corner' at (130, 140, 50) mm" in msg and "50 mm" in msg  # hypot(30, 40) = 50
    assert [i for i, _ in info.value.outside] == [1, 2]


def test_distance_to_boundary_of_a_box_is_the_euclidean_distance_to_it():
    mesh = box_mesh((2, 3, 2))
    p = np.array([[2.0, 0.5, 0.5], [-1.0, -1.0, 0.5], [1.5, 1.5, 1.5], [0.5, 0.5, 0.5]])
    np.testing.assert_allclose(distance_to_boundary(mesh, p), [1.0, np.sqrt(2), np.sqrt(0.75), 0.5])


def test_an_empty_probe_set_gives_an_empty_array():
    mesh = box_mesh((1, 1, 1))
    probes = ProbeSet(mesh, np.zeros((0, 3)), [])
    assert probes.values(np.zeros(mesh.n_nodes)).shape == (0,)
