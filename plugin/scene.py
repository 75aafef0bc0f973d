"""What the 3D view shows: surface groups, highlights, probes and results.

Geometry is built once per mesh (and once per clip change); playing an
animation only overwrites the scalar array of the shown surface in place.
"""

from __future__ import annotations

import numpy as np
import vtk
from heatsoak.plugin.pvtrame import pv
from vtk.util import numpy_support

#: Calm, distinct colours for surface groups (cycled when there are more).
GROUP_COLOURS = (
    "#3b7dd8", "#e07b39", "#4caf7a", "#c9485b", "#8a6cc9", "#d4b13f",
    "#3fb3c4", "#a0714f", "#d665a8", "#7f8c5a", "#5a6f9c", "#b8573a",
)
FADED = np.array([0.86, 0.87, 0.85])
#: Colour maps: perceptually uniform for temperature, diverging for differences.
TEMPERATURE_CMAP = "cividis"
DIFFERENCE_CMAP = "coolwarm"
UNIT_LABEL = "T [°C]"
#: Title of the colour bar of a difference between two runs.
DIFFERENCE_LABEL = "Difference [K]"


def group_colour(i: int) -> str:
    """Hex colour of surface group ``i``."""
    return GROUP_COLOURS[i % len(GROUP_COLOURS)]


def _rgb(hex_colour: str) -> np.ndarray:
    h = hex_colour.lstrip("#")
    return np.array([int(h[k:k + 2], 16) for k in (0, 2, 4)]) / 255.0


def boundary_polydata(mesh) -> tuple:
    """The boundary as triangles on its own compact point set.

    Returns
    -------
    poly : pyvista.PolyData
        Cell data ``group`` (int, index into ``mesh.group_names``).
    nodes : ndarray of int, shape (n_surface_points,)
        Volume node index of each surface point.
    """
    tri = mesh.faces[:, :3]
    nodes, local = np.unique(tri, return_inverse=True)
    local = local.reshape(-1, 3)
    cells = np.hstack([np.full((len(local), 1), 3), local]).ravel()
    poly = pv.PolyData(mesh.points[nodes], cells)
    poly.cell_data["group"] = mesh.face_group
    return poly, nodes


def volume_grid(mesh) -> pv.UnstructuredGrid:
    """Linear tetrahedra of the mesh (vertices only), for clipping and slicing."""
    tets = mesh.cells[:, :4]
    cells = np.hstack([np.full((len(tets), 1), 4), tets]).ravel()
    types = np.full(len(tets), vtk.VTK_TETRA, dtype=np.uint8)
    grid = pv.UnstructuredGrid(cells, types, mesh.points)
    grid.point_data["node"] = np.arange(mesh.n_nodes)
    return grid


def result_style(cmap: str, clim, title: str) -> dict:
    """``add_mesh`` keywords of a result surface coloured by its "T" array, with its colour bar."""
    return dict(scalars="T", cmap=cmap, clim=clim, name="result", show_edges=False, pickable=True,
                scalar_bar_args={"title": title, "vertical": True, "fmt": "%.4g", "position_x": 0.84,
                                 "position_y": 0.2, "height": 0.6, "color": "#2d3331", "title_font_size": 13,
                                 "label_font_size": 12})


def add_probes(plotter, points, names, size: float) -> tuple:
    """Spheres of radius ``size`` [m] at probe ``points`` (n, 3) [m], labelled by ``names``.

    Returns
    -------
    (spheres actor, labels actor)
    """
    cloud = pv.PolyData(np.asarray(points, dtype=float))
    glyphs = cloud.glyph(geom=pv.Sphere(radius=size), scale=False, orient=False)
    spheres = plotter.add_mesh(glyphs, color="#d0312d", name="probes", pickable=False)
    labels = plotter.add_point_labels(
        cloud, list(names), font_size=12, point_size=1, shape_opacity=0.6, name="probe_labels",
        always_visible=True, text_color="#1f2421", shape_color="#ffffff", pickable=False,
    )
    return spheres, labels


def time_text_style() -> dict:
    """``add_text`` keywords of the line naming the run and time."""
    return dict(position="upper_left", font_size=9, color="#2d3331", name="time")


