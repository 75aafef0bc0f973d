"""KEY=VALUE changes to a case (``whatif --set``, ``sweep --vary``)."""

from __future__ import annotations

import copy

import pytest
from box_case import BASE, make_case
from heatsoak.core.case.overrides import (
    apply_assignment,
    apply_assignments,
    load_case_with,
    parse_assignment,
    parse_value,
)
from heatsoak.core.errors import CaseError


@pytest.mark.parametrize("text, key, value", [
    ("time.step=5", "time.step", 5),
    ("time.end = 1.5e3", "time.end", 1500.0),
    ('time.mass="lumped"', "time.mass", "lumped"),
    ("probe.core.at=[1, 2.5, 3]", "probe.core.at", [1, 2.5, 3]),
    ("boundary.xmin.ramp={ start = 22, end = 200, at = 0, over = 300 }", "boundary.xmin.ramp",
     {"start": 22, "end": 200, "at": 0, "over": 300}),
    ("boundary.a.table=[[0, 20], [600, 80]]", "boundary.a.table", [[0, 20], [600, 80]]),
    ("mesh.file=other_part.msh", "mesh.file", "other_part.msh"),
    ("time.theta=crank-nicolson", "time.theta", "crank-nicolson"),
    ('title="a=b"', "title", "a=b"),
])
def test_values_are_read_as_toml_or_as_one_plain_word(text, key, value):
    assert parse_assignment(text) == (key, value)


@pytest.mark.parametrize("text, words", [
    ("time.step", "KEY=VALUE"),
    ("=5", "names joined by dots"),
    ("time..step=5", "names joined by dots"),
    ("time.step=", "no value"),
    ("boundary.a.ramp={ start = 22, end = }", "boundary.a.ramp"),
    ("title=two words", "title"),
])
def test_malformed_assignments_name_the_text_and_the_key(text, words):
    with pytest.raises(CaseError, match=words):
        parse_assignment(text)


def test_a_bare_word_is_text_but_punctuation_is_not():
    assert parse_value("crank-nicolson") == "crank-nicolson"
    with pytest.raises(CaseError, match="not a TOML value"):
        parse_value("[1, 2")


def test_apply_returns_a_new_dict_and_leaves_the_input_alone():
    before = copy.deepcopy(BASE)
    new = apply_assignment(BASE, "boundary.xmin.ramp.over", 300)
    assert BASE == before
    assert new["boundary"]["xmin"]["ramp"] == {"start": 20, "end": 180, "at": 0, "over": 300}
    new["time"]["step"] = 1
    assert BASE["time"]["step"] == 10


def test_setting_one_schedule_form_drops_the_others():
    new = apply_assignment(BASE, "boundary.xmin.table", [[0, 20], [60, 90]])
    assert "ramp" not in new["boundary"]["xmin"] and new["boundary"]["xmin"]["kind"] == "temperature"
    new = apply_assignment(new, "boundary.xmin.value", 50)
    assert set(new["boundary"]["xmin"]) == {"kind", "value"}


def test_missing_tables_are_created():
    new = apply_assignment(BASE, "boundary.ymax.h", 25)
    assert new["boundary"]["ymax"] == {"h": 25}


def test_probes_are_reached_by_position_or_name():
    new = apply_assignments(BASE, ["probe.far.threshold=90", "probe.0.threshold=40"])
    assert [p.get("threshold") for p in new["probe"]] == [40, 90]


def test_a_path_through_a_plain_value_names_that_key():
    with pytest.raises(CaseError, match=r"boundary\.xmin\.kind is the value 'temperature', not a table"):
        apply_assignment(BASE, "boundary.xmin.kind.x", 1)


def test_an_unknown_probe_lists_the_names_there_are():
    with pytest.raises(CaseError, match=r"probe\.nope.*\['core', 'far'\]"):
        apply_assignment(BASE, "probe.nope.threshold", 1)
    with pytest.raises(CaseError, match=r"there are 2 entries in probe"):
        apply_assignment(BASE, "probe.5.threshold", 1)


def test_load_case_with_checks_the_changed_case_and_keeps_file_names_relative(tmp_path):
    path = make_case(tmp_path)
    case = load_case_with(path, ["boundary.xmin.ramp.over=30", "time.end=90"])
    assert case.time.end == 90
    assert case.mesh_file == tmp_path / "box.msh"
    assert case.problem.boundaries["xmin"].value(15.0) == pytest.approx(20 + 160 * 0.5)


def test_load_case_with_reports_a_bad_value_under_its_key(tmp_path):
    path = make_case(tmp_path)
    with pytest.raises(CaseError, match=r"time\.step"):
        load_case_with(path, ["time.step=-1"])
