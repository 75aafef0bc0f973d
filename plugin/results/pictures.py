"""Pictures of the shown run's frames, prepared ahead in a worker so playback keeps its pace.

One software-OpenGL render of a million-cell part's view costs 0.05-0.4 s in the
UI's process, which shares its cores with the browser; showing a prepared
JPEG costs a file read. When play is pressed, a worker renders every frame of
the shown run as the view shows it (surface or clipped body, camera, size,
colours, probes) into JPEG files, starting from the current frame. The play
loop shows a frame's picture over the 3D view once it exists and waits for it
while the worker is still ahead of nothing. Anything that changes the picture
(another run or difference, clip, colour range, camera, view size) makes the
set stale: the loop then draws live, and the next play prepares a new set.
"""

from __future__ import annotations

import base64
import os
import shutil
import tempfile
from dataclasses import dataclass
from pathlib import Path

import imageio.v3 as iio
import numpy as np
from heatsoak.plugin.export.movie import frame_images
from heatsoak.plugin.jobs import actions as jobs

#: JPEG quality of a prepared picture (the live view sends quality 80 stills).
PICTURE_QUALITY = 85


@dataclass
class PictureSet:
    """The prepared pictures of one look at one run.

    Attributes
    ----------
    key : tuple
        What the pictures show (:func:`look_key`); a different key means a stale set.
    folder : Path
        Where the worker writes ``<frame>.jpg``.
    job : Job
        The worker job rendering them.
    """

    key: tuple
    folder: Path
    job: object

    def path(self, k: int) -> Path:
        return self.folder / f"{int(k):06d}.jpg"

    def ready(self, k: int) -> bool:
        """True when frame ``k``'s picture is written whole (the worker renames a finished file)."""
        return self.path(k).exists()

    @property
    def failed(self) -> bool:
        return self.job.status == "failed"

    @property
    def preparing(self) -> bool:
        return self.job.status == "running"

    def data_url(self, k: int) -> str:
        """Frame ``k``'s picture as a ``data:`` address for an ``<img>``."""
        return "data:image/jpeg;base64," + base64.b64encode(self.path(k).read_bytes()).decode("ascii")


def pictures_in_worker(report, spec, folder: Path, quality: int = PICTURE_QUALITY) -> dict:
    """Render ``spec.picks`` in order into ``folder/<frame>.jpg`` (worker side).

    Each file is written under a temporary name and renamed when whole, so the
    UI never reads half a picture.

    Returns
    -------
    dict
        ``frames``: how many pictures were written.
    """
    report.phase("rendering", len(spec.picks))
    done = 0
    for k, image in frame_images(report, spec):
        final = Path(folder) / f"{int(k):06d}.jpg"
        part = final.with_suffix(".part")
        iio.imwrite(part, image, extension=".jpg", quality=quality)
        os.replace(part, final)
        done += 1
        report.advance(done, len(spec.picks))
    return {"frames": done}


def look_key(panel, run_id, diff_id) -> tuple:
    """What a picture of the shown run depends on, beyond the frame: run, difference, clip, colour
    range, camera and view size."""
    state, plotter = panel.state, panel.plotter
    camera = tuple(np.round(np.ravel([tuple(v) for v in plotter.camera_position]), 9).tolist())
    clip = (state.hs_clip_axis, state.hs_clip_pos) if state.hs_clip else None
    rng = tuple(state.hs_fixed_range or ()) if state.hs_range_mode == "fixed" else "each frame"
    probes = tuple(panel.scene.probes[1]) if panel.scene.probes else ()
    return (run_id, diff_id, clip, rng, camera, tuple(plotter.window_size), probes)


def current(panel, run_id, diff_id, key=None):
    """The prepared set for the look now shown (``key``, by default :func:`look_key`), or None
    (none started, stale or failed)."""
    pics = getattr(panel, "pictures", None)
    key = look_key(panel, run_id, diff_id) if key is None else key
    if pics is None or pics.failed or pics.key != key:
        return None
    return pics


def prepare(panel, run, diff, first: int = 0):
    """Start preparing the pictures of ``run`` (minus ``diff``) as shown, from frame ``first`` on
    and round to it; keep a set already made for this look."""
    from heatsoak.plugin.export.actions import movie_spec  # export builds the spec of what the view shows

    diff_id = None if diff is None else diff.id
    key = look_key(panel, run.id, diff_id)
    pics = current(panel, run.id, diff_id, key)
    if pics is not None:
        return pics
    drop(panel)
    n = len(run.series)
    order = [(first + i) % n for i in range(n)]
    folder = Path(tempfile.mkdtemp(prefix="pictures-", dir=panel.work_dir))
    spec = movie_spec(panel, run, fmt="png", picks=order)
    job = jobs.start(panel, "export", pictures_in_worker, spec, folder, PICTURE_QUALITY)
    panel.pictures = PictureSet(key, folder, job)
    return panel.pictures


def drop(panel) -> None:
    """Stop and remove the prepared set (another mesh, run or look)."""
    pics = getattr(panel, "pictures", None)
    panel.pictures = None
    if pics is not None:
        pics.job.cancel()
        shutil.rmtree(pics.folder, ignore_errors=True)
