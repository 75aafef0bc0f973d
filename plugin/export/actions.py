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
from heatsoak.plugin.load import guard
from heatsoak.plugin.results import actions as results_actions
from heatsoak.plugin.setup import actions as setup_actions

MIME = {"toml": "text/plain", "zip": "application/zip", "csv": "text/csv", "png": "image/png",
        "gif": "image/gif", "mp4": "video/mp4"}
#: Most frames written to an animation (evenly picked from the run).
MAX_MOVIE_FRAMES = 60


def register(panel) -> None:
    """Triggers of the export buttons."""
    server, state = panel.server, panel.state
    state.update({"hs_export_error": "", "hs_movie_format": "gif"})

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
        run = panel.runs.get(state.hs_shown_run)
        if run is None:
            return None
        return attach(animation_bytes(panel, run, fmt))


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


def animation_bytes(panel, run, fmt: str = "gif") -> bytes:
    """GIF or MP4 bytes of the shown run, rendered off-screen frame by frame."""
    fmt = "mp4" if fmt == "mp4" else "gif"
    state = panel.state
    n = len(run.series)
    picks = sorted({round(x) for x in _even(n, MAX_MOVIE_FRAMES)})
    keep = state.hs_frame
    images = []
    for k in picks:
        results_actions.draw_frame(panel, k)
        panel.plotter.render()
        images.append(panel.plotter.screenshot(return_img=True))
    results_actions.draw_frame(panel, keep)
    return encode_movie(images, max(1, int(state.hs_speed or 5)), fmt)


def encode_movie(images, fps: int, fmt: str = "gif") -> bytes:
    """GIF (looping) or MP4 bytes of RGB frames, each (h, w, 3) uint8."""
    if fmt == "gif":
        return iio.imwrite("<bytes>", images, extension=".gif", duration=1000 // fps, loop=0)
    return _mp4_ffmpeg(images, fps)


def _even(n: int, most: int):
    step = max(1.0, (n - 1) / max(most - 1, 1))
    k = 0.0
    while k <= n - 1 + 1e-9:
        yield k
        k += step


def _mp4_ffmpeg(images, fps: int) -> bytes:
    """MP4 through imageio's ffmpeg plugin (imageio-ffmpeg ships the binary)."""
    import tempfile

    import imageio.v2 as iio2

    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "run.mp4"
        with iio2.get_writer(path, fps=fps, macro_block_size=8) as writer:
            for image in images:
                writer.append_data(image)
        return path.read_bytes()
