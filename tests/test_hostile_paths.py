"""Files a case names: confined to a root when one is given, only regular files, bounded sizes.

Each hostile input is built at test time; each test asserts the refusal names the key and the
value, and that the command line (no root) keeps reading the user's own files.
"""

from __future__ import annotations

import os
import shutil

import pytest
from box_case import make_case
from heatsoak.core.app.cli import main
from heatsoak.core.case import paths as paths_module
from heatsoak.core.case.casefile import check_case, load_case, read_case_toml
from heatsoak.core.case.paths import CasePaths
from heatsoak.core.errors import CaseError, PathError


@pytest.fixture
def data(tmp_path):
    """A data folder holding a box case, a CSV table, and a secret file beside (outside) it."""
    root = tmp_path / "data"
    root.mkdir()
    case = make_case(root)
    (root / "ramp.csv").write_text("time, value\n0, 20\n60, 100\n")
    (tmp_path / "secret.csv").write_text("0, 1\n1, 2\n")
    shutil.copy(root / "box.msh", tmp_path / "outside.msh")
    return root, case


def _set(case, key: str, value: str):
    """Rewrite one file name in the case text (mesh.file, a table, initial.file)."""
    text = case.read_text()
    if key == "mesh.file":
        text = text.replace('file = "box.msh"', f"file = {value!r}".replace("'", '"'))
    elif key == "boundary.zmin.table":
        text = text.replace("value = 500", f'table = "{value}"')
    else:
        text = text.replace("temperature = 20\n", f'file = "{value}"\n', 1)
    case.write_text(text)


def _messages(case, root):
    return "\n".join(i.message for i in check_case(case, root=root))


OUTSIDE = {  # name -> how it is made (given the data folder and the folder above it)
    "absolute": lambda root, up: str(up / "secret.csv"),
    "dotdot": lambda root, up: "../secret.csv",
    "deep-dotdot": lambda root, up: "sub/../../secret.csv",
    "link-out": lambda root, up: (root / "l.csv").symlink_to(up / "secret.csv") or "l.csv",
    "dir-link-out": lambda root, up: (root / "d").symlink_to(up) or "d/secret.csv",
}


@pytest.mark.parametrize("how", sorted(OUTSIDE))
@pytest.mark.parametrize("key", ["mesh.file", "boundary.zmin.table", "initial.file"])
def test_a_name_leading_outside_the_root_is_refused_naming_key_and_value(data, how, key):
    root, case = data
    (root / "sub").mkdir()
    name = OUTSIDE[how](root, root.parent)
    _set(case, key, name)
    text = _messages(case, root)
    assert key in text and name in text
    assert "outside the data folder" in text or "absolute file names are not allowed" in text
    assert "0, 1" not in text  # nothing of the outside file is shown


def test_without_a_root_the_command_line_reads_the_users_own_files(data):
    root, case = data
    _set(case, "mesh.file", str(root.parent / "outside.msh"))
    _set(case, "boundary.zmin.table", "../secret.csv")
    assert check_case(case) == []
    assert load_case(case).mesh_file == root.parent / "outside.msh"


def test_inside_the_root_relative_names_links_and_dotdot_steps_are_read(data):
    root, case = data
    (root / "sub").mkdir()
    (root / "sub" / "ramp2.csv").symlink_to(root / "ramp.csv")
    _set(case, "boundary.zmin.table", "sub/../sub/ramp2.csv")
    loaded = load_case(case, root=root)
    assert loaded.problem.boundaries["zmin"].value(60.0) == 100.0


SPECIAL = {
    "fifo": lambda p: os.mkfifo(p),
    "folder": lambda p: p.mkdir(),
    "device": lambda p: p.symlink_to("/dev/zero"),
    "dangling link": lambda p: p.symlink_to(p.parent / "nowhere"),
    "link loop": lambda p: p.symlink_to(p),
}
SPECIAL_WORDS = {"fifo": "FIFO", "folder": "a folder", "device": "character device",
                 "dangling link": "not found", "link loop": "cannot be read"}


