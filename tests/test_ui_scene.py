"""The 3D scene: colours per surface group, results drawn by overwriting one scalar array in place."""

from __future__ import annotations

import os

import numpy as np
import pytest

pytest.importorskip("pyvista")
os.environ.setdefault("VTK_DEFAULT_OPENGL_WINDOW", "vtkEGLRenderWindow")

from heatsoak.core.mesh.generate import box_mesh
from heatsoak.plugin.pvtrame import new_plotter
from heatsoak.plugin.scene import Scene, boundary_polydata


@pytest.fixture()
def scene():
    plotter = new_plotter()
    s = Scene(plotter)
    s.show_mesh(box_mesh((3, 3, 3)))
    yield s
    plotter.close()


def test_surface_points_map_back_to_volume_nodes():
    mesh = box_mesh((3, 3, 3))
    poly, nodes = boundary_polydata(mesh)
    np.testing.assert_array_equal(poly.points, mesh.points[nodes])
    assert poly.n_cells == mesh.n_faces and len(np.unique(poly.cell_data["group"])) == 6


def test_frames_overwrite_the_same_array_and_change_the_picture(scene):
    mesh = scene.mesh
    scene.show_field(clim=(0.0, 1.0))
    array = scene.shown.GetPointData().GetArray("T")
    scene.set_values(mesh.points[:, 0])
    scene.plotter.render()
    first = scene.plotter.screenshot(return_img=True).astype(float)
    scene.set_values(1.0 - mesh.points[:, 0])
    scene.plotter.render()
    second = scene.plotter.screenshot(return_img=True).astype(float)
    assert scene.shown.GetPointData().GetArray("T") is array
    assert np.abs(first - second).mean() > 5.0
    np.testing.assert_allclose(scene.shown.point_data["T"], 1.0 - mesh.points[scene.shown_nodes, 0])


def test_clipped_body_keeps_whole_cells_so_every_point_is_a_node(scene):
    scene.show_field(clip=((1.0, 0.0, 0.0), (0.5, 0.5, 0.5)))
    scene.set_values(scene.mesh.points[:, 1])
    np.testing.assert_allclose(scene.shown.points, scene.mesh.points[scene.shown_nodes])
    assert scene.shown.points[:, 0].max() < 1.0  # the far side was cut away


def test_highlight_keeps_the_selected_group_colour_and_fades_the_rest(scene):
    before = np.array(scene.surface.cell_data["rgb"], dtype=float)
    scene.highlight_group(2)
    after = np.array(scene.surface.cell_data["rgb"], dtype=float)
    chosen = scene.mesh.face_group == 2
    np.testing.assert_array_equal(after[chosen], before[chosen])
    assert np.abs(after[~chosen] - before[~chosen]).mean() > 20
