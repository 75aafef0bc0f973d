"""Handlers of the results: the player, colour range, clip plane, curves and comparison.

Playback is one server-side async loop; each frame only overwrites the
scalars of the surface built when the run was shown.
"""

from __future__ import annotations

import asyncio

import numpy as np
from heatsoak.plugin.results import plots
from heatsoak.plugin.scene import DIFFERENCE_CMAP, DIFFERENCE_LABEL, TEMPERATURE_CMAP, UNIT_LABEL

SPEEDS = (1, 2, 5, 10, 20)
AXES = {"x": (1.0, 0.0, 0.0), "y": (0.0, 1.0, 0.0), "z": (0.0, 0.0, 1.0)}


def register(panel) -> None:
    """Defaults and handlers of the results area."""
    state, ctrl = panel.state, panel.ctrl
    register_player(panel)
    state.update({
        "hs_runs": [], "hs_shown_run": None, "hs_diff_run": None, "hs_compare": [], "hs_frame": 0,
        "hs_n_frames": 0, "hs_playing": False, "hs_loop": True, "hs_speed": 5, "hs_speeds": list(SPEEDS),
        "hs_range_mode": "fixed", "hs_range": [0.0, 1.0], "hs_clip": False, "hs_clip_axis": "x",
        "hs_clip_pos": 50, "hs_frame_time": "", "hs_probe_svg": "", "hs_region_svg": "", "hs_view": "setup",
        "hs_probe_table": [],
    })

    @state.change("hs_shown_run", "hs_diff_run", "hs_clip", "hs_clip_axis", "hs_clip_pos")
    def on_field_choice(**_):
        """Build the shown surface again (new run, difference, clip) and draw the current frame."""
        build_field(panel)

    @state.change("hs_frame")
    def on_frame(hs_frame, **_):
        draw_frame(panel, int(hs_frame or 0))

    @state.change("hs_range_mode")
    def on_range_mode(**_):
        apply_range(panel)
        panel.update_view()

    @state.change("hs_compare")
    def on_compare(**_):
        refresh_curves(panel)

    @state.change("hs_view")
    def on_view_mode(hs_view, **_):
        """Switch the 3D view between the set-up look (groups) and the results."""
        if hs_view == "setup":
            state.hs_playing = False
            panel.scene.show_groups()
            panel.update_view()
        else:
            build_field(panel)

    @ctrl.set("hs_discard")
    def discard(run_id):
        panel.runs.discard(run_id)
        runs_changed(panel)


def register_player(panel) -> None:
    """Play, pause and step."""
    state, ctrl = panel.state, panel.ctrl

    @panel.server.trigger("hs_play")
    @ctrl.set("hs_play")
    def play():
        if state.hs_n_frames < 2 or state.hs_playing:
            return
        if state.hs_frame >= state.hs_n_frames - 1:
            state.hs_frame = 0
        state.hs_playing = True
        asyncio.ensure_future(play_loop(panel))

    @panel.server.trigger("hs_pause")
    @ctrl.set("hs_pause")
    def pause():
        state.hs_playing = False

    @ctrl.set("hs_step")
    def step(delta):
        """One frame forward (+1) or back (-1)."""
        state.hs_playing = False
        state.hs_frame = int(min(max(state.hs_frame + int(delta), 0), max(state.hs_n_frames - 1, 0)))


def runs_changed(panel, show=None) -> None:
    """Refresh the run list; show run ``show`` (or keep the one shown if it still exists)."""
    state = panel.state
    refresh_rows(panel)
    ids = [r["id"] for r in state.hs_runs]
    state.hs_compare = [i for i in state.hs_compare if i in ids]
    if show is not None:
        state.hs_compare = sorted(set(state.hs_compare) | {show})
    if state.hs_diff_run not in ids:
        state.hs_diff_run = None
    target = show if show is not None else (state.hs_shown_run if state.hs_shown_run in ids else None)
    if target is None and ids:
        target = ids[-1]
    state.hs_shown_run = target
    if target is not None:
        state.hs_view = "results"
    else:
        state.hs_view = "setup"
    build_field(panel)
    refresh_curves(panel)


def refresh_rows(panel) -> None:
    """The run list, each row saying whether the run is on the mesh now open."""
    panel.state.hs_runs = [row | {"here": panel.runs.get(row["id"]).mesh is panel.mesh}
                           for row in panel.runs.rows()]


def build_field(panel) -> None:
    """Extract the shown surface (or clipped body) once and draw the current frame."""
    state, run = panel.state, panel.runs.get(panel.state.hs_shown_run)
    if run is None or run.series is None or len(run.series) == 0 or state.hs_view != "results":
        state.hs_n_frames = 0
        return
    if run.mesh is not panel.mesh:
        state.hs_n_frames = 0
        state.hs_frame_time = f"Run {run.id} was on another mesh (or unit): open that mesh to see it in 3D"
        return
    clip = None
    if state.hs_clip:
        lo, hi = np.array(panel.mesh.points.min(axis=0)), np.array(panel.mesh.points.max(axis=0))
        origin = lo + (hi - lo) * float(state.hs_clip_pos) / 100.0
        clip = (AXES[state.hs_clip_axis], tuple(origin))
    diff = panel.runs.get(state.hs_diff_run) if state.hs_diff_run != run.id else None
    diff = diff if diff is not None and diff.mesh is run.mesh else None
    title = DIFFERENCE_LABEL if diff else UNIT_LABEL
    panel.scene.show_field(clip=clip, cmap=DIFFERENCE_CMAP if diff else TEMPERATURE_CMAP, title=title)
    state.hs_n_frames = len(run.series)
    state.hs_frame = min(int(state.hs_frame or 0), state.hs_n_frames - 1)
    state.hs_fixed_range = whole_run_range(run, diff)
    draw_frame(panel, state.hs_frame)


