"""Plain-Python helpers of the UI plugin: run labels, forms, access rules, data folder, material library."""

from __future__ import annotations

import copy

import pytest
from heatsoak.core.case.casefile import check_case_data
from heatsoak.core.errors import InputError
from heatsoak.core.mesh.generate import box_mesh
from heatsoak.core.problem.materials import LIBRARY, get_material
from heatsoak.plugin import access
from heatsoak.plugin.load import listing as files
from heatsoak.plugin.runs import labels as rundiff
from heatsoak.plugin.session.seats import Seats
from heatsoak.plugin.setup import forms

RAMP_CASE = {
    "mesh": {"file": "box.msh", "unit": "m"},
    "boundary": {"bore": {"kind": "temperature", "ramp": {"start": 20.0, "end": 200.0, "at": 0.0, "over": 300.0}}},
    "time": {"end": 600.0, "step": 10.0, "theta": 1.0},
}


# ------------------------------------------------------------------ run labels
def test_label_names_the_changed_ramp_duration_with_units():
    new = copy.deepcopy(RAMP_CASE)
    new["boundary"]["bore"]["ramp"]["over"] = 600.0
    assert rundiff.run_label(RAMP_CASE, new) == "bore ramp over 300 s -> 600 s"


def test_label_lists_several_changes_and_the_first_run():
    new = copy.deepcopy(RAMP_CASE)
    new["time"]["end"] = 900.0
    new["time"]["step"] = 5.0
    assert rundiff.run_label(None, RAMP_CASE) == "first run"
    assert rundiff.run_label(RAMP_CASE, new) == "end time 600 s -> 900 s; time step 10 s -> 5 s"


def test_label_says_when_a_condition_changes_kind():
    new = copy.deepcopy(RAMP_CASE)
    new["boundary"]["bore"] = {"kind": "convection", "h": 10.0, "ambient": 20.0}
    assert rundiff.run_label(RAMP_CASE, new) == "bore temperature ramp -> convection"


def test_label_of_an_unchanged_case_and_of_many_changes():
    assert rundiff.run_label(RAMP_CASE, copy.deepcopy(RAMP_CASE)) == "same case again"
    new = copy.deepcopy(RAMP_CASE)
    new["time"] = {"end": 1.0, "step": 0.5, "theta": 0.5}
    new["boundary"]["bore"]["ramp"]["end"] = 100.0
    assert rundiff.run_label(RAMP_CASE, new, limit=2).endswith("; and 2 more")


# ----------------------------------------------------------------------- forms
def test_forms_become_the_case_file_shapes():
    form = forms.default_bc() | {"kind": "temperature", "shape": "ramp", "start": "20", "end": 180, "at": 0,
                                 "over": "600"}
    assert forms.boundary_entry(form, "bore") == {
        "kind": "temperature", "ramp": {"start": 20.0, "end": 180.0, "at": 0.0, "over": 600.0}}
    conv = forms.default_bc() | {"kind": "convection", "shape": "constant", "value": 25, "h": "12.5"}
    assert forms.boundary_entry(conv, "top") == {"kind": "convection", "h": 12.5, "ambient": 25.0}
    flux = forms.default_bc() | {"kind": "heat_flux", "shape": "table", "table": "time;value\n0;0\n60;1500"}
    assert forms.boundary_entry(flux, "face") == {"kind": "heat_flux", "table": [[0.0, 0.0], [60.0, 1500.0]]}


def test_forms_round_trip_through_case_entries():
    for form in (
        forms.default_bc() | {"kind": "temperature", "shape": "ramp", "start": 20.0, "end": 90.0, "at": 5.0, "over": 60.0},
        forms.default_bc() | {"kind": "convection", "shape": "constant", "value": 30.0, "h": 8.0},
        forms.default_bc() | {"kind": "heat_flux", "shape": "table", "table": "0, 10\n5, 20"},
    ):
        back = forms.bc_form_from_case(forms.boundary_entry(form, "g"))
        assert forms.boundary_entry(back, "g") == forms.boundary_entry(form, "g")


def test_unreadable_table_text_names_the_row():
    with pytest.raises(forms.FormError) as err:
        forms.parse_table_text("0, 20\n10, abc\n", "boundary.bore.table")
    assert err.value.key == "boundary.bore.table" and "row 2" in err.value.message


def test_core_issue_keys_map_to_panel_fields():
    assert forms.field_key("boundary.bore.ramp.over") == "boundary.bore.over"
    assert forms.field_key("boundary.bore.table[3]") == "boundary.bore.table"
    assert forms.field_key("boundary.top.ambient.ramp.at") == "boundary.top.at"
    assert forms.field_key("boundary.top.ambient") == "boundary.top.value"
    assert forms.field_key("probe[2].at") == "probe.2"
    assert forms.field_key("time.step") == "time.step"


def test_a_non_increasing_table_is_reported_at_its_field_by_the_core_checks(tmp_path):
    mesh = box_mesh((2, 2, 2))
    bc = forms.default_bc() | {"kind": "temperature", "shape": "table", "table": "0, 20\n100, 50\n50, 80"}
    mat = {"density": 7800, "specific_heat": 450, "conductivity": 50}
    case, errors = forms.case_from_forms({"file": "box.msh", "unit": "m"}, {"xmin": bc}, {"box": mat}, 20,
                                         {"end": 100, "step": 10, "theta": 1, "mass": "consistent"}, [])
    assert errors == []
    fields = forms.issues_by_field(check_case_data(case, tmp_path, mesh=mesh))
    assert list(fields) == ["boundary.xmin.table"]
    assert "does not increase" in fields["boundary.xmin.table"][0]


