"""Handlers of the set-up steps: surface conditions, materials, time, probes, checks.

Editors are bound to flat state keys for the selected group or region; the
forms of every group and region live on the panel (``panel.bcs``,
``panel.mats``) and become a case dict for :func:`heatsoak.core.case.casefile.check_case_data`.
"""

from __future__ import annotations

import asyncio
import re

import numpy as np
from heatsoak.core.case.casefile import check_case_data
from heatsoak.core.errors import InputError
from heatsoak.core.mesh.read import UNITS
from heatsoak.core.problem.materials import SOURCE_NOTE
from heatsoak.core.problem.schedule import parse_schedule
from heatsoak.core.solve.stepping.adaptive import ADAPTIVE_STEPS
from heatsoak.core.solve.stepping.theta import THETA_PRESETS
from heatsoak.plugin.jobs.soon import soon
from heatsoak.plugin.load import listing
from heatsoak.plugin.results import plots
from heatsoak.plugin.scene import group_colour
from heatsoak.plugin.setup import materials as material_actions
from heatsoak.plugin.setup import sliders
from heatsoak.plugin.setup.forms import (
    KIND_UNITS,
    KINDS,
    FormError,
    case_from_forms,
    default_bc,
    issues_by_field,
    probe_entry,
    schedule_value,
)
from heatsoak.plugin.setup.materials import material_form
from heatsoak.plugin.setup.probe_notes import placeable, probe_notes

BC_FIELDS = ("kind", "shape", "value", "start", "end", "at", "over", "table", "h")
TIME_KEYS = ("hs_t_end", "hs_t_step", "hs_t_theta", "hs_t_mass", "hs_initial", "hs_every")
#: Keys of a case file's [time] the forms do not edit but keep.
KEPT_TIME_KEYS = ("solver", "start_steps", "tolerance")


#: Seconds a click's handler waits for its answer to be written to the browser.
ANSWER_OUT_S = 0.01


def register(panel) -> None:
    """Defaults and handlers of the set-up steps."""
    state = panel.state
    panel.bcs, panel.mats = {}, {}
    state.update({
        "hs_groups": [], "hs_group": None, "hs_editor_group": None, "hs_regions": [], "hs_region": None,
        "hs_pick_mode": "group",
        "hs_kinds": [{"value": v, "title": t} for v, t, _ in KINDS], "hs_bc_unit": "",
        "hs_library_note": SOURCE_NOTE, "hs_preview": "", "hs_err": {}, "hs_run_reason": "Open a mesh first",
        "hs_t_end": 600.0, "hs_t_step": 10.0, "hs_t_theta": 1.0, "hs_t_mass": "consistent", "hs_initial": 20.0,
        "hs_every": 1, "hs_theta_hint": "", "hs_probes": [], "hs_p_name": "P1", "hs_p_x": 0.0, "hs_p_y": 0.0,
        "hs_p_z": 0.0, "hs_p_threshold": None, "hs_probe_error": "", "hs_probe_notes": {}, "hs_case_name": "",
    })
    state.update({f"hs_e_{k}": v for k, v in default_bc().items()})
    register_conditions(panel)
    material_actions.register(panel, validate)
    register_time(panel)
    register_probes(panel)
    sliders.register(panel)


def register_conditions(panel) -> None:
    """Group selection and the condition editor."""
    state = panel.state

    @state.change("hs_group")
    def on_group(hs_group, **_):
        """Show the selected group's condition in the editor and highlight it in 3D."""
        if panel.mesh is None:
            return
        form = panel.bcs.get(hs_group)
        if form is not None:
            state.update({f"hs_e_{k}": form[k] for k in BC_FIELDS})
        state.hs_editor_group = hs_group if form is not None else None
        panel.scene.highlight_group(panel.mesh.group_names.index(hs_group) if form is not None else None)
        soon(panel, type(panel).update_view)  # the editor answers the click first; the 3D picture and
        soon(panel, refresh_preview)          # the schedule plot follow as soon as they are drawn

    @state.change(*(f"hs_e_{k}" for k in BC_FIELDS))
    def on_bc_edit(**_):
        """Keep the edited condition of the selected group and check the case."""
        group = state.hs_editor_group
        if group in panel.bcs and group == state.hs_group:
            panel.bcs[group] = {k: state[f"hs_e_{k}"] for k in BC_FIELDS}
        state.hs_bc_unit = KIND_UNITS.get(state.hs_e_kind, "")
        validate(panel)
        soon(panel, refresh_preview)  # the click shows first, the plot follows

    @state.change("hs_table_upload")
    def on_table_upload(hs_table_upload, **_):
        """Put an uploaded CSV table into the table field (checked like pasted text)."""
        try:
            upload = listing.unwrap_upload(hs_table_upload, limit=1_000_000)
        except InputError as exc:
            state.hs_err = {**state.hs_err, f"boundary.{state.hs_group}.table": [str(exc)]}
            return
        if upload is None:
            return
        state.hs_e_table = upload[1].decode("utf-8-sig", errors="replace")
        state.hs_table_upload = None


