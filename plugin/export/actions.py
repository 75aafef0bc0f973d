"""Handlers of export: case file and bundle, results, probes CSV, picture, animation.

The case file, the bundle and the probes CSV are small: each trigger returns
the file and the browser saves it with ``utils.download``. The results zip, the
picture and the animation are jobs in a worker process (the UI's process
renders and zips nothing); when one is done the browser is told
(``hs_download_ready``) and fetches the file once: a picture or an animation
through ``hs_take_download``, a zip (it may be hundreds of MB) from a one-time
HTTP address (:mod:`heatsoak.plugin.export.handout`).
"""

from __future__ import annotations

import io
import zipfile
from pathlib import Path

from heatsoak.core.case.casefile import case_to_toml
from heatsoak.core.case.paths import CasePaths
from heatsoak.core.errors import InputError
from heatsoak.plugin.export import handout
from heatsoak.plugin.export.movie import MovieSpec, encode_movie, movie_in_worker
from heatsoak.plugin.export.packing import PART_SUFFIX, pack_folder
from heatsoak.plugin.jobs import actions as jobs
from heatsoak.plugin.load import guard
from heatsoak.plugin.scene import DIFFERENCE_CMAP, DIFFERENCE_LABEL, TEMPERATURE_CMAP, UNIT_LABEL
from heatsoak.plugin.setup import actions as setup_actions

__all__ = ["encode_movie", "register"]

MIME = {"toml": "text/plain", "zip": "application/zip", "csv": "text/csv", "png": "image/png",
        "gif": "image/gif", "mp4": "video/mp4"}
#: Most frames written to an animation (evenly picked from the run).
MAX_MOVIE_FRAMES = 60
#: Largest probes.csv sent from the UI's process [bytes] (a line per written step: 100 000 steps of 10
#: probes is about 15 MB).
MAX_PROBE_CSV_BYTES = 64_000_000
#: Folder of the work folder where export jobs write their files.
EXPORTS = "exports"
#: Tooltip of the export job's cancel button, per job.
CANCEL_HINT = {"an animation": "cancel (keeps the frames made so far)", "a results zip": "cancel (no zip is kept)",
               "a picture": "cancel"}


def register(panel) -> None:
    """Triggers of the export buttons."""
    server, state = panel.server, panel.state
    state.update({"hs_export_error": "", "hs_movie_format": "gif", "hs_export_job": None})
    panel.export_job, panel.export_what, panel.download = None, "", None
    handout.register(panel)
    for part in (panel.work_dir / EXPORTS).glob(f"*{PART_SUFFIX}"):  # zips a stopped UI left half made
        part.unlink(missing_ok=True)

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
        """Start zipping the shown run's results folder in a worker; the browser saves it when done."""
        run = panel.runs.get(state.hs_shown_run)
        if run is None or export_busy(panel):
            return None
        target = panel.work_dir / EXPORTS / f"results-run-{run.id:03d}.zip"
        start_export(panel, "a results zip", pack_folder, run.out_dir, target, done=zip_done)
        return None

    @server.trigger("hs_export_probes")
    def export_probes():
        run = panel.runs.get(state.hs_shown_run)
        return None if run is None else probe_csv(panel, run.out_dir / "probes.csv")

    @server.trigger("hs_export_png")
    def export_png():
        """Start rendering the view's current frame off-screen in a worker; the browser saves the PNG."""
        run = view_run(panel, "the picture")
        if run is None:
            return None
        start_export(panel, "a picture", movie_in_worker, picture_spec(panel, run), done=movie_done)
        return None

    @server.trigger("hs_export_movie")
    def export_movie(fmt):
        """Start making the animation in a worker; the browser saves it when it is done."""
        run = view_run(panel, "the animation")
        if run is None:
            return None
        start_export(panel, "an animation", movie_in_worker, movie_spec(panel, run, fmt), done=movie_done)
        return None

    @server.trigger("hs_take_download")
    def take_download():
        """The file a finished job made, once."""
        data, panel.download = panel.download, None
        return None if data is None else attach(data)


def view_run(panel, what: str):
    """The run the 3D view shows, when no other export job works; else None, and the export line says why."""
    run = panel.runs.get(panel.state.hs_shown_run)
    if run is None or panel.scene.shown is None:
        panel.state.hs_export_error = f"show a run in the 3D view first: {what} shows what the view shows"
        return None
    return None if export_busy(panel) else run


def export_busy(panel) -> bool:
    """True, and the export line says so, while an export job works (one at a time)."""
    if panel.export_job is None:
        return False
    panel.state.hs_export_error = f"{panel.export_what} is being made: wait for it or cancel it"
    return True


def start_export(panel, what: str, fn, *args, done) -> None:
    """Run ``fn(reporter, *args)`` as the export job; ``done(panel, job)`` when it ends."""
    panel.state.hs_export_error = ""
    panel.export_what = what
    panel.export_job = jobs.start(panel, "export", fn, *args, show=lambda job: show_export(panel, job),
                                  done=lambda job: _ended(panel, job, done))


