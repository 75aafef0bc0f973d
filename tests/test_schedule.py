"""Schedules: values, rates, breakpoints, case-file parsing and CSV errors."""

import numpy as np
import pytest
from heatsoak.core.errors import ScheduleError
from heatsoak.core.problem.schedule import Constant, Ramp, Table, parse_schedule, read_table_csv


def test_constant_is_flat_and_keeps_scalar_or_array_shape():
    c = Constant(20)
    assert c(5.0) == 20.0 and isinstance(c(5.0), float)
    np.testing.assert_array_equal(c(np.array([0.0, 1.0])), [20.0, 20.0])
    assert c.rate(3.0) == 0.0
    assert c.breakpoints().size == 0
    assert c.to_toml() == 20.0


def test_ramp_holds_then_rises_linearly_then_holds():
    r = Ramp(20, 180, at=100, over=600)
    np.testing.assert_allclose(r([0, 100, 400, 700, 1e6]), [20, 20, 100, 180, 180])
    assert r.describe() == "ramp 20 -> 180 over 600 s from 100 s"


def test_ramp_rate_is_right_sided_at_the_corners():
    r = Ramp(20, 180, at=100, over=600)
    np.testing.assert_allclose(r.rate([99.9, 100, 699.9, 700]), [0, 160 / 600, 160 / 600, 0])
    np.testing.assert_array_equal(r.breakpoints(), [100, 700])


def test_ramp_with_zero_duration_is_a_right_continuous_step():
    s = Ramp(0, 50, at=10, over=0)
    np.testing.assert_array_equal(s([9.999, 10, 11]), [0, 50, 50])
    assert s.rate(10) == 0.0
    np.testing.assert_array_equal(s.breakpoints(), [10])
    assert s.describe() == "step 0 -> 50 at 10 s"


def test_table_interpolates_and_holds_outside_its_range():
    t = Table([0, 10, 30], [20, 40, 0])
    np.testing.assert_allclose(t([-5, 0, 5, 10, 20, 30, 99]), [20, 20, 30, 40, 20, 0, 0])
    np.testing.assert_allclose(t.rate([-1, 0, 9.9, 10, 29, 30]), [0, 2, 2, -2, -2, 0])
    np.testing.assert_array_equal(t.breakpoints(), [0, 10, 30])


def test_table_to_toml_round_trips_through_parse_schedule(tmp_path):
    t = Table([0, 10], [1, 2])
    back = parse_schedule(t.to_toml(), "x")
    np.testing.assert_array_equal(back.times, t.times)
    np.testing.assert_array_equal(back.values, t.values)
    r = Ramp(1, 2, 3, 4)
    assert parse_schedule(r.to_toml(), "x").to_toml() == r.to_toml()


def test_parse_schedule_reads_a_csv_relative_to_base_dir(tmp_path):
    (tmp_path / "h.csv").write_text("time,temperature\n0,20\n60,80\n")
    s = parse_schedule({"table": "h.csv"}, "boundary.top", tmp_path)
    assert s(30.0) == pytest.approx(50.0)
    assert s.to_toml() == {"table": "h.csv"}


def test_csv_accepts_semicolons_with_decimal_commas_and_whitespace(tmp_path):
    p = tmp_path / "a.csv"
    p.write_text("# comment\n0;20,5\n10;30\n\n")
    np.testing.assert_allclose(read_table_csv(p).values, [20.5, 30])
    p.write_text("0 1\n2\t3\n")
    np.testing.assert_allclose(read_table_csv(p).times, [0, 2])


@pytest.mark.parametrize(
    "text, row, value",
    [
        ("t,v\n0,1\n5,2\n5,3\n", "row 4", "time 5"),
        ("0,1\n1,nan\n", "row 2", "'nan'"),
        ("0,1\n1,inf\n", "row 2", "'inf'"),
        ("0,1\n1,hot\n", "row 2", "'hot'"),
        ("0,1\n1,2,3\n", "row 2", "'3'"),
        ("0\n", "row 1", "'0'"),
    ],
    ids=["non-increasing", "nan", "inf", "text", "three-columns", "one-column"],
)
def test_csv_errors_name_file_row_and_value(tmp_path, text, row, value):
    p = tmp_path / "bad.csv"
    p.write_text(text)
    with pytest.raises(ScheduleError) as info:
        read_table_csv(p)
    msg = str(info.value)
    assert "bad.csv" in msg and row in msg and value in msg


def test_csv_with_only_a_header_has_no_rows(tmp_path):
    p = tmp_path / "empty.csv"
    p.write_text("time,value\n\n")
    with pytest.raises(ScheduleError, match="empty.csv: no data rows"):
        read_table_csv(p)


def test_missing_or_unreadable_csv_names_the_file(tmp_path):
    with pytest.raises(ScheduleError, match="nothere.csv: table file not found"):
        read_table_csv(tmp_path / "nothere.csv")
    p = tmp_path / "binary.csv"
    p.write_bytes(b"\xff\xfe\x00\xc3\x28")
    with pytest.raises(ScheduleError, match="binary.csv: cannot read"):
        read_table_csv(p)
    with pytest.raises(ScheduleError, match="folder: cannot read"):
        (tmp_path / "folder").mkdir()
        read_table_csv(tmp_path / "folder")


@pytest.mark.parametrize(
    "value, key",
    [
        ({"ramp": {"start": 20, "end": 180, "over": -1}}, "b.ramp.over"),
        ({"ramp": {"start": 20, "over": 5}}, "b.ramp.end"),
        ({"ramp": {"start": 20, "end": 1, "over": 5, "slope": 1}}, "b.ramp.slope"),
        ({"ramp": {"start": "hot", "end": 1, "over": 5}}, "b.ramp.start"),
        ({"table": [[0, 1], [0, 2]]}, "b.table[1]"),
        ({"table": [[0, 1, 2]]}, "b.table[0]"),
        ({"table": []}, "b.table"),
        ({"sine": 3}, "b"),
        (True, "b"),
        (float("nan"), "b"),
    ],
)
def test_parse_schedule_errors_carry_the_dotted_key(value, key):
    with pytest.raises(ScheduleError) as info:
        parse_schedule(value, "b")
    assert info.value.key == key
    assert str(info.value).startswith(key + ":")


def test_a_first_row_mixing_a_number_and_text_is_an_error_not_a_header(tmp_path):
    p = tmp_path / "h.csv"
    p.write_text("0,warm\n1,2\n")
    with pytest.raises(ScheduleError, match=r"h.csv, row 1: value 'warm'"):
        read_table_csv(p)


def test_the_lowest_value_is_found_at_a_corner_of_any_schedule():
    assert Constant(-5.0).lowest() == -5.0
    assert Ramp(20.0, -40.0, 10.0, 30.0).lowest() == -40.0
    assert Ramp(-40.0, 20.0, 10.0, 0.0).lowest() == -40.0  # held at its start until the jump
    assert Table([0.0, 5.0, 9.0, 20.0], [10.0, 3.0, -7.5, 4.0]).lowest() == -7.5