def register_time(panel) -> None:
    """Time settings."""
    state = panel.state

    @state.change(*TIME_KEYS)
    def on_time_edit(**_):
        state.hs_theta_hint = theta_hint(state.hs_t_theta)
        validate(panel)
        soon(panel, refresh_preview)


def register_probes(panel) -> None:
    """Probes typed or clicked, and clicks in the 3D view."""
    state, ctrl = panel.state, panel.ctrl

    @ctrl.set("hs_add_probe")
    def add_probe():
        """Add the probe typed in the probe fields."""
        row = {"name": str(state.hs_p_name).strip(), "x": state.hs_p_x, "y": state.hs_p_y, "z": state.hs_p_z,
               "threshold": state.hs_p_threshold if state.hs_p_threshold not in ("", None) else None}
        try:
            probe_entry(row)
        except FormError as exc:  # keep the typed values and say which one is wrong
            state.hs_probe_error = f"{exc.key}: {exc.message}"
            return
        state.hs_probe_error = ""
        state.hs_probes = [p for p in state.hs_probes if p["name"] != row["name"]] + [row]
        state.hs_p_name = next_probe_name(state.hs_probes)
        state.hs_p_threshold = None  # a threshold belongs to the probe it was typed for, not to the next one
        probes_changed(panel)

    @ctrl.set("hs_remove_probe")
    def remove_probe(name):
        state.hs_probes = [p for p in state.hs_probes if p["name"] != name]
        probes_changed(panel)

    @panel.server.trigger("hs_view_pick")
    async def on_view_pick(fx, fy):
        """A click found in the browser at fractions (fx from the left, fy from the bottom) of the view.

        The answer is published before this returns: the messages of the view's own mouse
        handling, read after it, each render the view first (0.1-0.2 s on a million-cell part).
        """
        try:
            width, height = panel.plotter.window_size
            on_view_click({"position": {"x": float(fx) * width, "y": float(fy) * height}})
        except (TypeError, ValueError):
            return
        state.flush()
        await asyncio.sleep(ANSWER_OUT_S)

    @ctrl.set("hs_view_click")
    def on_view_click(event):
        """A click in 3D: select the group under the mouse, or place a probe there."""
        if panel.mesh is None or not event:
            return
        try:  # a click event as a browser sends it; anything else is ignored
            if "worldPosition" in event:  # client-side (vtk.js) views pick in the browser
                point = np.asarray(event["worldPosition"][:3], dtype=float).reshape(3)
                hit = point, panel.scene.nearest_group(point)
            elif "position" in event:
                hit = panel.scene.pick(float(event["position"]["x"]), float(event["position"]["y"]))
            else:
                hit = None
        except (TypeError, ValueError, KeyError, IndexError):
            return
        if hit is None:
            return
        point, group = hit
        if state.hs_pick_mode == "probe":
            size = float(np.ptp(panel.mesh.points, axis=0).max())
            state.hs_p_x, state.hs_p_y, state.hs_p_z = clicked_coordinates(point, UNITS.get(state.hs_unit, 1.0), size)
            add_probe()
        else:
            state.hs_group = panel.mesh.group_names[group]


def clicked_coordinates(point, scale: float, size: float) -> list:
    """A clicked point in the file's unit, rounded to 1e-4 of the model's size (a click is no more
    exact than that): ``[29.98, 0.05, 19.0]`` rather than ``[29.98312764, 0.0497781, 19.00000004]``.

    Parameters
    ----------
    point : (3,) array [m]
    scale : float
        Metres per unit of the file.
    size : float
        Largest extent of the model [m].
    """
    decimals = int(max(0, np.ceil(-np.log10(max(size, 1e-30) * 1e-4 / scale))))
    return [round(float(c) / scale, decimals) + 0.0 for c in point]