def _ended(panel, job, done) -> None:
    panel.export_job, panel.state.hs_export_job = None, None
    done(panel, job)


def show_export(panel, job) -> None:
    panel.state.hs_export_job = {"id": job.id, "text": jobs.status_text(job),
                                 "percent": 100.0 * jobs.overall_fraction(job),
                                 "hint": CANCEL_HINT.get(panel.export_what, "cancel")}


def ready(panel, data: bytes, name: str) -> None:
    """Hand ``data`` to the browser as ``name``: it fetches the bytes once through ``hs_take_download``."""
    panel.download = data
    panel.ctrl.hs_download_ready({"name": name, "mime": MIME[name.rsplit(".", 1)[-1]]})


def movie_done(panel, job) -> None:
    """Hand the animation or picture to the browser, or say why there is none."""
    state = panel.state
    frames = (job.result or {}).get("frames", 0)
    fmt = (job.result or {}).get("fmt", "gif")
    what = "picture" if fmt == "png" else "animation"
    if job.error or not frames:
        state.hs_export_error = f"{what} {job.status}: {job.error or 'no frame was rendered'}"
        return
    state.hs_export_error = "" if job.status == "complete" else f"animation cancelled: kept the first {frames} frames"
    ready(panel, job.result["data"], "view.png" if fmt == "png" else f"animation.{fmt}")


def zip_done(panel, job) -> None:
    """Hand the results zip to the browser, or say in one line why there is none."""
    path = (job.result or {}).get("path")
    if job.error or job.status != "complete" or not path:
        why = job.error or "no file kept"
        panel.state.hs_export_error = f"results zip {job.status}: {why}"
        return
    name = Path(path).name
    url = handout.offer(panel, Path(path), name)  # big: over HTTP, not the WebSocket (see handout)
    panel.ctrl.hs_download_ready({"name": name, "mime": MIME["zip"], "url": url})


def probe_csv(panel, path: Path):
    """Text of a run's probes.csv, read in the UI's process: the file is small (a line per written
    step), so it is read here, not in a worker; one above :data:`MAX_PROBE_CSV_BYTES` is refused
    with a message pointing to the result files zip, made in a worker."""
    try:
        size = path.stat().st_size
        if size > MAX_PROBE_CSV_BYTES:
            panel.state.hs_export_error = (f"{path.name} of this run is {size / 1e6:.0f} MB, above the "
                                           f"{MAX_PROBE_CSV_BYTES / 1e6:.0f} MB sent from here: take it from "
                                           "Result files (.zip)")
            return None
        text = path.read_text(encoding="utf-8")
    except OSError as exc:
        panel.state.hs_export_error = f"{path.name} cannot be read: {exc.strerror or exc} ({path})"
        return None
    panel.state.hs_export_error = ""
    return text


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


def movie_spec(panel, run, fmt: str = "gif", picks=None) -> MovieSpec:
    """What the animation (or picture) of the shown run shows: the view's surface, camera and colours;
    ``picks``: the frames, by default up to :data:`MAX_MOVIE_FRAMES` spread over the run."""
    fmt = fmt if fmt in ("mp4", "png") else "gif"
    state, plotter = panel.state, panel.plotter
    diff = panel.runs.get(state.hs_diff_run) if state.hs_diff_run not in (None, run.id) else None
    if picks is None:
        picks = sorted({round(x) for x in _even(len(run.series), MAX_MOVIE_FRAMES)})
    label = f"Run {run.id}" + (f" minus run {diff.id}" if diff else "")
    clim = tuple(state.hs_fixed_range) if state.hs_range_mode == "fixed" and state.hs_fixed_range else None
    return MovieSpec(surface=panel.scene.shown.copy(deep=True), nodes=panel.scene.shown_nodes, out_dir=run.out_dir,
                     picks=picks, diff_dir=None if diff is None else diff.out_dir, clim=clim,
                     cmap=DIFFERENCE_CMAP if diff else TEMPERATURE_CMAP, title=DIFFERENCE_LABEL if diff else UNIT_LABEL,
                     label=label, camera=[tuple(v) for v in plotter.camera_position],
                     window_size=tuple(plotter.window_size), background=plotter.background_color.hex_rgb,
                     fps=max(1, int(state.hs_speed or 5)), fmt=fmt, probes=panel.scene.probes)


def picture_spec(panel, run) -> MovieSpec:
    """The view as it is, as a one-frame job: its surface with the colours it shows now (a frame, a
    difference or a what-if estimate), its colour range and caption."""
    state = panel.state
    last = len(run.series) - 1 if run.series is not None else 0
    frame = min(max(int(state.hs_frame or 0), 0), max(last, 0))
    spec = movie_spec(panel, run, "png", picks=[frame])
    spec.clim = tuple(state.hs_range) if state.hs_range else spec.clim
    caption = getattr(panel.scene, "time_text", None)
    spec.as_shown = caption.GetText(2) if caption is not None else spec.label
    return spec


def _even(n: int, most: int):
    step = max(1.0, (n - 1) / max(most - 1, 1))
    k = 0.0
    while k <= n - 1 + 1e-9:
        yield k
        k += step


