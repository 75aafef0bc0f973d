"""Handlers of export: case file and bundle, results, probes CSV, screenshot, animation.

Each is a trigger returning the file's bytes; the browser saves them with
``utils.download``.
"""

from __future__ import annotations

import io
import zipfile
from pathlib import Path

import imageio.v3 as iio
from heatsoak.core.case.casefile import case_to_toml
from heatsoak.core.case.paths import CasePaths
from heatsoak.core.errors import InputError
from heatsoak.plugin.export.movie import MovieSpec, encode_movie, movie_in_worker
from heatsoak.plugin.jobs import actions as jobs
from heatsoak.plugin.load import guard
from heatsoak.plugin.scene import DIFFERENCE_CMAP, DIFFERENCE_LABEL, TEMPERATURE_CMAP, UNIT_LABEL
from heatsoak.plugin.setup import actions as setup_actions

__all__ = ["encode_movie", "register"]

MIME = {"toml": "text/plain", "zip": "application/zip", "csv": "text/csv", "png": "image/png",
        "gif": "image/gif", "mp4": "video/mp4"}
#: Most frames written to an animation (evenly picked from the run).
MAX_MOVIE_FRAMES = 60


def register(panel) -> None:
    """Triggers of the export buttons."""
    server, state = panel.server, panel.state
    state.update({"hs_export_error": "", "hs_movie_format": "gif", "hs_export_job": None})
    panel.export_job, panel.download = None, None

    def attach(data: bytes):
        return server.protocol.addAttachment(data)

    @server.trigger("hs_export_case")
    def export_case():
        """The case as TOML, exactly what ``heatsoak run`` reads with the mesh file beside it."""
        state.hs_export_error = ""
        data, errors = setup_actions.current_case(panel)
        if errors:
            state.hs_export_error = f"the case has unreadable entries: {errors[0]}"
            return None
        guard.mark_kept(panel)
        return bare_case_toml(data, panel.mesh_path)

    @server.trigger("hs_export_bundle")
    def export_bundle():
        """A zip of case.toml and the mesh file: unzip and run anywhere."""
        state.hs_export_error = ""
        data, errors = setup_actions.current_case(panel)
        if errors or panel.mesh_path is None:
            state.hs_export_error = "open a mesh and fix the marked entries first"
            return None
        try:  # checked again now: the file may have been replaced (by a link out of the folder) since it was opened
            mesh_path = CasePaths(panel.case_dir, panel.root).resolve_mesh("mesh.file", panel.mesh_path.name)
        except InputError as exc:
            state.hs_export_error = f"the mesh cannot go into the zip: {exc}"
            return None
        guard.mark_kept(panel)
        return attach(case_bundle(data, mesh_path))

    @server.trigger("hs_export_results")
    def export_results():
        run = panel.runs.get(state.hs_shown_run)
        return None if run is None else attach(zip_folder(run.out_dir))

    @server.trigger("hs_export_probes")
    def export_probes():
        run = panel.runs.get(state.hs_shown_run)
        return None if run is None else (run.out_dir / "probes.csv").read_text(encoding="utf-8")

    @server.trigger("hs_export_png")
    def export_png():
        return attach(screenshot_png(panel))

    @server.trigger("hs_export_movie")
    def export_movie(fmt):
        """Start making the animation in a worker; the browser saves it when it is done."""
        run = panel.runs.get(state.hs_shown_run)
        if run is None or panel.scene.shown is None:
            state.hs_export_error = "show a run in the 3D view first"
            return None
        if panel.export_job is not None:
            state.hs_export_error = "an animation is being made: wait for it or cancel it"
            return None
        state.hs_export_error = ""
        spec = movie_spec(panel, run, fmt)
        panel.export_job = jobs.start(panel, "export", movie_in_worker, spec,
                                      show=lambda job: show_export(panel, job),
                                      done=lambda job: movie_done(panel, job))
        return None

    @server.trigger("hs_take_download")
    def take_download():
        """The file a finished job made, once."""
        data, panel.download = panel.download, None
        return None if data is None else attach(data)