def next_probe_name(probes) -> str:
    """The first free name P1, P2, ..."""
    taken = {p["name"] for p in probes}
    return next(f"P{i}" for i in range(1, len(taken) + 2) if f"P{i}" not in taken)


def theta_hint(theta) -> str:
    """What the chosen theta means for the user."""
    try:
        theta = THETA_PRESETS.get(str(theta).strip().lower(), theta)
        theta = float(theta)
    except (TypeError, ValueError):
        return ""
    if theta < 0.5:
        return ("theta below 1/2 is only conditionally stable: the step must stay below a limit set by the "
                "smallest element; the run stops with the limit if the step is too large.")
    if theta < 0.6:
        return "theta = 1/2 (Crank-Nicolson) is second order but can ring after sudden changes."
    return "theta near 1 (backward Euler) is the most robust choice; first order in time."


def mesh_changed(panel, keep_forms: bool = False) -> None:
    """Fresh forms and lists for the mesh just opened (keeping forms of names that remain)."""
    state, mesh = panel.state, panel.mesh
    old_bcs, old_mats = (panel.bcs, panel.mats) if keep_forms else ({}, {})
    panel.bcs = {g: old_bcs.get(g, default_bc()) for g in mesh.group_names}
    panel.mats = {r: old_mats.get(r, material_form(material_actions.DEFAULT_MATERIAL)) for r in mesh.region_names}
    if not keep_forms:
        panel.kept_time, panel.title = {}, ""  # they came with the case opened before
        state.hs_probe_error = ""  # it spoke of a probe typed for the mesh before
        state.hs_probes = []
        state.hs_p_name = "P1"
        state.hs_case_name = ""
    state.hs_regions = list(mesh.region_names)
    state.hs_region = None
    state.hs_region = mesh.region_names[0]
    state.hs_group = None
    state.hs_group = mesh.group_names[0]
    panel.scene.highlight_group(None)
    validate(panel)
    probes_changed(panel)


def set_forms(panel, bcs: dict, mats: dict, case: dict) -> None:
    """Replace all forms (after a case file was read)."""
    state = panel.state
    panel.bcs.update(bcs)
    panel.mats.update(mats)
    time = case.get("time") if isinstance(case.get("time"), dict) else {}
    panel.kept_time = {k: time[k] for k in KEPT_TIME_KEYS if k in time}
    panel.title = case.get("title") if isinstance(case.get("title"), str) else ""
    step = time.get("step", 10.0)
    if "step" not in time and "tolerance" in time and isinstance(time.get("end"), (int, float)):
        step = time["end"] / ADAPTIVE_STEPS  # the largest step of a run given a tolerance alone
    state.update({"hs_t_end": time.get("end", 600.0), "hs_t_step": step,
                  "hs_t_theta": time.get("theta", 1.0), "hs_t_mass": time.get("mass", "consistent"),
                  "hs_initial": (case.get("initial") or {}).get("temperature", 20.0),
                  "hs_every": (case.get("output") or {}).get("every", 1)})
    state.hs_probes, skipped = probe_rows(case.get("probe"))
    if skipped:
        state.hs_mesh_error = f"{skipped[0]}: expected a table with at = [x, y, z]; this probe was left out"
    state.hs_p_name = next_probe_name(state.hs_probes)
    group, region = state.hs_group, state.hs_region
    state.hs_group = state.hs_region = None
    state.hs_group, state.hs_region = group, region
    validate(panel)
    probes_changed(panel)


def probe_rows(probes) -> tuple[list, list]:
    """Probe form rows of a case's ``[[probe]]`` list, and the keys of entries that have no [x, y, z]."""
    rows, skipped = [], []
    for i, p in enumerate(probes if isinstance(probes, list) else []):
        at = p.get("at") if isinstance(p, dict) else None
        if not isinstance(at, list) or len(at) != 3:
            skipped.append(f"probe[{i}]")
            continue
        rows.append({"name": str(p.get("name", "")), "x": at[0], "y": at[1], "z": at[2], "threshold": p.get("threshold")})
    return rows, skipped


def probes_changed(panel) -> None:
    """Mark the probes in 3D and check the case again."""
    state = panel.state
    if panel.mesh is not None:
        scale = UNITS.get(state.hs_unit, 1.0)
        shown = [p for p in state.hs_probes if placeable(p)]  # a case file may hold unreadable ones
        pts = [[float(p[c]) * scale for c in "xyz"] for p in shown]
        panel.scene.show_probes(np.array(pts).reshape(-1, 3), [p["name"] for p in shown])
        panel.update_view()
    state.hs_probe_notes = {} if panel.mesh is None else probe_notes(panel.mesh, state.hs_probes, state.hs_unit)
    validate(panel)