@pytest.mark.parametrize("what", sorted(SPECIAL))
@pytest.mark.parametrize("key", ["mesh.file", "boundary.zmin.table"])
def test_anything_but_a_regular_file_is_refused_without_hanging(data, what, key, capsys):
    root, case = data
    SPECIAL[what](root / "odd.csv")
    _set(case, key, "odd.csv")
    assert main(["check", str(case)]) == 2  # the command line: no root, still no FIFO or device read
    err = capsys.readouterr().err
    assert key in err and "odd.csv" in err and SPECIAL_WORDS[what] in err


def test_a_device_named_by_absolute_path_is_refused_on_the_command_line(data):
    root, case = data
    _set(case, "boundary.zmin.table", "/dev/zero")
    assert "is a character device, not a regular file" in _messages(case, None)


@pytest.mark.parametrize("key, limit", [("boundary.zmin.table", "MAX_TABLE_BYTES"),
                                        ("mesh.file", "MAX_MESH_BYTES")])
def test_a_file_above_its_size_limit_is_refused_stating_the_limit(data, monkeypatch, key, limit):
    root, case = data
    monkeypatch.setattr(paths_module, limit, 1000)
    (root / "big.csv").write_text("0, 1\n" * 300)
    _set(case, key, "big.csv")
    text = _messages(case, None)
    assert key in text and "above the limit of 0.0009537 MiB" in text


@pytest.mark.parametrize("name, words", [("a\0b.csv", "NUL"), ("", "expected a file name"),
                                         ("   ", "expected a file name")])
def test_odd_names_are_refused_naming_the_key(name, words):
    with pytest.raises(PathError, match=words) as info:
        CasePaths(".", None).read_text("boundary.b.table", name)
    assert info.value.key == "boundary.b.table"


def test_a_table_that_is_not_utf8_is_refused(data):
    root, case = data
    (root / "latin.csv").write_bytes(b"0, 1\n\xff\xfe\xfa, 2\n")
    _set(case, "boundary.zmin.table", "latin.csv")
    assert "is not UTF-8 text" in _messages(case, root)


def test_a_case_file_outside_the_root_or_deeply_nested_is_a_clear_error(data, tmp_path):
    root, case = data
    with pytest.raises(CaseError, match="outside the data folder"):
        read_case_toml(tmp_path / "secret.csv", root=root)
    deep = root / "deep.toml"
    deep.write_text("x = " + "[" * 500 + "]" * 500 + "\n")
    with pytest.raises(CaseError, match="nested too deeply|not valid TOML"):
        read_case_toml(deep)


def _xdmf(root, heavy: str, fmt: str = "HDF"):
    text = (f'<Xdmf Version="3.0"><Domain><Grid Name="m"><Geometry GeometryType="XYZ">'
            f'<DataItem Dimensions="4 3" Format="{fmt}">{heavy}</DataItem></Geometry></Grid></Domain></Xdmf>')
    (root / "m.xdmf").write_text(text)


@pytest.mark.parametrize("heavy, fmt, words", [
    ("../secret.h5:/points", "HDF", "outside the data folder"),
    ("/dev/zero:/points", "HDF", "absolute file names are not allowed"),
    ("points.bin", "Binary", "raw binary data"),
])
def test_an_xdmf_mesh_naming_heavy_data_outside_the_root_is_refused(data, heavy, fmt, words):
    root, case = data
    _xdmf(root, heavy, fmt)
    _set(case, "mesh.file", "m.xdmf")
    text = _messages(case, root)
    assert "mesh.file" in text and "m.xdmf" in text and words in text


def test_an_xdmf_naming_a_device_as_heavy_data_is_refused_on_the_command_line(data):
    root, case = data
    _xdmf(root, "/dev/zero:/points")
    _set(case, "mesh.file", "m.xdmf")
    assert "character device" in _messages(case, None)


def test_check_states_the_file_limits(data, capsys):
    root, case = data
    assert main(["check", str(case)]) == 0
    assert "limits    files a case names must be regular files; tables up to 64 MiB" in capsys.readouterr().out
