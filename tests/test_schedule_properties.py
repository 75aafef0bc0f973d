"""Property-based checks of schedules and table text: generated inputs, hostile ones included.

The fast (numpy) table reader must agree with the row-by-row reader on every text, a piecewise
linear table never jumps, and the step grid lands on every mark without sliver steps.
"""

from __future__ import annotations

import numpy as np
import pytest
from heatsoak.core.errors import ScheduleError
from heatsoak.core.fem.operators import jump_times, left_value
from heatsoak.core.problem import schedule as sched_module
from heatsoak.core.problem.schedule import Ramp, Table, parse_schedule, table_from_text
from heatsoak.core.solve.stepping.base import MERGE, step_times
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

SETTINGS = settings(max_examples=120, deadline=None, suppress_health_check=[HealthCheck.too_slow])

numbers = st.one_of(st.floats(allow_nan=True, allow_infinity=True, width=64).map(repr),
                    st.integers(-10**6, 10**6).map(str),
                    st.sampled_from(["nan", "inf", "-inf", "1e400", "abc", "", "1_0", "0x10", "1,5", " 2 "]))
separators = st.sampled_from([", ", ",", ";", " ; ", "\t", "  "])
lines = st.one_of(st.tuples(numbers, separators, numbers).map("".join),
                  st.sampled_from(["", "   ", "# comment", "time, value", "t;v", "1, 2, 3", "1 2 # note"]))


def _outcome(fn, text):
    try:
        t = fn(text, "t.csv")
    except ScheduleError as exc:
        return "error", str(exc).split(":")[0]
    return "ok", (t.times.tolist(), t.values.tolist())


@SETTINGS
@given(st.lists(lines, max_size=8).map("\n".join))
def test_the_fast_table_reader_agrees_with_the_row_reader_on_any_text(text):
    assert _outcome(table_from_text, text) == _outcome(sched_module._rows_table, text)


@SETTINGS
@given(st.lists(st.tuples(st.integers(-10**7, 10**7), st.floats(-1e6, 1e6)), min_size=1, max_size=40,
                unique_by=lambda p: p[0]))
def test_a_table_is_continuous_so_it_never_jumps(points):
    points = sorted(points)  # times in ms: a table's times are far apart compared with rounding
    table = Table([p[0] / 1000 for p in points], [p[1] for p in points])
    assert jump_times(table).size == 0
    for a, b in zip(table.times[:-1], table.times[1:]):
        if b > 0 and b - a > 1e-9 * max(1.0, abs(b)):
            assert left_value(table, max(a, 0.0), b) == pytest.approx(table(b), rel=1e-9, abs=1e-6)


@SETTINGS
@given(st.integers(-3000, 3000).map(lambda k: k / 10), st.integers(-3000, 3000).map(lambda k: k / 10),
       st.floats(1e-3, 1e4))
def test_a_ramp_of_zero_length_jumps_at_its_time_exactly_when_its_values_differ(start, end, at):
    # values in tenths of a degree: a jump of 1e-313 is rounding, not a jump
    jumps = jump_times(Ramp(start, end, at=at, over=0.0))
    assert jumps.tolist() == ([at] if start != end else [])
    assert left_value(Ramp(start, end, at=at, over=0.0), 0.0, at) == pytest.approx(start, abs=1e-9 * abs(end))


@SETTINGS
@given(st.floats(1.0, 1e5), st.floats(1e-3, 1.0), st.lists(st.floats(-10.0, 1.1e5), max_size=30))
def test_steps_land_on_every_mark_and_are_never_slivers(end, frac, marks):
    dt = end * frac
    grid = step_times(end, dt, marks)
    assert grid[-1] == end and np.all(np.diff(grid) > 0)
    inside = np.array([m for m in marks if 0 < m < end])
    if inside.size:  # every mark is a step end, or merged with one closer than MERGE * dt
        assert np.abs(inside[:, None] - grid[None, :]).min(axis=1).max() <= MERGE * dt
    assert np.all(np.diff(grid) > MERGE * dt)
    assert np.diff(np.concatenate([[0.0], grid])).max() <= dt * (1 + 1e-9)


ramp_values = st.one_of(st.floats(allow_nan=True, allow_infinity=True), st.integers(), st.text(max_size=3),
                        st.booleans(), st.none(), st.lists(st.integers(), max_size=2))
case_values = st.recursive(
    st.one_of(ramp_values, st.fixed_dictionaries({}, optional={k: ramp_values for k in ("start", "end", "at", "over")})),
    lambda inner: st.one_of(st.lists(inner, max_size=3), st.dictionaries(st.sampled_from(["ramp", "table", "x"]), inner,
                                                                         max_size=2)),
    max_leaves=8)


@SETTINGS
@given(case_values)
def test_any_case_value_is_a_schedule_or_a_schedule_error_naming_the_key(value):
    try:
        s = parse_schedule(value, "boundary.b")
    except ScheduleError as exc:
        assert exc.key.startswith("boundary.b") and str(exc).startswith(exc.key)
        return
    t = np.linspace(-1.0, 1e4, 7)
    assert np.isfinite(s(t)).all() and np.isfinite(s.lowest())
