"""Region statistics, threshold crossings and the run recorder."""

import numpy as np
import pytest
from heatsoak.core.mesh.generate import box_mesh
from heatsoak.core.results.probes import ProbeSet
from heatsoak.core.results.record import Recorder, RegionStats, first_crossing


def _halves(c):
    return (c[:, 0] > 0.5).astype(int), ("left", "right")


@pytest.mark.parametrize("order", [1, 2])
def test_region_mean_is_the_exact_integral_of_the_field(order):
    # Calculus: mean of x^2 over [0, 1/2] is 1/12, over [1/2, 1] is 7/12;
    # the P2 interpolant of x^2 is x^2 itself, the P1 one only for x.
    mesh = box_mesh((4, 2, 2), order=order, regions=_halves)
    x = mesh.points[:, 0]
    rs = RegionStats(mesh)
    np.testing.assert_allclose(rs.volumes, [0.5, 0.5], rtol=1e-12)
    np.testing.assert_allclose(rs.stats(x)[:, 0], [0.25, 0.75], rtol=1e-12)
    if order == 2:
        np.testing.assert_allclose(rs.stats(x**2)[:, 0], [1 / 12, 7 / 12], rtol=1e-12)


def test_region_min_and_max_are_over_the_region_nodes():
    mesh = box_mesh((4, 2, 2), regions=_halves)
    s = RegionStats(mesh).stats(mesh.points[:, 0] * 10.0)
    np.testing.assert_allclose(s[:, 1:], [[0.0, 5.0], [5.0, 10.0]])


def test_first_crossing_interpolates_linearly_within_the_step():
    t = [0.0, 10.0, 20.0, 30.0]
    assert first_crossing(t, [20.0, 60.0, 100.0, 140.0], 90.0) == pytest.approx(17.5)
    assert first_crossing(t, [200.0, 150.0, 100.0, 50.0], 120.0) == pytest.approx(16.0)  # cooling
    assert first_crossing(t, [20.0, 60.0, 100.0, 140.0], 60.0) == pytest.approx(10.0)  # lands on it
    assert first_crossing(t, [20.0, 60.0, 100.0, 140.0], 150.0) is None
    assert first_crossing(t, [90.0, 60.0, 100.0, 140.0], 90.0) == 0.0  # starts on it
    assert first_crossing([], [], 1.0) is None


def test_first_crossing_reports_the_first_of_several_crossings():
    t = [0.0, 1.0, 2.0, 3.0, 4.0]
    assert first_crossing(t, [0.0, 2.0, 0.0, 2.0, 0.0], 1.0) == pytest.approx(0.5)


def test_recorder_keeps_histories_extremes_and_crossings():
    mesh = box_mesh((2, 2, 2), regions=_halves)
    probes = ProbeSet(mesh, [[0.5, 0.5, 0.5], [1.0, 1.0, 1.0]], ["mid", "corner"])
    rec = Recorder(mesh, probes, thresholds=[25.0, None])
    x = mesh.points[:, 0]
    for t in (0.0, 1.0, 2.0):
        rec.record(t, 20.0 + 10.0 * t * x)
    assert rec.probe_history.shape == (3, 2) and rec.region_history.shape == (3, 2, 3)
    np.testing.assert_allclose(rec.probe_history[:, 0], [20.0, 25.0, 30.0])
    assert rec.crossings() == {"mid": pytest.approx(1.0), "corner": None}
    assert rec.maximum.value == pytest.approx(40.0) and rec.maximum.when == 2.0
    assert rec.maximum.where[0] == pytest.approx(1.0)
    assert rec.minimum.value == pytest.approx(20.0) and rec.minimum.when == 0.0