def current_case(panel) -> tuple:
    """The case dict the forms describe, and the form errors found building it."""
    state = panel.state
    mesh = {"file": panel.mesh_path.name if panel.mesh_path else "", "unit": state.hs_unit,
            "feature_angle": float(state.hs_feature_angle)}
    time = {"end": state.hs_t_end, "step": state.hs_t_step, "theta": state.hs_t_theta, "mass": state.hs_t_mass,
            "kept": getattr(panel, "kept_time", {})}
    case, errors = case_from_forms(mesh, panel.bcs, panel.mats, state.hs_initial, time, state.hs_probes,
                                   every=state.hs_every)
    if getattr(panel, "title", ""):
        case = {"title": panel.title, **case}
    return case, errors


def validate(panel) -> list:
    """Check the case: field messages in ``hs_err``, the first problem in ``hs_run_reason``."""
    state = panel.state
    if panel.mesh is None:
        state.hs_err, state.hs_run_reason = {}, "Open a mesh first"
        return ["no mesh"]
    case, form_errors = current_case(panel)
    issues = list(form_errors)
    if not form_errors:
        issues += check_case_data(case, panel.case_dir, mesh=panel.mesh, root=panel.root)
    state.hs_err = issues_by_field(issues)
    state.hs_run_reason = _name_probes(_reason(issues[0]), state.hs_probes) if issues else ""
    state.hs_groups = group_rows(panel, state.hs_err)
    return issues


def _reason(issue) -> str:
    if isinstance(issue, FormError):  # its message lacks the key: name the field
        return f"Fix first: {issue.key} - {issue.message}"
    return f"Fix first: {issue}".replace(f"{issue.key}: ", f"{issue.key} - ", 1)


def _name_probes(text: str, probes: list) -> str:
    """``probe[1]`` in a message followed by the probe's name, as the probe list shows it."""
    def named(match):
        i = int(match.group(1))
        return f"{match.group(0)} ({probes[i]['name']})" if i < len(probes) else match.group(0)
    return re.sub(r"probe\[(\d+)\](\.\w+)?", named, text)


def group_rows(panel, errors: dict) -> list:
    """Rows of the surface-group legend: colour, name, area, condition, problem flag."""
    facts = {g["name"]: g for g in (panel.state.hs_facts or {}).get("surface_groups", [])}
    rows = []
    for i, name in enumerate(panel.mesh.group_names):
        form = panel.bcs[name]
        bad = any(k.startswith(f"boundary.{name}.") or k == f"boundary.{name}" for k in errors)
        rows.append({"name": name, "color": group_colour(i), "area": facts.get(name, {}).get("area", 0.0),
                     "faces": facts.get(name, {}).get("faces", 0), "summary": bc_summary(form), "bad": bad})
    return rows


def bc_summary(form: dict) -> str:
    """A few words for the legend, e.g. ``temperature ramp``."""
    kind = form.get("kind", "insulated")
    if kind == "insulated":
        return "insulated"
    shape = form.get("shape", "constant")
    return kind.replace("_", " ") + ("" if shape == "constant" else f" {shape}")


def refresh_preview(panel) -> None:
    """Plot the selected group's schedule over the run's time window."""
    state = panel.state
    form = panel.bcs.get(state.hs_group)
    if form is None or form["kind"] == "insulated":
        state.hs_preview = ""
        return
    try:
        sched = parse_schedule(schedule_value(form, f"boundary.{state.hs_group}"), f"boundary.{state.hs_group}")
    except (FormError, InputError):
        state.hs_preview = plots.empty_svg("no preview until the entries above are fixed", width=3.9)
        return
    end = _positive(state.hs_t_end, 600.0)
    t_last = max([end, *sched.breakpoints()])
    times = np.union1d(np.linspace(0.0, 1.05 * t_last, 200), sched.breakpoints())
    state.hs_preview = plots.schedule_svg(times, sched(times), KIND_UNITS[form["kind"]], window=end)


def _positive(value, default: float) -> float:
    try:
        v = float(value)
    except (TypeError, ValueError):
        return default
    return v if v > 0 else default
