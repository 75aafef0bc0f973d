"""Hostile inputs and requests to the browser panel, sent as a browser would (handler calls and state
changes on a panel mounted in-process): each is refused with a message naming what was refused, never
quotes a file outside the data folder, never raises out of the handler (a traceback in the server log),
and leaves the case that was open as it was.
"""

from __future__ import annotations

import asyncio
import inspect
import io
import os
import shutil
import zipfile
from pathlib import Path
from types import SimpleNamespace

import pytest

MESHES = Path(__file__).resolve().parent.parent / "meshes"
DEMO = "platen_warmup.toml"
#: Text of the file outside the data folder that nothing may show.
SECRET = "0, 4242\n1, 4343\nsecret-line\n"


def case_text(**swap) -> str:
    """The demo case with its mesh file and base table names replaced (TOML strings given whole)."""
    text = (MESHES / DEMO).read_text()
    if "mesh" in swap:
        text = text.replace('file = "platen.msh"', f"file = {swap['mesh']}")
    if "table" in swap:
        text = text.replace('table = "platen_base.csv"', f"table = {swap['table']}")
    return text


@pytest.fixture(scope="module")
def folders(tmp_path_factory):
    """(data folder, folder above it): the demo case, hostile cases, links and a pipe in the data folder;
    a secret table and a copy of the mesh outside it."""
    up = tmp_path_factory.mktemp("hostile-ui")
    data = up / "data"
    data.mkdir()
    for name in (DEMO, "platen.msh", "platen_base.csv"):
        shutil.copy(MESHES / name, data / name)
    (up / "secret.csv").write_text(SECRET)
    shutil.copy(MESHES / "platen.msh", up / "outside.msh")
    os.symlink(up / "outside.msh", data / "out.msh")
    os.symlink(up, data / "updir")
    os.symlink("/dev/zero", data / "zero.csv")
    os.mkfifo(data / "pipe.msh")
    os.mkfifo(data / "pipe.csv")
    cases = {
        "abs_mesh": case_text(mesh=f'"{up / "outside.msh"}"'), "dotdot_mesh": case_text(mesh='"../outside.msh"'),
        "link_mesh": case_text(mesh='"out.msh"'), "dirlink_mesh": case_text(mesh='"updir/outside.msh"'),
        "nul_mesh": case_text(mesh='"plat\\u0000en.msh"'), "fifo_mesh": case_text(mesh='"pipe.msh"'),
        "folder_mesh": case_text(mesh='"."'), "passwd_table": case_text(table='"/etc/passwd"'),
        "secret_table": case_text(table='"../secret.csv"'), "zero_table": case_text(table='"zero.csv"'),
        "fifo_table": case_text(table='"pipe.csv"'), "deep": "x = " + "[" * 600 + "]" * 600 + "\n",
    }
    for name, text in cases.items():
        (data / f"{name}.toml").write_text(text)
    (data / "binary.toml").write_bytes(b"\xff\xfe\x00garbage\x00")
    (data / ".notes").write_text("hunter2-private, 1\n")  # files of the data folder that are not tables or meshes
    (data / "key.msh").write_text("-----BEGIN hunter2-private KEY-----\n")
    (data / "notes_table.toml").write_text(case_text(table='".notes"'))
    (data / "key_mesh.toml").write_text(case_text(mesh='"key.msh"'))
    return data, up


@pytest.fixture(scope="module")
def panel(folders, tmp_path_factory):
    """The heat panel on a trame server that is never started, the demo case open."""
    from heatsoak.plugin.panel import mount
    from heatsoak.plugin.pvtrame import new_plotter
    from trame.app import get_server

    server = get_server("hostile-ui", client_type="vue3")
    heat = mount(server, new_plotter(), data_dir=folders[0], work_dir=tmp_path_factory.mktemp("hostile-work"))
    server.state.ready()
    server._root_protocol = SimpleNamespace(addAttachment=lambda data: data,  # triggers hand their bytes back
                                            push_state_change=lambda state: None)
    assert heat.open_path(folders[0] / DEMO)
    return heat


def message(heat) -> str:
    s = heat.state
    return " ".join(str(m) for m in (s.hs_mesh_error, s.hs_upload_error, s.hs_export_error) if m)


def clear(heat) -> None:
    heat.state.update({"hs_mesh_error": "", "hs_upload_error": "", "hs_export_error": ""})
    heat.state.flush()


def unchanged(heat, folders) -> None:
    """The demo case is still the one open, its mesh from the data folder, nothing from outside shown."""
    assert heat.mesh_path == folders[0] / "platen.msh"
    shown = message(heat)
    assert not any(text in shown for text in ("secret-line", "root:", "4242", "hunter2")), shown


#: Cases in the data folder naming what they may not: (file, words the message must hold).
HOSTILE_CASES = [
    ("abs_mesh", "mesh.file = '/"), ("abs_mesh", "absolute file names are not allowed"),
    ("dotdot_mesh", "'../outside.msh': leads outside the data folder"), ("link_mesh", "'out.msh': leads outside"),
    ("dirlink_mesh", "'updir/outside.msh': leads outside"), ("nul_mesh", "NUL character"),
    ("fifo_mesh", "FIFO"), ("folder_mesh", "is a folder"), ("deep", "nested too deeply"),
    ("binary", "binary.toml"), ("key_mesh", "key.msh"),
]


