"""Handlers of the results: the player, colour range, clip plane, curves and comparison.

Playback is one server-side async loop; each frame only overwrites the
scalars of the surface built when the run was shown.
"""

from __future__ import annotations

import asyncio
import time

import numpy as np
from heatsoak.plugin.jobs.soon import soon
from heatsoak.plugin.results import curves, pictures
from heatsoak.plugin.runs.here import is_here
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
        "hs_clip_pos": 50, "hs_frame_time": "", "hs_view": "setup", "hs_runs_here": 0, "hs_picture": "",
    })
    panel.pictures = None
    curves.register(panel)

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
        run, diff = shown_runs(panel)
        if run is not None:
            pictures.prepare(panel, run, diff, first=int(state.hs_frame))
        state.hs_playing = True
        asyncio.ensure_future(play_loop(panel))

    @state.change("hs_playing")
    def on_playing(hs_playing, **_):
        """Paused: the live view takes over from the prepared pictures at the frame reached."""
        if not hs_playing and state.hs_picture:
            draw_frame(panel, int(state.hs_frame or 0))

    @panel.server.trigger("hs_pause")
    @ctrl.set("hs_pause")
    def pause():
        state.hs_playing = False

    @ctrl.set("hs_step")
    def step(delta):
        """One frame forward (+1) or back (-1)."""
        state.hs_playing = False
        if delta in (1, -1):  # nothing else is a step
            state.hs_frame = int(min(max(state.hs_frame + delta, 0), max(state.hs_n_frames - 1, 0)))


def default_ticks(panel, run) -> list:
    """The runs ticked for overlay by default: ``run`` and the run its label compares it with."""
    if run is None:
        return []
    base = panel.runs.get(run.base_id)
    return [run.id] + ([base.id] if base is not None else [])


def runs_changed(panel, show=None) -> None:
    """Refresh the run list; show run ``show`` (a new run: it and the one it is compared with are
    ticked, no other), or keep the one shown if it still exists on this mesh."""
    state = panel.state
    refresh_rows(panel)
    here = [r["id"] for r in state.hs_runs if r["here"]]
    if show is not None:
        state.hs_compare = default_ticks(panel, panel.runs.get(show))
    else:
        state.hs_compare = [i for i in state.hs_compare if i in here]
    if state.hs_diff_run not in here:
        state.hs_diff_run = None
    target = show if show is not None else (state.hs_shown_run if state.hs_shown_run in here else None)
    if target is None and here:
        target = here[-1]
    state.hs_shown_run = target
    state.hs_view = "results" if target is not None else "setup"
    build_field(panel)
    curves.refresh_curves(panel)


def mesh_opened(panel) -> None:
    """Another mesh (or the same file again) is open: nothing of the previous one stays on screen.
    Runs on this mesh (by content) stay viewable; the newest and its comparison are ticked."""
    state = panel.state
    pictures.drop(panel)
    state.update({"hs_playing": False, "hs_view": "setup", "hs_frame": 0, "hs_n_frames": 0, "hs_frame_time": "", "hs_picture": "",
                  "hs_diff_run": None, "hs_export_error": ""})
    if not state.hs_running:  # a run still going keeps its progress line; the last one's words go
        state.update({"hs_progress": 0.0, "hs_progress_text": "", "hs_run_error": "", "hs_solver_reason": ""})
    refresh_rows(panel)
    here = [r["id"] for r in state.hs_runs if r["here"]]
    newest = panel.runs.get(here[-1]) if here else None
    state.hs_shown_run = None if newest is None else newest.id
    state.hs_compare = default_ticks(panel, newest)
    curves.refresh_curves(panel)


def refresh_rows(panel) -> None:
    """The run list, each row saying whether the run is on the mesh now open."""
    rows = [row | {"here": is_here(panel, panel.runs.get(row["id"]))} for row in panel.runs.rows()]
    panel.state.hs_runs = rows
    panel.state.hs_runs_here = sum(r["here"] for r in rows)


def build_field(panel) -> None:
    """Extract the shown surface (or clipped body) once and draw the current frame."""
    state, run = panel.state, panel.runs.get(panel.state.hs_shown_run)
    if run is None or run.series is None or len(run.series) == 0 or state.hs_view != "results":
        state.hs_n_frames = 0
        return
    if not is_here(panel, run):
        state.hs_n_frames = 0
        state.hs_frame_time = f"Run {run.id} was on another mesh (or unit): open that mesh to see it in 3D"
        return
    clip = None
    if state.hs_clip:
        lo, hi = np.array(panel.mesh.points.min(axis=0)), np.array(panel.mesh.points.max(axis=0))
        origin = lo + (hi - lo) * float(state.hs_clip_pos) / 100.0
        clip = (AXES[state.hs_clip_axis], tuple(origin))
    _, diff = shown_runs(panel)
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