class Scene:
    """The objects in one pyvista plotter that the heat panel owns.

    Parameters
    ----------
    plotter : pyvista.Plotter
    """

    def __init__(self, plotter):
        self.plotter = plotter
        self.mesh = None
        self.surface = None
        self.surface_nodes = None
        self.shown = None  # the polydata whose "T" array frames overwrite
        self.shown_nodes = None
        self._actors = {}
        self.selected_group = None
        self.probes = ()  # (points (n, 3) [m], names, sphere radius [m]) of the marked probes
        self._picker = vtk.vtkCellPicker()
        self._picker.SetTolerance(0.0005)

    # ------------------------------------------------------------------ mesh
    def show_mesh(self, mesh) -> None:
        """Replace everything by ``mesh``'s surface, coloured by group."""
        self.plotter.clear_actors()
        self._actors.clear()
        self.mesh = mesh
        self.surface, self.surface_nodes = boundary_polydata(mesh)
        self.surface.cell_data["rgb"] = self._group_rgb(None)
        self._actors["groups"] = self.plotter.add_mesh(
            self.surface, scalars="rgb", rgb=True, show_edges=True, edge_color="#6d7470",
            line_width=0.5, name="groups", pickable=True, show_scalar_bar=False,
        )
        self._actors["groups"].prop.edge_opacity = 0.35
        self.plotter.view_isometric()
        self.plotter.reset_camera()
        self.time_text = self.plotter.add_text("", **time_text_style())

    def _group_rgb(self, selected) -> np.ndarray:
        table = np.array([_rgb(group_colour(i)) for i in range(len(self.mesh.group_names))])
        if selected is not None:
            faded = 0.3 * table + 0.7 * FADED
            faded[selected] = table[selected]
            table = faded
        return (table[self.mesh.face_group] * 255).astype(np.uint8)

    def highlight_group(self, index) -> None:
        """Show group ``index`` in its colour and fade the others (None: all in colour)."""
        if self.surface is None:
            return
        self.selected_group = index
        self.surface.cell_data["rgb"][:] = self._group_rgb(index)
        self.surface.cell_data["rgb"].Modified() if hasattr(self.surface.cell_data["rgb"], "Modified") else None
        self.surface.Modified()

    def show_groups(self) -> None:
        """Back to the set-up look: groups coloured, results hidden."""
        for name in ("result", "bar"):
            self._remove(name)
        if "groups" in self._actors:
            self._actors["groups"].visibility = True
        self.shown = None
        self.set_time_text("")

    # --------------------------------------------------------------- picking
    def pick(self, x: float, y: float):
        """Surface point and group under display position (x, y) (y from bottom).

        Returns
        -------
        (point (3,) in metres, group index) or None when nothing is hit.
        """
        renderer = self.plotter.renderer
        if not self._picker.Pick(x, y, 0, renderer):
            return None
        cell = self._picker.GetCellId()
        data = self._picker.GetDataSet()
        point = np.array(self._picker.GetPickPosition())
        if data is None or cell < 0:
            return None
        groups = data.GetCellData().GetArray("group")
        if groups is not None:
            group = int(groups.GetValue(cell))
        else:
            group = self.nearest_group(point)
        return point, group

    def nearest_group(self, point) -> int:
        centres = self.surface.cell_centers().points
        return int(self.mesh.face_group[np.argmin(((centres - point) ** 2).sum(axis=1))])

    # ----------------------------------------------------------------- probes
    def show_probes(self, points, names) -> None:
        """Mark probe points with small spheres and labels (points in metres)."""
        self._remove("probes")
        self._remove("probe_labels")
        self.probes = ()
        if len(points) == 0:
            return
        self.probes = (np.asarray(points, dtype=float), tuple(names), 0.012 * self.surface.length)
        self._actors["probes"], self._actors["probe_labels"] = add_probes(self.plotter, *self.probes)

    # ---------------------------------------------------------------- results
    def show_field(self, clip=None, cmap=TEMPERATURE_CMAP, clim=(0.0, 1.0), title=UNIT_LABEL) -> None:
        """Build the result surface once: the outer surface, or a clipped body.

        Parameters
        ----------
        clip : (normal (3,), origin (3,)) or None
            Keep the side of the plane the normal points away from.
        """
        self._remove("result")
        if clip is None:
            shown, nodes = self.surface.copy(deep=False), self.surface_nodes
        else:
            normal, origin = clip
            cut = volume_grid(self.mesh).clip(normal=normal, origin=origin, crinkle=True)
            shown = cut.extract_surface(algorithm=None)
            nodes = self._clip_nodes(shown)
        shown.point_data["T"] = np.zeros(shown.n_points)
        self.shown, self.shown_nodes = shown, nodes
        self._actors["groups"].visibility = False
        self._actors["result"] = self.plotter.add_mesh(shown, **result_style(cmap, clim, title))

    @staticmethod
    def _clip_nodes(shown) -> np.ndarray:
        """Volume node of each point of a crinkle-clipped surface (whole cells, no new points)."""
        return np.asarray(shown.point_data["node"]).astype(np.int64)

    def set_values(self, nodal) -> None:
        """Overwrite the shown scalars with nodal values (n_nodes,), in place."""
        if self.shown is None:
            return
        vtk_array = self.shown.GetPointData().GetArray("T")
        numpy_support.vtk_to_numpy(vtk_array)[:] = np.asarray(nodal)[self.shown_nodes]
        vtk_array.Modified()  # same array, same actor: only the values changed

    def set_range(self, lo: float, hi: float) -> None:
        """Colour range of the result [degC]."""
        if "result" in self._actors:
            hi = hi if hi > lo else lo + 1e-6
            self._actors["result"].mapper.scalar_range = (lo, hi)

    def set_time_text(self, text: str) -> None:
        if getattr(self, "time_text", None) is not None:
            self.time_text.SetText(2, text)

    def _remove(self, name: str) -> None:
        actor = self._actors.pop(name, None)
        if actor is not None:
            self.plotter.remove_actor(actor, reset_camera=False, render=False)
        if name == "result":
            for title in list(self.plotter.scalar_bars.keys()):
                self.plotter.remove_scalar_bar(title, render=False)