def show_export(panel, job) -> None:
    panel.state.hs_export_job = {"id": job.id, "text": jobs.status_text(job),
                                 "percent": 100.0 * jobs.overall_fraction(job)}


def movie_done(panel, job) -> None:
    """Hand the animation to the browser, or say why there is none."""
    state = panel.state
    panel.export_job, state.hs_export_job = None, None
    frames = (job.result or {}).get("frames", 0)
    if job.error or not frames:
        state.hs_export_error = f"animation {job.status}: {job.error or 'no frame was rendered'}"
        return
    fmt = job.result["fmt"]
    panel.download = job.result["data"]
    state.hs_export_error = "" if job.status == "complete" else f"animation cancelled: kept the first {frames} frames"
    panel.ctrl.hs_download_ready({"name": f"animation.{fmt}", "mime": MIME[fmt]})


def bare_case_toml(data: dict, mesh_path) -> str:
    """The case file on its own: it names its mesh by the file name alone, and its first lines say
    that the mesh file must lie beside it (the browser saves it where the user says, unknown here)."""
    if mesh_path is None:
        return case_to_toml(data)
    name = Path(mesh_path).name
    text = case_to_toml({**data, "mesh": {**data["mesh"], "file": name}})
    return (f"# Needs the mesh file {name} in the same folder as this file (or write its path in [mesh] file).\n"
            "# 'Case and mesh (.zip)' holds both.\n" + text)


def case_bundle(data: dict, mesh_path: Path) -> bytes:
    """Zip bytes of ``case.toml`` (mesh file named plainly) and the mesh file."""
    data = {**data, "mesh": {**data["mesh"], "file": Path(mesh_path).name}}
    buf = io.BytesIO()
    with zipfile.ZipFile(buf, "w", zipfile.ZIP_DEFLATED) as z:
        z.writestr("case.toml", case_to_toml(data))
        z.write(mesh_path, Path(mesh_path).name)
    return buf.getvalue()


def zip_folder(folder: Path) -> bytes:
    """Zip bytes of every file in ``folder``."""
    buf = io.BytesIO()
    with zipfile.ZipFile(buf, "w", zipfile.ZIP_DEFLATED) as z:
        for path in sorted(Path(folder).iterdir()):
            if path.is_file():
                z.write(path, path.name)
    return buf.getvalue()


def screenshot_png(panel) -> bytes:
    """PNG bytes of the 3D view as it is now."""
    panel.plotter.render()
    image = panel.plotter.screenshot(return_img=True)
    return iio.imwrite("<bytes>", image, extension=".png")


def movie_spec(panel, run, fmt: str = "gif") -> MovieSpec:
    """What the animation of the shown run shows: the view's surface, camera and colours."""
    fmt = "mp4" if fmt == "mp4" else "gif"
    state, plotter = panel.state, panel.plotter
    diff = panel.runs.get(state.hs_diff_run) if state.hs_diff_run not in (None, run.id) else None
    picks = sorted({round(x) for x in _even(len(run.series), MAX_MOVIE_FRAMES)})
    label = f"Run {run.id}" + (f" minus run {diff.id}" if diff else "")
    clim = tuple(state.hs_fixed_range) if state.hs_range_mode == "fixed" and state.hs_fixed_range else None
    return MovieSpec(surface=panel.scene.shown.copy(deep=True), nodes=panel.scene.shown_nodes, out_dir=run.out_dir,
                     picks=picks, diff_dir=None if diff is None else diff.out_dir, clim=clim,
                     cmap=DIFFERENCE_CMAP if diff else TEMPERATURE_CMAP, title=DIFFERENCE_LABEL if diff else UNIT_LABEL,
                     label=label, camera=[tuple(v) for v in plotter.camera_position],
                     window_size=tuple(plotter.window_size), background=plotter.background_color.hex_rgb,
                     fps=max(1, int(state.hs_speed or 5)), fmt=fmt)


def _even(n: int, most: int):
    step = max(1.0, (n - 1) / max(most - 1, 1))
    k = 0.0
    while k <= n - 1 + 1e-9:
        yield k
        k += step


