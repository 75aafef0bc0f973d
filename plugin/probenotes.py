"""Where the core reads each probe of the form: a note for a probe moved onto the surface.

A probe a little outside a faceted surface (a point typed on the true, curved
surface, or a click rounded to six digits) is read at the nearest surface
point; :class:`heatsoak.core.probes.ProbeSet` says so in its ``notes``. The
probe list shows that note on the probe's row.
"""

from __future__ import annotations

import re

import numpy as np
from heatsoak.core.errors import ProbeError
from heatsoak.core.meshread import UNITS
from heatsoak.core.probes import ProbeSet


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
    mesh : heatsoak.core.mesh.Mesh
    rows : list of dict
        Probe form rows ``{"name", "x", "y", "z"}``, coordinates in ``unit``.
    unit : str
        Length unit of the rows (a key of ``UNITS``).

    Rows that are unreadable or outside the mesh get no note (the case checks
    mark them); the note drops the probe's name and given position, which the
    row already shows.
    """
    if unit not in UNITS:
        return {}
    index = [i for i, row in enumerate(rows) if placeable(row)]
    for _ in range(2):  # once more without the points found outside
        if not index:
            return {}
        points = np.array([[float(rows[i][c]) for c in "xyz"] for i in index]) * UNITS[unit]
        try:
            notes = ProbeSet(mesh, points, [str(rows[i]["name"]) for i in index], unit=unit).notes
            break
        except ProbeError as exc:
            outside = {j for j, _ in getattr(exc, "outside", [])}
            index = [i for j, i in enumerate(index) if j not in outside]
    else:
        return {}
    out = {}
    for note in notes:
        for i in index:
            prefix = f"probe {str(rows[i]['name'])!r} at "
            if note.startswith(prefix):
                out[str(i)] = re.sub(r"^\([^)]*\) \S+ ", "", note[len(prefix):])
    return out
