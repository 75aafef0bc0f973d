"""The heat-diffusion panel: mount it into any trame app that has a pyvista plotter.

>>> heat = mount(server, plotter, data_dir="meshes")   # doctest: +SKIP
>>> with layout.drawer: heat.setup_ui()                 # doctest: +SKIP
>>> with layout.content: heat.view_ui(); heat.results_ui()  # doctest: +SKIP

The panel owns the state keys starting with ``hs_`` and the controller
entries starting with ``hs_``; it calls only :mod:`heatsoak.core` for work.
"""

from __future__ import annotations

import atexit
from pathlib import Path

from heatsoak.plugin.export import actions as export_actions
from heatsoak.plugin.jobs import actions as jobs_actions
from heatsoak.plugin.load import actions as load_actions
from heatsoak.plugin.load import guard
from heatsoak.plugin.pvtrame import view_for
from heatsoak.plugin.results import actions as results_actions
from heatsoak.plugin.results import layout as results_layout
from heatsoak.plugin.results import time_error as results_time_error
from heatsoak.plugin.run import actions as run_actions
from heatsoak.plugin.runs import layout as runs_layout
from heatsoak.plugin.runs.store import RunStore
from heatsoak.plugin.scene import Scene
from heatsoak.plugin.session import actions as session_actions
from heatsoak.plugin.session import layout as session_layout
from heatsoak.plugin.setup import actions as setup_actions
from heatsoak.plugin.setup import layout as setup_layout
from heatsoak.plugin.startup import WorkFolder
from heatsoak.plugin.sweep import actions as sweep_actions
from heatsoak.plugin.sweep import layout as sweep_layout
from heatsoak.plugin.whatif import actions as whatif_actions
from trame.widgets import html

#: Shown in the panel and the app bar: what the numbers are worth.
DISCLAIMER = (
    "Results are engineering estimates to be checked by a competent person. "
    "Defer to local codes and licensed practice."
)


#: A press and a release of the main button within a few pixels over the 3D view is a click: its
#: place (fractions of the view from the left and the bottom) goes to the server at the release,
#: before the view's own mouse handling, which renders on the server first (0.1-0.2 s a render on
#: a million-cell part in software OpenGL).
PRESS_JS = "$event.currentTarget.dataset.px = $event.clientX; $event.currentTarget.dataset.py = $event.clientY"
CLICK_JS = ("$event.button === 0 && Math.abs($event.clientX - $event.currentTarget.dataset.px) "
            "+ Math.abs($event.clientY - $event.currentTarget.dataset.py) < 5 && trigger('hs_view_pick', "
            "[($event.clientX - $event.currentTarget.getBoundingClientRect().left) / $event.currentTarget.clientWidth, "
            "1 - ($event.clientY - $event.currentTarget.getBoundingClientRect().top) / $event.currentTarget.clientHeight])")