@pytest.mark.parametrize("name, words", HOSTILE_CASES)
def test_a_listed_case_naming_a_mesh_it_may_not_read_is_refused(panel, folders, name, words):
    clear(panel)
    panel.ctrl.hs_open(f"{name}.toml", "case")
    assert words in message(panel), message(panel)
    unchanged(panel, folders)


@pytest.mark.parametrize("name, words", [
    ("passwd_table", "table = '/etc/passwd': absolute file names are not allowed"),
    ("secret_table", "table = '../secret.csv': leads outside the data folder"),
    ("zero_table", "table = 'zero.csv': leads outside"), ("fifo_table", "table = 'pipe.csv': is a FIFO"),
    ("notes_table", ".notes, row 1: time (content not shown)"),
])
def test_a_listed_case_naming_a_table_it_may_not_read_opens_with_the_table_refused(panel, folders, name, words):
    clear(panel)
    panel.ctrl.hs_open(f"{name}.toml", "case")
    assert f"boundary.base: {words}" in message(panel)
    assert not any(text in message(panel) for text in ("secret-line", "root:", "hunter2")), message(panel)
    panel.ctrl.hs_open(DEMO, "case")  # back to the demo case for the next test
    unchanged(panel, folders)


@pytest.mark.parametrize("path, kind, words", [
    ("../secret.csv", "case", "only files inside the data folder"), ("/etc/passwd", "mesh", "only files inside"),
    ("out.msh", "mesh", "only files inside"), ("updir", "folder", "only files inside"),
    ("platen\x00.msh", "mesh", "only files inside"), ("pipe.msh", "folder", "not a folder, mesh or case"),
    (["platen.msh"], "mesh", "only files inside"), ({"path": "x"}, "case", "only files inside"),
    ("x" * 10_000, "mesh", "not found"), ("zero.csv", "case", "only files inside"),
])
def test_a_file_request_the_list_never_offered_is_refused(panel, folders, path, kind, words):
    clear(panel)
    panel.ctrl.hs_open(path, kind)
    assert words in message(panel) and len(message(panel)) < 300
    unchanged(panel, folders)


@pytest.mark.parametrize("folder", ["..", "../..", "/etc", "updir", "pipe.msh", "a\x00b"])
def test_a_folder_outside_the_data_folder_is_never_listed(panel, folders, folder):
    clear(panel)
    panel.state.hs_dir = folder
    panel.ctrl.hs_refresh_files()
    names = {f["name"] for f in panel.state.hs_files}
    assert panel.state.hs_dir == "" and DEMO in names and "secret.csv" not in names and message(panel)
    unchanged(panel, folders)


@pytest.mark.parametrize("handler, args, words", [
    ("hs_set_angle", ("nan",), "from 0 to 180"), ("hs_set_angle", ("1e999",), "from 0 to 180"),
    ("hs_set_angle", ([1],), "from 0 to 180"), ("hs_set_angle", ("-5",), "from 0 to 180"),
    ("hs_set_unit", (["m"],), "unknown length unit"), ("hs_set_unit", ("furlong",), "unknown length unit"),
    ("hs_view_click", ({"worldPosition": ["a"]},), ""), ("hs_view_click", ({"position": {"x": "a"}},), ""),
    ("hs_view_click", (7,), ""), ("hs_step", ("x",), ""), ("hs_step", (10**9,), ""), ("hs_remove_probe", (None,), ""),
])
def test_a_malformed_handler_call_is_refused_and_changes_nothing(panel, folders, handler, args, words):
    clear(panel)
    before = panel.state.hs_unit, panel.state.hs_feature_angle, panel.state.hs_frame, list(panel.state.hs_probes)
    getattr(panel.ctrl, handler)(*args)
    assert words in message(panel)
    assert (panel.state.hs_unit, panel.state.hs_feature_angle, panel.state.hs_frame, panel.state.hs_probes) == \
        (*before[:3], before[3])
    unchanged(panel, folders)


def upload(heat, value) -> None:
    heat.state.hs_upload = value
    heat.state.flush()


@pytest.mark.parametrize("value, words", [
    ({"name": "c.toml", "size": 60, "content": b'[mesh]\nfile = "../../../../etc/passwd"\n'},
     "leads outside the uploaded files"),
    ({"name": "c.toml", "size": 60, "content": f'[mesh]\nfile = "{MESHES / "platen.msh"}"\n'.encode()},
     "absolute file names are not allowed"),
    ({"name": "big.msh", "size": 10**12, "content": None}, "over the limit"),
    ({"name": "run.sh", "size": 4, "content": b"boom"}, "not a mesh, case or CSV file"),
    ({"name": "a.msh", "size": "lots", "content": b"x"}, "is not a number of bytes"),
    ({"name": "a.msh", "size": 3}, "no file content"), (["not a file"], "not a file"),
])
def test_a_hostile_upload_is_refused(panel, folders, value, words):
    clear(panel)
    upload(panel, value)
    assert words in message(panel), message(panel)
    upload(panel, None)
    unchanged(panel, folders)


