"""Pictures of a run's frames prepared in a worker for playback: they show what the live view
shows at that frame, a cancelled preparation leaves no half picture, and a changed look (camera,
clip, colour range) is never shown from an older set."""

from __future__ import annotations

import os
import shutil

import imageio.v3 as iio
import numpy as np
import pytest

pytest.importorskip("pyvista")
os.environ.setdefault("VTK_DEFAULT_OPENGL_WINDOW", "vtkEGLRenderWindow")

from test_ui_curves import MESHES, run_now  # noqa: E402 - after the rendering setting


class Reporter:
    """What a worker's work function gets, in this thread: stops after ``stop_after`` items."""

    def __init__(self, stop_after=None):
        self.stop_after, self.done = stop_after, 0

    def phase(self, name, total=0):
        pass

    def advance(self, done, total=0, **_):
        self.done = done

    def stopped(self):
        return self.stop_after is not None and self.done >= self.stop_after


@pytest.fixture(scope="module")
def shown(tmp_path_factory):
    """The demo run once and shown in 3D (no browser), the view 480 x 320 pixels."""
    from heatsoak.plugin.app import build_app
    from trame.app import get_server

    tmp = tmp_path_factory.mktemp("pictures")
    folder = tmp / "data"
    folder.mkdir()
    for name in ("platen_warmup.toml", "platen.msh", "platen_base.csv"):
        shutil.copy(MESHES / name, folder / name)
    panel = build_app(get_server("pictures", client_type="vue3"), input_path=folder / "platen_warmup.toml",
                      data_dir=folder, work_dir=tmp / "work")
    run = run_now(panel, tmp / "run")
    panel.plotter.window_size = (480, 320)
    yield panel, run
    panel.jobs.close()


def live_picture(panel, k: int) -> np.ndarray:
    from heatsoak.plugin.results.actions import draw_frame

    draw_frame(panel, k)
    panel.plotter.render()
    return panel.plotter.screenshot(return_img=True).astype(float)


def test_each_prepared_picture_is_the_live_view_of_its_frame(shown, tmp_path):
    from heatsoak.plugin.export.actions import movie_spec
    from heatsoak.plugin.results.pictures import pictures_in_worker

    panel, run = shown
    last = len(run.series) - 1
    spec = movie_spec(panel, run, fmt="png", picks=[last, 0])
    assert pictures_in_worker(Reporter(), spec, tmp_path) == {"frames": 2}
    assert sorted(p.name for p in tmp_path.iterdir()) == ["000000.jpg", f"{last:06d}.jpg"]
    for k in (0, last):
        picture = iio.imread(tmp_path / f"{k:06d}.jpg").astype(float)
        live = live_picture(panel, k)
        assert picture.shape == live.shape == (320, 480, 3)
        other = live_picture(panel, last - k)  # the other frame
        part = np.abs(live - other).sum(axis=2) > 30  # where the two frames' colours differ (the part, the time)
        same, differ = np.abs(picture - live)[part].mean(), np.abs(picture - other)[part].mean()
        assert part.mean() > 0.01 and same < 0.2 * differ, (k, part.mean(), same, differ)  # JPEG loses little


def test_a_cancelled_preparation_keeps_whole_pictures_only(shown, tmp_path):
    from heatsoak.plugin.export.actions import movie_spec
    from heatsoak.plugin.results.pictures import pictures_in_worker

    panel, run = shown
    spec = movie_spec(panel, run, fmt="png", picks=list(range(len(run.series))))
    assert pictures_in_worker(Reporter(stop_after=2), spec, tmp_path) == {"frames": 2}
    assert sorted(p.name for p in tmp_path.iterdir()) == ["000000.jpg", "000001.jpg"]  # no .part file


def test_a_changed_camera_clip_or_colour_range_is_another_look(shown):
    from heatsoak.plugin.results.pictures import look_key

    panel, run = shown
    state = panel.state
    base = look_key(panel, run.id, None)
    assert look_key(panel, run.id, None) == base
    changes = [
        lambda: setattr(panel.plotter.camera, "azimuth", panel.plotter.camera.azimuth + 10),
        lambda: state.update({"hs_clip": True}),
        lambda: state.update({"hs_range_mode": "auto"}),
        lambda: setattr(panel.plotter, "window_size", (500, 320)),
    ]
    seen = {base}
    for change in changes:
        change()
        key = look_key(panel, run.id, None)
        assert key not in seen
        seen.add(key)
    assert look_key(panel, run.id, 1) not in seen  # a difference to another run