class HeatPanel:
    """State, handlers and widgets of the heat-diffusion panel.

    Parameters
    ----------
    server : trame_server.Server
        A vue3 trame server.
    plotter : pyvista.Plotter
        Off-screen plotter shown by the app's view.
    data_dir : path, optional
        Folder the file list may open files from (default: current folder).
    work_dir : path, optional
        Where uploads and run results go, kept at exit (default: a new temporary folder, removed
        when the Python process ends).
    view_mode : {"server", "client"}
        Rendering of :meth:`view_ui`.
    """

    def __init__(self, server, plotter, data_dir=None, work_dir=None, view_mode: str = "server"):
        self.server, self.state, self.ctrl = server, server.state, server.controller
        self.plotter = plotter
        self.scene = Scene(plotter)
        self.data_dir = Path(data_dir or ".").resolve()
        if work_dir is None:
            temporary = WorkFolder.open(None)
            atexit.register(temporary.close)
            work_dir = temporary.path
        self.work_dir = Path(work_dir).resolve()
        self.view_mode = view_mode
        self.mesh = None
        self.mesh_path = None
        self.case_dir = self.data_dir
        self.root = None  # the folder files named by the open case must stay in (see load.actions.case_paths)
        self.runs = RunStore()
        self.job = None
        self.views = []
        self.state.hs_disclaimer = DISCLAIMER
        server.enable_module({"serve": {"__heatsoak": str(Path(__file__).parent)}, "styles": ["__heatsoak/style.css"]})
        for module in (jobs_actions, session_actions, load_actions, setup_actions, run_actions, results_actions,
                       results_time_error, export_actions, guard, whatif_actions, sweep_actions):
            module.register(self)

    def open_path(self, path) -> bool:
        """Open a mesh file or a case file (``.toml``) from anywhere the app was told to."""
        path = Path(path)
        opener = load_actions.open_case if path.suffix.lower() == ".toml" else load_actions.open_bare_mesh
        opened = opener(self, path)
        if opened:
            guard.mark_kept(self)
        return opened

    # ----------------------------------------------------------- view sync
    def update_view(self) -> None:
        """Push the plotter's new picture to every view of it."""
        for view in self.views:
            view.update()

    def reset_camera(self) -> None:
        for view in self.views:
            view.reset_camera()

    def attach_view(self, view) -> None:
        """Let a view the host app built follow the panel's changes."""
        self.views.append(view)

    @property
    def view_events(self) -> dict:
        """Keyword arguments that wire a host-built view to the panel's 3D clicks."""
        return {"picking_modes": ("hs_picking", ["click"]), "click": (self.ctrl.hs_view_click, "[$event]")}

    # -------------------------------------------------------------- widgets
    def view_ui(self, **kwargs):
        """The 3D view of the plotter, wired for clicks (call inside a layout whose box is
        ``position: relative``); a watching tab sees it under a cover that takes no clicks to the view."""
        html.Div(v_if=session_layout.WATCHING, classes="hs-watch-cover", id="hs-watch-cover")
        html.Img(v_if="hs_picture", src=("hs_picture",), classes="hs-picture", id="hs-picture",
                 alt="prepared frame")  # over the view while playing; clicks pass through
        quality = {"interactive_ratio": 0.5, "still_quality": 80, "interactive_quality": 60}
        if self.view_mode == "client":  # vtk.js picks in the browser
            view = view_for(self.plotter, self.view_mode, **quality, **self.view_events, **kwargs)
        else:  # clicks found in the browser go out before the view's own mouse handling renders
            with html.Div(classes="hs-view-box", __events=[("press", "pointerdown.capture"),
                                                           ("release", "pointerup.capture")],
                          press=PRESS_JS, release=CLICK_JS):
                view = view_for(self.plotter, self.view_mode, **quality, **kwargs)
        self.attach_view(view)
        return view

    def setup_ui(self):
        """Who edits the workspace (and the take-over button of a watching tab), then mesh, surfaces
        and conditions, materials, time, probes (for a drawer)."""
        session_layout.banner(self)
        with session_layout.locked():
            setup_layout.build(self)

    def results_ui(self):
        """Run bar, player and curves (below the view)."""
        with session_layout.locked():
            results_layout.build(self)

    def runs_ui(self):
        """Runs kept, comparison and export (for a side drawer)."""
        with session_layout.locked():
            sweep_layout.build(self)
            runs_layout.build(self)


def mount(server, plotter, **kwargs) -> HeatPanel:
    """Mount the heat-diffusion panel on ``server`` for ``plotter``.

    Parameters
    ----------
    server : trame_server.Server
        The app's trame server (vue3 client).
    plotter : pyvista.Plotter
        The app's off-screen plotter.
    **kwargs
        ``data_dir``, ``work_dir``, ``view_mode``: see :class:`HeatPanel`.

    Returns
    -------
    HeatPanel
        Call its ``*_ui`` methods inside the app's layout to place the widgets.
    """
    return HeatPanel(server, plotter, **kwargs)