def whole_run_range(run, diff) -> list:
    """Colour range over the whole run: from summary.json, or every frame for a difference."""
    if diff is None:
        t = run.summary.get("temperature", {})
        if t.get("min") and t.get("max"):
            return [float(t["min"]["value"]), float(t["max"]["value"])]
        return list(run.series.range())
    bound = max(run.series.difference_bound(diff.series), 1e-9)
    return [-bound, bound]


def frame_values(run, diff, k: int) -> np.ndarray:
    """Nodal values of frame ``k``: the temperature, or its difference to run ``diff`` at the nearest time."""
    return run.series.frame(k) if diff is None else run.series.difference(diff.series, k)


def draw_frame(panel, k: int) -> None:
    """Overwrite the shown scalars with frame ``k`` and push the picture."""
    state, run = panel.state, panel.runs.get(panel.state.hs_shown_run)
    if run is None or run.series is None or not 0 <= k < len(run.series) or state.hs_view != "results" \
            or run.mesh is not panel.mesh:
        return
    diff = panel.runs.get(state.hs_diff_run) if state.hs_diff_run != run.id else None
    diff = diff if diff is not None and diff.mesh is run.mesh else None
    values = frame_values(run, diff, k)
    panel.scene.set_values(values)
    panel._frame_range = [float(values.min()), float(values.max())]
    t = float(run.series.times[k])
    label = f"t = {t:g} s  (frame {k + 1} of {len(run.series)})"
    state.hs_frame_time = label
    panel.scene.set_time_text(f"Run {run.id}" + (f" minus run {diff.id}" if diff else "") + f"   t = {t:g} s")
    apply_range(panel)
    panel.update_view()


def apply_range(panel) -> None:
    """Fixed range over the whole run, or the current frame's own range."""
    state = panel.state
    rng = state.hs_fixed_range if state.hs_range_mode == "fixed" else getattr(panel, "_frame_range", None)
    if rng:
        state.hs_range = [round(float(rng[0]), 3), round(float(rng[1]), 3)]
        panel.scene.set_range(*rng)


async def play_loop(panel) -> None:
    """Advance frames while playing, at the chosen speed (frames per second)."""
    state = panel.state
    while state.hs_playing:
        await asyncio.sleep(1.0 / max(float(state.hs_speed or 5), 0.5))
        with state:
            if not state.hs_playing:
                break
            nxt = state.hs_frame + 1
            if nxt >= state.hs_n_frames:
                if not state.hs_loop:
                    state.hs_playing = False
                    break
                nxt = 0
            state.hs_frame = nxt


def refresh_curves(panel) -> None:
    """Probe and region curves of the runs chosen for comparison, thresholds and crossing times."""
    state = panel.state
    runs = [r for r in (panel.runs.get(i) for i in state.hs_compare) if r is not None]
    if not runs:
        state.hs_probe_svg = plots.empty_svg("Run the case to see probe curves here")
        state.hs_region_svg = ""
        state.hs_probe_table = []
        return
    many = len(runs) > 1
    series, thresholds, marks, table = [], {}, [], []
    for n, run in enumerate(runs):
        for name, values in run.probes.items():
            label = f"{name} (run {run.id})" if many else name
            series.append((label, run.times, values, "-" if n == 0 else "--"))
            info = run.summary.get("probes", {}).get(name, {})
            if info.get("threshold") is not None:
                thresholds[name] = info["threshold"]
                if info.get("crossing_time") is not None:
                    marks.append((f"{info['crossing_time']:.4g} s", info["crossing_time"], info["threshold"]))
            table.append({"run": run.id, "probe": name, "last": float(values[-1]) if len(values) else None,
                          "max": float(values.max()) if len(values) else None,
                          "threshold": info.get("threshold"), "crossing": info.get("crossing_time")})
    state.hs_probe_table = table
    state.hs_probe_svg = (plots.curves_svg(series, thresholds=[(f"{k} limit {v:g}", v) for k, v in thresholds.items()],
                                           marks=marks) if series else plots.empty_svg("No probes in this run"))
    region_series = []
    for n, run in enumerate(runs):
        for name, r in run.regions.items():
            label = f"{name} (run {run.id})" if many else name
            region_series.append((f"{label} mean", r["time"], r["mean"], "-" if n == 0 else "--"))
            region_series.append((f"{label} min/max", r["time"], r["min"], {"linestyle": ":", "linewidth": 1.0}))
            region_series.append(("_", r["time"], r["max"], {"linestyle": ":", "linewidth": 1.0}))
    state.hs_region_svg = plots.curves_svg(_pair_colours(region_series))


def _pair_colours(series) -> list:
    """Give a region's mean, min and max curves one colour."""
    out = []
    for i, (label, t, v, style) in enumerate(series):
        colour = plots.CURVES[(i // 3) % len(plots.CURVES)]
        opts = (style if isinstance(style, dict) else {"linestyle": style}) | {"color": colour}
        out.append((label, t, v, opts))
    return out