def test_an_upload_name_cannot_place_a_file_outside_the_upload_folder(panel, folders):
    upload(panel, {"name": "../../../evil.csv", "size": 4, "content": b"0, 1"})
    upload(panel, None)
    assert not (folders[1] / "evil.csv").exists() and (panel.work_dir / "uploads" / "evil.csv").exists()


def test_the_case_and_mesh_zip_holds_only_the_case_and_its_mesh_from_the_data_folder(panel, folders):
    data = panel.server.controller.trigger_fn("hs_export_bundle")()
    with zipfile.ZipFile(io.BytesIO(data)) as z:
        assert sorted(z.namelist()) == ["case.toml", "platen.msh"]
        assert z.read("platen.msh") == (folders[0] / "platen.msh").read_bytes()


def test_a_mesh_swapped_for_a_link_out_of_the_folder_after_opening_is_not_zipped(panel, folders, tmp_path):
    data_dir = folders[0]
    panel.ctrl.hs_open("platen.msh", "mesh")
    moved = tmp_path / "platen.msh"
    shutil.move(data_dir / "platen.msh", moved)
    os.symlink(folders[1] / "outside.msh", data_dir / "platen.msh")
    try:
        assert panel.server.controller.trigger_fn("hs_export_bundle")() is None
        assert "the mesh cannot go into the zip" in message(panel) and "leads outside" in message(panel)
    finally:
        (data_dir / "platen.msh").unlink()
        shutil.move(moved, data_dir / "platen.msh")


def answer(result):
    """What a wslink method returned, awaited when it is a coroutine (as wslink does)."""
    return asyncio.run(result) if inspect.isawaitable(result) else result


@pytest.mark.parametrize("error", [TypeError("takes 0 positional arguments but 1 was given"),
                                   ValueError("invalid literal for int() with base 10: 'x'"), KeyError("y")])
def test_a_malformed_button_request_is_one_log_line_and_no_answer(error, caplog):
    from heatsoak.plugin.session.gate import Gate

    handler = FakeHandler()

    def broken(obj, *args):
        raise error

    handler.functionMap["trame.trigger"] = (handler, broken)
    server = SimpleNamespace(state={}, add_protocol_to_configure=lambda fn: None)
    Gate(server, lambda conn, m, a: True, on_close=lambda conn: None).connected(
        SimpleNamespace(publish=handler.publish), "owner", "")
    handler.web_app.last_active_client_id = "owner"
    obj, func = handler.functionMap["trame.trigger"]
    assert answer(func(obj, "hs_step", ["x"], {})) is None
    lines = [r.getMessage() for r in caplog.records]
    assert len(lines) == 1 and "'hs_step' not taken" in lines[0] and type(error).__name__ in lines[0]


class FakeHandler:
    """Stands in for wslink's handler: its method table, the sending connection, what it publishes."""

    def __init__(self):
        self.web_app = SimpleNamespace(last_active_client_id=None)
        self.sent = []
        self.functionMap = {name: (self, lambda obj, *a, name=name: f"ran {name}") for name in (
            "application.exit", "application.exit.later", "trame.state.update", "trame.trigger",
            "viewport.mouse.interaction", "viewport.camera.reset", "viewport.image.push", "trame.state.get")}

    def publish(self, topic, data, client_id=None):
        self.sent.append((topic, data, client_id))


@pytest.mark.parametrize("method, args, owner_runs, watcher_runs", [
    ("application.exit", (), False, False), ("application.exit.later", (5,), False, False),
    ("trame.state.update", ([{"key": "hs_t_end", "value": 1}],), True, False),
    ("trame.trigger", ("hs_export_bundle", [], {}), True, False), ("trame.trigger", ("hs_take_over", [], {}), True, True),
    ("viewport.mouse.interaction", ({"action": "down"},), True, False), ("viewport.camera.reset", (), True, False),
    ("viewport.image.push", ({"view": 1},), True, True), ("trame.state.get", (), True, True),
])
def test_the_gate_lets_a_watching_tab_only_look_and_nobody_stop_the_server(method, args, owner_runs, watcher_runs):
    from heatsoak.plugin.session.gate import Gate

    handler = FakeHandler()
    server = SimpleNamespace(state={"hs_t_end": 600}, add_protocol_to_configure=lambda fn: None)
    gate = Gate(server, lambda conn, m, a: conn == "owner" or (m == "trame.trigger" and a[0] == "hs_take_over"),
                on_close=lambda conn: None)
    gate.connected(SimpleNamespace(publish=handler.publish), "owner", "127.0.0.1")
    obj, func = handler.functionMap[method]
    for conn, runs in (("owner", owner_runs), ("watcher", watcher_runs)):
        handler.web_app.last_active_client_id = conn
        assert (answer(func(obj, *args)) == f"ran {method}") is runs, (conn, method)
    if method == "trame.state.update":  # the watcher's field is given the workspace's value back
        assert handler.sent == [("trame.state.topic", {"hs_t_end": 600}, "watcher")]
