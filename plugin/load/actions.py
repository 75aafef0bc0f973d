"""Handlers of the mesh step: browse the data folder, upload, read a mesh or a case."""

from __future__ import annotations

import os
import re
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path

from heatsoak.core.case.casefile import read_case_toml
from heatsoak.core.case.paths import CasePaths
from heatsoak.core.errors import CaseError, InputError
from heatsoak.core.mesh.inspect import summarize
from heatsoak.core.mesh.read import UNITS, read_mesh, unit_scale
from heatsoak.core.problem.schedule import table_from_text
from heatsoak.core.results.probes import prepare_search
from heatsoak.plugin.load import guard, listing
from heatsoak.plugin.results import actions as results_actions
from heatsoak.plugin.setup import actions as setup_actions
from heatsoak.plugin.setup import materials as material_actions
from heatsoak.plugin.setup.forms import bc_form_from_case

#: Subfolder of the work folder holding uploads (an uploaded case may name only files in it).
UPLOADS = "uploads"


def register(panel) -> None:
    """Defaults and handlers of the mesh step."""
    state, ctrl = panel.state, panel.ctrl
    state.update({
        "hs_dir": "", "hs_files": [], "hs_mesh_name": "", "hs_unit": "m", "hs_units": list(UNITS),
        "hs_feature_angle": 30.0, "hs_unit_from": "", "hs_facts": None, "hs_mesh_error": "", "hs_upload": None,
        "hs_upload_error": "", "hs_max_upload_mb": listing.MAX_UPLOAD_BYTES // 1_000_000,
    })

    @ctrl.set("hs_refresh_files")
    def refresh_files():
        """List the current folder of the data folder."""
        try:
            state.hs_files = listing.list_files(panel.data_dir, state.hs_dir)
        except (InputError, OSError, ValueError) as exc:
            state.hs_dir, state.hs_mesh_error = "", str(exc)
            state.hs_files = listing.list_files(panel.data_dir, "")

    @ctrl.set("hs_open")
    def open_entry(path, kind=None):
        """Open a row of the file list: enter a folder, read a mesh or a case. The row's kind is
        found again here from the file itself (``kind`` from the browser is not trusted)."""
        try:
            target, kind = listing.entry_of(panel.data_dir, path)
        except InputError as exc:
            state.hs_mesh_error = str(exc)
            return
        if kind == "folder":
            state.hs_dir = listing.relative(panel.data_dir, target)
            refresh_files()
            return
        guard.request_open(panel, open_case if kind == "case" else open_bare_mesh, target)

    @ctrl.set("hs_up_dir")
    def up_dir():
        state.hs_dir = listing.parent_of(state.hs_dir)
        refresh_files()

    register_choices(panel)
    refresh_files()


def register_choices(panel) -> None:
    """Unit, feature angle and upload."""
    state, ctrl = panel.state, panel.ctrl

    @ctrl.set("hs_set_unit")
    def set_unit(unit):
        """The user says which length unit the file is in: read it again."""
        previous = state.hs_unit, state.hs_unit_from
        state.hs_unit, state.hs_unit_from = unit, "as chosen"
        probes = bool(state.hs_probes)
        if panel.mesh_path is not None and not open_mesh(panel, panel.mesh_path, keep_forms=True, search_probes=probes):
            state.hs_unit, state.hs_unit_from = previous  # the mesh still open was read in this one

    @ctrl.set("hs_set_angle")
    def set_angle(angle):
        """A new feature angle splits untagged surfaces again."""
        try:
            value = float(angle)
        except (TypeError, ValueError):
            value = float("nan")
        if not 0.0 <= value <= 180.0:  # NaN fails too
            state.hs_mesh_error = f"feature angle {str(angle)[:20]!r}: give a number of degrees from 0 to 180"
            return
        state.hs_feature_angle = value
        reload_mesh(panel)

    @state.change("hs_upload")
    def on_upload(hs_upload, **_):
        """Store an uploaded file in the work folder and open it."""
        if not hs_upload:
            return
        state.hs_upload_error = state.hs_mesh_error = ""  # a message about an earlier file no longer applies
        try:
            name, content = listing.unwrap_upload(hs_upload, hint="; put large meshes in the data folder")
            path = listing.save_upload(panel.work_dir / UPLOADS, name, content)
        except InputError as exc:
            state.hs_upload_error = str(exc)
            return
        guard.request_open(panel, open_case if path.suffix == ".toml" else open_bare_mesh, path, upload=True)


def reload_mesh(panel) -> None:
    """Read the mesh again with the unit and feature angle now set."""
    if panel.mesh_path is not None:
        open_mesh(panel, panel.mesh_path, keep_forms=True, search_probes=bool(panel.state.hs_probes))


#: What the facts table says of the unit of a mesh file opened on its own.
BARE_UNIT_NOTE = "the file states no unit: choose the one it was drawn in"


def open_bare_mesh(panel, path: Path) -> bool:
    """Open a mesh file on its own: it holds no unit, so it is read in metres (as a case file
    without ``mesh.unit``), whatever the case opened before said; the facts table says so."""
    state = panel.state
    previous = state.hs_unit, state.hs_unit_from
    state.hs_unit, state.hs_unit_from = "m", BARE_UNIT_NOTE
    if not open_mesh(panel, path):
        state.hs_unit, state.hs_unit_from = previous  # the mesh still open was read in this one
        return False
    return True


