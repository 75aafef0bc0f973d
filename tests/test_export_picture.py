"""The picture export is the animation job with one frame: it renders off-screen (here in the test's
process, as the worker would) and gives a PNG of what the view shows, even when that is not a frame
of the run's files (a what-if estimate)."""

from __future__ import annotations

import io

import imageio.v3 as iio
import numpy as np
import pytest
from heatsoak.core.mesh.generate import box_mesh
from heatsoak.core.results.writer import XdmfSeries
from heatsoak.plugin.export.movie import MovieSpec, movie_in_worker
from heatsoak.plugin.scene import TEMPERATURE_CMAP, UNIT_LABEL, boundary_polydata


class Quiet:
    def phase(self, name, total=0):
        pass

    def advance(self, done, total=0, detail="", eta_s=None, force=False):
        pass

    def stopped(self) -> bool:
        return False


@pytest.fixture
def spec(tmp_path) -> MovieSpec:
    """A box whose only written frame is 20 degC everywhere, coloured over 0-1 degC as a view would show
    a field rising from 0 to 1 degC along x."""
    mesh = box_mesh((3, 3, 3))
    series = XdmfSeries(tmp_path / "temperature.xdmf", mesh)
    series.write(0.0, np.full(mesh.n_nodes, 20.0))
    series.close()
    surface, nodes = boundary_polydata(mesh)
    surface.point_data["T"] = surface.points[:, 0] / surface.points[:, 0].max()
    return MovieSpec(surface=surface, nodes=nodes, out_dir=tmp_path, picks=[0], diff_dir=None, clim=(0.0, 1.0),
                     cmap=TEMPERATURE_CMAP, title=UNIT_LABEL, label="Run 1", camera=[(2, -3, 2), (0.5, 0.5, 0.5), (0, 0, 1)],
                     window_size=(320, 240), background="#ffffff", fps=5, fmt="png")


def colours(result: dict) -> int:
    """Distinct colours in the PNG of a job's result."""
    image = iio.imread(io.BytesIO(result["data"]))[..., :3].reshape(-1, 3)
    return len(np.unique(image, axis=0))


def test_the_picture_is_one_png_frame_of_the_view_size(spec):
    result = movie_in_worker(Quiet(), spec)
    assert result["frames"] == 1 and result["fmt"] == "png"
    assert iio.imread(io.BytesIO(result["data"])).shape[:2] == (240, 320)


def test_the_picture_shows_the_views_colours_not_the_frame_in_the_files(spec):
    from_files = movie_in_worker(Quiet(), spec)  # 20 degC on a 0-1 range: one saturated colour
    spec.as_shown = "Estimate (reduced model)   t = 0 s"
    as_shown = movie_in_worker(Quiet(), spec)  # the gradient the view shows
    assert colours(as_shown) > 2 * colours(from_files)
