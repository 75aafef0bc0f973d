"""Which runs belong to the mesh open now: by the mesh's content, never by the object in memory."""

from __future__ import annotations

from heatsoak.plugin.runs.store import mesh_key


def current_key(panel) -> str:
    """Content key of the mesh open now ("" with none), computed once per mesh read."""
    return "" if panel.mesh is None else mesh_key(panel.mesh)


def is_here(panel, run) -> bool:
    """Whether ``run`` was computed on the mesh open now (same nodes, cells and unit)."""
    return run is not None and panel.mesh is not None and run.mesh_key == current_key(panel)
