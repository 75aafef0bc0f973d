"""No set-up lost by opening another file: ask first when it has changes not yet run or exported.

The set-up counts as kept when it was opened, run or exported; its case dict
at that moment is remembered (:func:`mark_kept`). Opening another mesh or case
from the file list or an upload compares the case the forms describe now with
it; when they differ a dialog asks before the forms are replaced.
"""

from __future__ import annotations

import json
from pathlib import Path

from heatsoak.plugin.setup import actions as setup_actions


def fingerprint(panel) -> str:
    """The case the forms describe now (and the entries that cannot be read), as text."""
    case, errors = setup_actions.current_case(panel)
    return json.dumps({"case": case, "unreadable": [str(e) for e in errors]}, sort_keys=True, default=str)


def mark_kept(panel) -> None:
    """The set-up as it is now was opened, run or exported: opening another file loses nothing."""
    panel.kept_setup = fingerprint(panel) if panel.mesh is not None else None


def has_changes(panel) -> bool:
    """Whether the set-up changed since it was last opened, run or exported."""
    return panel.mesh is not None and fingerprint(panel) != getattr(panel, "kept_setup", None)


def request_open(panel, opener, path: Path, upload: bool = False) -> None:
    """Open ``path`` with ``opener(panel, path)`` now when nothing would be lost, else ask first."""
    state = panel.state
    if not has_changes(panel):
        if opener(panel, path):
            mark_kept(panel)
        return
    panel.pending_open = (opener, Path(path), upload)
    current = state.hs_case_name or state.hs_mesh_name
    state.hs_guard_text = (f"The set-up of {current} has changes that were not run or exported. "
                           f"Opening {Path(path).name} replaces it, and those changes are lost.")
    state.hs_guard_name = Path(path).name
    state.hs_guard = True


def register(panel) -> None:
    """The two answers of the dialog."""
    state, ctrl = panel.state, panel.ctrl
    state.update({"hs_guard": False, "hs_guard_text": "", "hs_guard_name": ""})
    panel.pending_open, panel.kept_setup = None, None

    @ctrl.set("hs_guard_open")
    def open_anyway():
        """Drop the changes and open the file asked for."""
        pending, panel.pending_open = panel.pending_open, None
        state.hs_guard = False
        if pending is not None and pending[0](panel, pending[1]):
            mark_kept(panel)

    @ctrl.set("hs_guard_keep")
    def keep_editing():
        """Leave the set-up as it is; an upload waiting to be opened is cleared from its field."""
        pending, panel.pending_open = panel.pending_open, None
        state.hs_guard = False
        if pending is not None and pending[2]:
            state.hs_upload = None