def shown_runs(panel) -> tuple:
    """The run shown in 3D and the run subtracted from it (None when plain), both on this mesh."""
    state, run = panel.state, panel.runs.get(panel.state.hs_shown_run)
    if run is None or not is_here(panel, run):
        return None, None
    diff = panel.runs.get(state.hs_diff_run) if state.hs_diff_run != run.id else None
    return run, (diff if is_here(panel, diff) else None)


def draw_frame(panel, k: int) -> None:
    """Overwrite the shown scalars with frame ``k`` and push the picture: the prepared one while
    playing when it is ready, else a render of the view."""
    state = panel.state
    run, diff = shown_runs(panel)
    if run is None or run.series is None or not 0 <= k < len(run.series) or state.hs_view != "results":
        return
    values = frame_values(run, diff, k)
    panel.scene.set_values(values)
    panel._frame_range = [float(values.min()), float(values.max())]
    t = float(run.series.times[k])
    label = f"t = {t:g} s  (frame {k + 1} of {len(run.series)})"
    state.hs_frame_time = label
    panel.scene.set_time_text(f"Run {run.id}" + (f" minus run {diff.id}" if diff else "") + f"   t = {t:g} s")
    apply_range(panel)
    pics = pictures.current(panel, run.id, None if diff is None else diff.id) if state.hs_playing else None
    if pics is not None and pics.ready(k):
        state.hs_picture = pics.data_url(k)  # no render: the live view is drawn again on pause
        return
    if state.hs_picture and not state.hs_playing:
        soon(panel, hand_over)
        return
    state.hs_picture = ""
    soon(panel, type(panel).update_view)  # the frame's time answers first; the picture follows, and
    # frames that come faster than the view draws update the values it draws next (never queued)


#: Seconds a prepared picture stays over the view after the live view was drawn on pause: the view's
#: image stream sends a picture still being encoded again half a second later (trame-vtk's image
#: delivery), and until then the browser would show an older frame.
HAND_OVER_S = 0.7


def hand_over(panel) -> None:
    """Paused on a prepared picture: the live view is drawn first, then the picture over it goes."""
    panel.update_view()

    def uncover():
        with panel.state:
            if not panel.state.hs_playing:
                panel.state.hs_picture = ""

    try:
        asyncio.get_running_loop().call_later(HAND_OVER_S, uncover)
    except RuntimeError:  # no event loop (scripts, tests): at once
        uncover()


def apply_range(panel) -> None:
    """Fixed range over the whole run, or the current frame's own range."""
    state = panel.state
    rng = state.hs_fixed_range if state.hs_range_mode == "fixed" else getattr(panel, "_frame_range", None)
    if rng:
        state.hs_range = [round(float(rng[0]), 3), round(float(rng[1]), 3)]
        panel.scene.set_range(*rng)


async def play_loop(panel) -> None:
    """Advance frames while playing: at the chosen speed (frames per second), or as fast as the
    view draws when a frame takes longer than its share of a second.

    Each frame is due one period after the last; the wait is what is left of the period after
    drawing (not a whole period on top of it), and a late frame is drawn at once without
    queueing the missed ones, so requests never pile up behind a slow view.
    """
    state = panel.state
    due = time.perf_counter()
    while state.hs_playing:
        due = max(due + 1.0 / max(float(state.hs_speed or 5), 0.5), time.perf_counter())
        await asyncio.sleep(due - time.perf_counter())
        with state:
            if not state.hs_playing:
                break
            nxt = state.hs_frame + 1
            if nxt >= state.hs_n_frames:
                if not state.hs_loop:
                    state.hs_playing = False
                    break
                nxt = 0
            if waiting_for_picture(panel, nxt):
                continue
            state.hs_frame = nxt


def waiting_for_picture(panel, k: int) -> bool:
    """True (and the player says so) while frame ``k``'s picture is still being prepared."""
    run, diff = shown_runs(panel)
    pics = None if run is None else pictures.current(panel, run.id, None if diff is None else diff.id)
    if pics is None or not pics.preparing or pics.ready(k):
        return False
    panel.state.hs_frame_time = f"preparing pictures: {pics.job.done} of {len(run.series)}"
    return True
