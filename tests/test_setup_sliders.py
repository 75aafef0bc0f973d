"""Ranges of the condition editor's sliders (plain numbers, no browser)."""

from __future__ import annotations

import pytest
from heatsoak.plugin.setup.sliders import nice_step, slider_ranges, table_rows, value_range


@pytest.mark.parametrize(("width", "step"), [(200.0, 1.0), (330.0, 1.0), (600.0, 2.0), (3600.0, 10.0), (1.5, 0.005)])
def test_a_step_is_one_two_or_five_times_a_power_of_ten_giving_at_least_200_steps(width, step):
    assert nice_step(width) == pytest.approx(step)
    assert width / nice_step(width) >= 200


def test_a_temperature_range_reaches_50_k_below_and_100_k_above_the_values_and_the_initial_temperature():
    lo, hi, step = value_range("temperature", [22, 180, "oops"], initial=20.0)
    assert lo <= 20.0 - 50 < lo + step and hi - step < 180.0 + 100 <= hi
    assert value_range("convection", [-40.0], initial=20.0)[:2] == [-90.0, 120.0]


def test_a_heat_flux_range_spans_twice_the_largest_magnitude_either_side_or_a_default_for_zero():
    assert value_range("heat_flux", [500.0, -100.0], initial=20.0)[:2] == [-1100.0, 1500.0]
    assert value_range("heat_flux", [0.0], initial=20.0)[:2] == [-1000.0, 1000.0]


def test_times_run_from_zero_and_durations_from_one_step_to_the_end_of_the_run():
    form = {"value": 20.0, "start": 20.0, "end": 100.0, "at": 0.0, "over": 300.0}
    ranges = slider_ranges("temperature", form, 20.0, 3600.0)
    assert ranges["at"] == [0.0, 3600.0, 10.0] and ranges["over"] == [10.0, 3600.0, 10.0]
    assert ranges["start"] == ranges["end"] == ranges["value"]
    assert slider_ranges("temperature", form, 20.0, "not a number")["at"][1] == 600.0


def test_table_values_get_their_own_range_and_an_unreadable_table_none_of_its_rows():
    form = {"value": 20.0, "start": 20.0, "end": 100.0, "at": 0.0, "over": 300.0,
            "table": "time, value\n0, 22\n600, 300"}
    assert slider_ranges("temperature", form, 20.0, 600.0)["table"][:2] == [-30.0, 400.0]
    assert table_rows("0, 22\n600, x") == []
    assert table_rows("time, value\n0, 22\n600, 300") == [[0.0, 22.0], [600.0, 300.0]]
