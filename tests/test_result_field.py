"""Reading back the temperature field a run wrote, frame by frame."""

import meshio
import numpy as np
import pytest
from heatsoak.core.mesh.generate import box_mesh
from heatsoak.core.results.result_field import FieldSeries
from heatsoak.core.results.writer import XdmfSeries


@pytest.fixture()
def written(tmp_path):
    mesh = box_mesh((2, 2, 2))
    x = mesh.points[:, 0]
    series = XdmfSeries(tmp_path / "temperature.xdmf", mesh)
    frames = {0.0: 20.0 + 0 * x, 10.0: 20.0 + 5.0 * x, 25.0: 20.0 + 9.0 * x}
    for t, T in frames.items():
        series.write(t, T)
    series.close()
    return tmp_path, frames


def test_frames_read_back_equal_what_was_written_and_what_meshio_reads(written):
    folder, frames = written
    fs = FieldSeries(folder)
    np.testing.assert_array_equal(fs.times, list(frames))
    with meshio.xdmf.TimeSeriesReader(folder / "temperature.xdmf") as r:
        r.read_points_cells()
        for k, T in enumerate(frames.values()):
            np.testing.assert_array_equal(fs.frame(k), T)
            np.testing.assert_array_equal(fs.frame(k), r.read_data(k)[1]["temperature"])
    assert fs.range() == (20.0, 29.0)
    with pytest.raises(IndexError):
        fs.frame(3)
    fs.close()


def test_difference_uses_the_nearest_frame_of_the_other_run(written, tmp_path):
    folder, frames = written
    mesh = box_mesh((2, 2, 2))
    (tmp_path / "other").mkdir()
    other = XdmfSeries(tmp_path / "other" / "temperature.xdmf", mesh)
    other.write(0.0, np.full(mesh.n_nodes, 20.0))
    other.write(20.0, np.full(mesh.n_nodes, 22.0))
    other.close()
    a, b = FieldSeries(folder), FieldSeries(tmp_path / "other")
    assert a.nearest(12.0) == 1 and a.nearest(30.0) == 2 and b.nearest(25.0) == 1
    np.testing.assert_allclose(a.difference(b, 2), frames[25.0] - 22.0)  # t = 25 s against t = 20 s
    np.testing.assert_allclose(a.difference(b, 0), 0.0)
    assert a.difference_bound(b) == pytest.approx(7.0)  # 29 - 22 at x = 1