def open_mesh(panel, path: Path, keep_forms: bool = False, search_probes: bool = False) -> bool:
    """Read ``path`` with the unit and feature angle in the state and show it; ``search_probes``:
    the case places probes, so their search tree is built beside the mesh facts."""
    state = panel.state
    state.hs_mesh_error = ""
    paths = case_paths(panel, path)
    try:  # the unit (typed or from the case); a regular file within the size limit, its XDMF data beside it
        unit_scale(state.hs_unit)
        paths.resolve_mesh("mesh file", Path(path).name)
    except InputError as exc:
        state.hs_mesh_error = _plain(exc, path)
        return False
    try:
        mesh = read_mesh(path, state.hs_unit, float(state.hs_feature_angle))
    except (InputError, OSError, ValueError) as exc:  # a reader's message may quote the file: not shown
        state.hs_mesh_error = without_content(_plain(exc, path), keep=repr(Path(path).name))
        return False
    panel.mesh, panel.mesh_path, panel.root = mesh, Path(path), paths.root
    panel.case_dir = Path(path).parent  # the forms' case names the mesh relative to it
    state.hs_mesh_name = Path(path).name
    with ThreadPoolExecutor(1) as pool:  # numpy releases the GIL: the facts and the probe search overlap
        search = pool.submit(prepare_search, mesh) if search_probes else None
        state.hs_facts = summarize(mesh)
        if search is not None:
            search.result()
    state.hs_unit_m = UNITS[state.hs_unit]
    panel.scene.show_mesh(mesh)
    setup_actions.mesh_changed(panel, keep_forms=keep_forms)
    results_actions.mesh_opened(panel)
    panel.reset_camera()
    panel.update_view()
    return True


def _plain(exc, path) -> str:
    """An error message without the machine's folders (the user knows the file by its name)."""
    return str(exc).replace(str(Path(path).parent) + "/", "")


#: What stands in a message for the text it quoted from a file.
NOT_SHOWN = "(content not shown)"


def without_content(message: str, keep: str = "") -> str:
    """``message`` with the file text it quotes (``'...'``, ``"..."``, ``[...]``) replaced by
    :data:`NOT_SHOWN`, except ``keep`` (the file's own quoted name): a case may name any file of the
    data folder as a table or mesh, and what is in it must not reach the browser that way."""
    parts = re.split(r"""('[^']*'|"[^"]*"|\[[^\]]*\])""", message)
    return "".join(p if i % 2 == 0 or p == keep else NOT_SHOWN for i, p in enumerate(parts))


def case_paths(panel, path) -> CasePaths:
    """How the files named by the case (or mesh) at ``path`` are found: relative to its folder and
    confined to the upload folder for uploads, to the data folder for its files, not confined for
    a file the app was given from elsewhere (the command line's: the user's own permissions)."""
    uploads = Path(os.path.realpath(panel.work_dir / UPLOADS))
    root = listing.confinement(path, uploads, panel.data_dir)
    return CasePaths(Path(path).parent, root, "the uploaded files" if root == uploads else "the data folder")


def open_case(panel, path: Path) -> bool:
    """Read a case file: its mesh, then fill every form from it. Every file the case names is
    confined as :func:`case_paths` says; messages never quote a refused file's content."""
    state, name = panel.state, Path(path).name
    paths = case_paths(panel, path)
    try:
        data = read_case_toml(path, paths.root)
    except CaseError as exc:
        state.hs_mesh_error = _plain(exc, path)
        return False
    mesh_sec = data.get("mesh") if isinstance(data.get("mesh"), dict) else {}
    angle = mesh_sec.get("feature_angle", 30.0)
    if isinstance(angle, bool) or not isinstance(angle, (int, float)):
        state.hs_mesh_error = f"{name}: mesh.feature_angle {angle!r} is not a number of degrees"
        return False
    try:
        mesh_path = paths.resolve_mesh("mesh.file", mesh_sec.get("file"))
    except InputError as exc:
        state.hs_mesh_error = f"{name}: {exc}"
        return False
    previous = state.hs_unit, state.hs_feature_angle, state.hs_unit_from
    state.hs_unit, state.hs_feature_angle = str(mesh_sec.get("unit", "m")), float(angle)
    state.hs_unit_from = f"from {name}" if "unit" in mesh_sec else f"{name} names none: metres"
    if not open_mesh(panel, mesh_path, search_probes=bool(data.get("probe"))):
        state.hs_unit, state.hs_feature_angle, state.hs_unit_from = previous  # the open mesh was read with these
        state.hs_mesh_error = f"{name}: {state.hs_mesh_error}"
        return False
    fill_forms_from_case(panel, data, paths)
    state.hs_case_name = name
    return True


def fill_forms_from_case(panel, data: dict, paths: CasePaths) -> None:
    """Set the condition, material, time and probe forms from case data; tables named by file
    are read through ``paths`` (confined and size-limited)."""
    state = panel.state

    def read_table(name):
        _, text = paths.read_text("table", name)
        try:
            table = table_from_text(text, str(name))
        except InputError as exc:  # say which row is wrong, never what it holds (the file may not be a table)
            raise InputError(without_content(str(exc))) from None
        return table.times, table.values

    bcs = dict(panel.bcs)
    for group, entry in (data.get("boundary") or {}).items():
        if group in bcs and isinstance(entry, dict):
            try:
                bcs[group] = bc_form_from_case(entry, read_table)
            except (InputError, ValueError, TypeError) as exc:
                state.hs_mesh_error = f"boundary.{group}: {exc}"
    mats = dict(panel.mats)
    materials = data.get("material") if isinstance(data.get("material"), dict) else {}
    for region in mats:
        entry = materials.get(region) or materials.get("*")
        if isinstance(entry, dict):
            try:
                mats[region] = material_actions.material_form(entry, read_table)
            except (InputError, ValueError, TypeError) as exc:
                state.hs_mesh_error = f"material.{region}.source: {exc}"
    setup_actions.set_forms(panel, bcs=bcs, mats=mats, case=data)
