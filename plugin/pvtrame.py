"""The one place that imports the pyvista <-> trame bridge.

pyvista moved its trame integration into the separate ``trame-pyvista``
package; if it moves again, only this module changes.
"""

from __future__ import annotations

import os

# Off-screen EGL rendering: skips a noisy X11 attempt on headless machines.
os.environ.setdefault("VTK_DEFAULT_OPENGL_WINDOW", "vtkEGLRenderWindow")

import pyvista as pv
from trame_pyvista.widgets import PyVistaLocalView, PyVistaRemoteView

pv.OFF_SCREEN = True

__all__ = ["new_plotter", "pv", "view_for"]


def new_plotter(background="#f4f5f2") -> pv.Plotter:
    """An off-screen plotter suitable for a trame view."""
    plotter = pv.Plotter(off_screen=True)
    plotter.ren_win.SetMultiSamples(0)  # 8x multisampling made each software-OpenGL render 2-4x slower
    plotter.set_background(background)
    return plotter


def view_for(plotter, mode: str = "server", **kwargs):
    """A trame view widget showing ``plotter``.

    Parameters
    ----------
    plotter : pyvista.Plotter
    mode : {"server", "client"}
        "server" streams images rendered on the server (robust, cost does not
        grow with the mesh on the client); "client" renders with vtk.js in
        the browser.
    **kwargs
        Passed to the trame view widget (events, picking modes, style).
    """
    if mode == "client":
        return PyVistaLocalView(plotter, **kwargs)
    if mode != "server":
        raise ValueError(f"view mode must be 'server' or 'client', got {mode!r}")
    return PyVistaRemoteView(plotter, **kwargs)
