"""An animation of a run as a job: frames rendered off-screen in a worker process, then encoded.

A picture (PNG) of the view is the same job with one frame.

The UI sends what its view shows (the result surface with its map to the
volume nodes, camera, colours); the worker reads the run's frames from its
results folder, so the UI's process renders nothing.
"""

from __future__ import annotations

import time
from dataclasses import dataclass
from pathlib import Path

import imageio.v3 as iio
import numpy as np
from heatsoak.core.results.result_field import FieldSeries
from heatsoak.plugin.pvtrame import new_plotter
from heatsoak.plugin.scene import add_probes, result_style, time_text_style
from vtk.util import numpy_support


@dataclass
class MovieSpec:
    """What an animation shows.

    Attributes
    ----------
    surface : pyvista.PolyData
        The shown surface (outer surface or clipped body).
    nodes : ndarray of int, shape (surface.n_points,)
        Volume node of each surface point.
    out_dir : Path
        The run's results folder.
    picks : list of int
        Frames to render, in order.
    diff_dir : Path or None
        Results folder of the run subtracted (a difference movie).
    clim : (2,) floats or None
        Fixed colour range [degC or K]; None: each frame's own range.
    camera : list
        pyvista camera position (position, focal point, view up).
    as_shown : str or None
        A picture of the view as it is: the surface's own scalars ``T`` and this text, not frame
        ``picks[0]`` read from the files (the view may show a what-if estimate).
    probes : tuple
        ``(points (n, 3) [m], names, sphere radius [m])`` of the probes marked in the view, or ().
    """

    surface: object
    nodes: np.ndarray
    out_dir: Path
    picks: list
    diff_dir: Path | None
    clim: tuple | None
    cmap: str
    title: str
    label: str
    camera: list
    window_size: tuple
    background: str
    fps: int
    fmt: str
    as_shown: str | None = None
    probes: tuple = ()


def encode_movie(images, fps: int, fmt: str = "gif") -> bytes:
    """GIF (looping) or MP4 bytes of RGB frames, each (h, w, 3) uint8; PNG bytes of the first frame."""
    if fmt == "png":
        return iio.imwrite("<bytes>", images[0], extension=".png")
    if fmt == "gif":
        return iio.imwrite("<bytes>", images, extension=".gif", duration=1000 // fps, loop=0)
    return _mp4_ffmpeg(images, fps)


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


def _plotter(spec: MovieSpec):
    plotter = new_plotter(spec.background)
    plotter.window_size = list(spec.window_size)
    surface = spec.surface.copy()
    if spec.as_shown is None:
        surface.point_data["T"] = np.zeros(surface.n_points)
    actor = plotter.add_mesh(surface, **result_style(spec.cmap, spec.clim or (0.0, 1.0), spec.title))
    text = plotter.add_text("", **time_text_style())
    if spec.probes:
        add_probes(plotter, *spec.probes)
    plotter.camera_position = spec.camera
    return plotter, surface, actor, text


def _set_frame(spec: MovieSpec, series, other, k: int, values) -> str:
    """Write frame ``k`` (or its difference to ``other``) into the surface's ``values``; its caption."""
    nodal = series.frame(k) if other is None else series.difference(other, k)
    values[:] = nodal[spec.nodes]
    return f"{spec.label}   t = {float(series.times[k]):g} s"


def frame_images(report, spec: MovieSpec):
    """Render the picked frames off-screen, one after the other, until done or cancelled.

    Yields
    ------
    (k, image) : frame index and its RGB picture, (h, w, 3) uint8 at ``spec.window_size``.
    """
    series = FieldSeries(spec.out_dir)
    other = None if spec.diff_dir is None else FieldSeries(spec.diff_dir)
    plotter, surface, actor, text = _plotter(spec)
    values = numpy_support.vtk_to_numpy(surface.GetPointData().GetArray("T"))
    try:
        for k in spec.picks:
            if report.stopped():
                return
            text.SetText(2, spec.as_shown or _set_frame(spec, series, other, k, values))
            surface.GetPointData().GetArray("T").Modified()
            if spec.clim is None:
                actor.mapper.scalar_range = (float(values.min()), float(max(values.max(), values.min() + 1e-6)))
            plotter.render()
            yield k, plotter.screenshot(return_img=True)
    finally:
        plotter.close()
        series.close()
        if other is not None:
            other.close()


def movie_in_worker(report, spec: MovieSpec) -> dict:
    """Render the picked frames and encode them; on cancel, the frames rendered so far.

    The time left is measured: rendering time per frame so far, plus the
    encoding time of the first frame alone times the number of frames.

    Returns
    -------
    dict
        ``data`` (bytes of the file), ``frames`` (how many), ``fmt``.
    """
    report.phase("rendering", len(spec.picks))
    images, start, encode_each = [], time.perf_counter(), 0.0
    for _, image in frame_images(report, spec):
        images.append(image)
        if len(images) == 1:
            t0 = time.perf_counter()
            encode_movie(images[:1], spec.fps, spec.fmt)
            encode_each = time.perf_counter() - t0
        render_each = (time.perf_counter() - start - encode_each) / len(images)
        left = render_each * (len(spec.picks) - len(images)) + encode_each * len(spec.picks)
        report.advance(len(images), len(spec.picks), eta_s=left)
    report.phase("encoding")
    report.advance(0, 0, eta_s=encode_each * len(images), force=True)
    data = encode_movie(images, spec.fps, spec.fmt) if images else b""
    return {"data": data, "frames": len(images), "fmt": spec.fmt}