# ---------------------------------------------------------------------- access
def test_loopback_needs_no_key_and_other_hosts_get_one():
    assert access.decide_access("127.0.0.1").key is None
    assert access.decide_access("::1").key is None
    shared = access.decide_access("0.0.0.0")
    assert shared.generated and len(shared.key) >= 24
    assert f"?secret={shared.key}" in shared.url(8080)
    assert "access key" in shared.notice(8080)


def test_key_file_is_read_and_checked(tmp_path):
    good = tmp_path / "key"
    good.write_text("a-long_key-of-letters123\n")
    assert access.decide_access("10.0.0.5", good).key == "a-long_key-of-letters123"
    bad = tmp_path / "short"
    bad.write_text("abc")
    with pytest.raises(InputError, match="at least 12"):
        access.decide_access("10.0.0.5", bad)


# ----------------------------------------------------------------- data folder
def test_browsing_never_leaves_the_data_folder(tmp_path):
    (tmp_path / "sub").mkdir()
    (tmp_path / "sub" / "part.msh").write_text("x")
    (tmp_path / "notes.txt").write_text("x")
    rows = files.list_files(tmp_path)
    assert [(r["name"], r["kind"]) for r in rows] == [("sub", "folder")]
    assert files.list_files(tmp_path, "sub")[0]["path"] == "sub/part.msh"
    for name in ("../etc/passwd", "/etc/passwd", "sub/../../x"):
        with pytest.raises(InputError, match="inside the data folder"):
            files.inside(tmp_path, name)


def test_uploads_over_the_limit_or_of_other_types_are_refused(tmp_path):
    with pytest.raises(InputError, match="over the limit"):
        files.save_upload(tmp_path, "big.msh", b"x" * 11, limit=10)
    with pytest.raises(InputError, match="not a mesh"):
        files.save_upload(tmp_path, "run.sh", b"x")
    path = files.save_upload(tmp_path, "../../weird name.msh", b"data")
    assert path == tmp_path / "weird_name.msh" and path.read_bytes() == b"data"


def test_a_browser_file_value_is_unwrapped_and_its_declared_size_checked_first():
    one = {"name": "a.csv", "size": 3, "content": b"1,2"}
    assert files.unwrap_upload([one]) == ("a.csv", b"1,2")
    assert files.unwrap_upload(one) == ("a.csv", b"1,2")
    assert files.unwrap_upload(None) is None and files.unwrap_upload([]) is None
    big = {"name": "big.msh", "size": 2_000_000, "content": None}  # content never read
    with pytest.raises(InputError, match="'big.msh': 2.0 MB is over the limit of 1 MB; try elsewhere"):
        files.unwrap_upload(big, limit=1_000_000, hint="; try elsewhere")


# ------------------------------------------------------------ material library
@pytest.mark.parametrize(
    "key, alpha_1e6",
    # Thermal diffusivity column of the same tables (Incropera et al., Fundamentals of Heat and Mass
    # Transfer, 6th ed., Tables A.1 and A.3, 300 K, from memory): a check that rho, c and k were copied
    # consistently.
    [("carbon_steel", 18.8), ("stainless_304", 3.95), ("aluminium", 97.1), ("aluminium_2024", 73.0),
     ("copper", 117.0), ("brick", 0.449), ("glass_plate", 0.747), ("granite", 1.37)],
)
def test_library_values_agree_with_the_tables_diffusivity(key, alpha_1e6):
    assert get_material(key).diffusivity * 1e6 == pytest.approx(alpha_1e6, rel=0.02)


def test_library_entries_name_their_source():
    assert all("Incropera" in m.source for m in LIBRARY.values())
    with pytest.raises(InputError, match="not in the library"):
        get_material("unobtainium")


def test_library_material_is_written_with_its_source():
    form = {"preset": "copper", "density": 8933.0, "specific_heat": 385.0, "conductivity": 401.0}
    entry = forms.material_entry(form, "core")
    assert entry["conductivity"] == 401.0 and "Incropera" in entry["label"]
    custom = forms.material_entry(form | {"preset": "custom", "conductivity": 380.0}, "core")
    assert "label" not in custom


@pytest.mark.parametrize("fmt, magic", [("gif", b"GIF8"), ("mp4", b"ftyp")])
def test_animation_encodes_every_frame(fmt, magic, tmp_path):
    import imageio.v3 as iio
    import numpy as np
    from heatsoak.plugin.export.actions import encode_movie

    frames = [np.full((64, 96, 3), 25 * i, np.uint8) for i in range(6)]
    data = encode_movie(frames, fps=5, fmt=fmt)
    assert magic in data[:12]
    if fmt == "gif":
        (tmp_path / "a.gif").write_bytes(data)
        back = iio.imread(tmp_path / "a.gif", index=None)
        assert back.shape[0] == 6 and back[5].mean() > back[0].mean() + 100


# ------------------------------------------------------------- workspace owner

def test_seats_first_owns_others_watch_until_they_take_over():
    seats = Seats()
    assert seats.hello("a") == "tab 1" and seats.hello("b", "10.0.0.7") == "tab 2 from 10.0.0.7"
    assert seats.may_edit("a") and not seats.may_edit("b") and not seats.may_edit(None)
    assert seats.take_over("b") == "tab 2 from 10.0.0.7" and seats.may_edit("b") and not seats.may_edit("a")
    assert seats.lost == "tab 1" and seats.take_over(None) == "" and seats.owner == "b"
    seats.closed("b")
    assert seats.owner is None and seats.hello("c") == "tab 3" and seats.may_edit("c")
    assert seats.take_over("renewed") == "tab 4" and seats.may_edit("renewed") and seats.lost == "tab 3"
