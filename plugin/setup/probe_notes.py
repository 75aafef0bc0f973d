"""Where the core reads each probe of the form: a note for a probe moved onto the surface.

A probe a little outside a faceted surface (a point typed on the true, curved
surface, or a click rounded to six digits) is read at the nearest surface
point (:func:`heatsoak.core.results.probes.place`). The probe list shows that note on
the probe's row.
"""

from __future__ import annotations

import numpy as np
from heatsoak.core.mesh.read import UNITS
from heatsoak.core.results.probes import moved_note, place


def placeable(row: dict) -> bool:
    """Whether a probe row's position reads as three finite numbers."""
    try:
        xyz = [float(row[c]) for c in "xyz"]
    except (KeyError, TypeError, ValueError):
        return False
    return bool(np.all(np.isfinite(xyz)))


def probe_notes(mesh, rows: list, unit: str) -> dict:
    """``{row index as text: note}`` for the probe rows the core moves onto the surface.

    Parameters
    ----------
    mesh : heatsoak.core.mesh.mesh.Mesh
    rows : list of dict
        Probe form rows ``{"name", "x", "y", "z"}``, coordinates in ``unit``.
    unit : str
        Length unit of the rows (a key of ``UNITS``).

    Rows that are unreadable or outside the mesh get no note (the case checks
    mark them); the note leaves out the probe's name and given position, which
    the row already shows.
    """
    index = [i for i, row in enumerate(rows) if placeable(row)]
    if unit not in UNITS or not index:
        return {}
    given = np.array([[float(rows[i][c]) for c in "xyz"] for i in index]) * UNITS[unit]
    points, cells, _, distance = place(mesh, given)
    return {str(i): moved_note(distance[j], points[j], unit)
            for j, i in enumerate(index) if cells[j] >= 0 and distance[j] > 0}
