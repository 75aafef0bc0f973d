"""``heatsoak ui`` at start: bad ports, hosts and data folders are one line and exit 2; links in the data
folder are listed safely (never followed out of it); the temporary work folder goes when the UI stops."""

from __future__ import annotations

import os
import re
import signal
import socket
import subprocess
import sys
import time
import urllib.request
from pathlib import Path

import pytest
from heatsoak.core.app.cli import main
from heatsoak.core.errors import InputError
from heatsoak.plugin.load import listing
from heatsoak.plugin.startup import WorkFolder
from uidriver import free_port

MESHES = Path(__file__).resolve().parent.parent / "meshes"
DEMO = MESHES / "platen_warmup.toml"


def hostile_folder(root: Path) -> Path:
    """A data folder holding every kind of entry that must not be followed: a link out of it (file
    and folder, also in a subfolder), a dangling link, a link loop and a named pipe; plus one good mesh
    and a link to it inside the folder."""
    data = root / "data"
    (data / "sub").mkdir(parents=True)
    (root / "secret.msh").write_text("outside")
    (data / "good.msh").write_text("inside")
    os.symlink(root / "secret.msh", data / "out.msh")
    os.symlink(root, data / "up")
    os.symlink(root / "secret.msh", data / "sub" / "deep.msh")
    os.symlink(data / "nowhere.msh", data / "dangling.msh")
    os.symlink(data / "loop_b.msh", data / "loop_a.msh")
    os.symlink(data / "loop_a.msh", data / "loop_b.msh")
    os.symlink(data / "good.msh", data / "sub" / "alias.msh")
    os.mkfifo(data / "pipe.msh")
    return data


def run_ui(capsys, *args) -> tuple[int, str]:
    code = main(["ui", *map(str, args), "--server"])
    return code, capsys.readouterr().err


@pytest.mark.parametrize("port, says", [
    ("0", "give a port number from 1 to 65535"), ("70000", "give a port number from 1 to 65535"),
    ("-5", "give a port number from 1 to 65535"), ("http", "give a port number from 1 to 65535"),
    ("8080\x00", "give a port number from 1 to 65535"),
])
def test_an_invalid_port_is_one_line_and_exit_2(capsys, port, says):
    code, err = run_ui(capsys, DEMO, "--port", port)
    assert code == 2 and says in err and err.count("\n") == 1 and "Traceback" not in err


def test_a_busy_port_is_named_and_the_ui_does_not_start(capsys):
    with socket.socket() as taken:
        taken.bind(("127.0.0.1", 0))
        taken.listen()
        port = taken.getsockname()[1]
        code, err = run_ui(capsys, DEMO, "--port", port)
    assert code == 2 and f"--port {port}: already in use on 127.0.0.1" in err and err.count("\n") == 1


@pytest.mark.parametrize("host", ["no-such-host.invalid", "10.255.255.254", "bad host"])
def test_a_host_this_machine_cannot_bind_is_named(capsys, tmp_path, host):
    key = tmp_path / "key"
    key.write_text("a-long-enough-key-1234\n")
    code, err = run_ui(capsys, DEMO, "--host", host, "--key-file", key, "--port", "18650")
    assert code == 2 and f"--host {host}" in err and err.count("\n") == 1


def test_a_missing_or_odd_data_folder_is_named(capsys, tmp_path):
    (tmp_path / "file.msh").write_text("x")
    for folder, says in ((tmp_path / "none", "no such folder"), (tmp_path / "file.msh", "not a folder")):
        code, err = run_ui(capsys, DEMO, "--data-dir", folder, "--port", "18651")
        assert code == 2 and f"--data-dir {folder}: {says}" in err


def test_links_out_of_the_folder_dangling_looping_or_special_are_listed_as_blocked(tmp_path):
    data = hostile_folder(tmp_path)
    rows = {r["name"]: r for r in listing.list_files(data)}
    assert rows["good.msh"]["kind"] == "mesh" and rows["sub"]["kind"] == "folder"
    for name, why in (("out.msh", "outside"), ("up", "outside"), ("dangling.msh", "nowhere"),
                      ("loop_a.msh", "nowhere"), ("pipe.msh", "not a regular file")):
        assert rows[name]["kind"] == "blocked" and why in rows[name]["note"] and rows[name]["path"] == "", name
    sub = {r["name"]: r for r in listing.list_files(data, "sub")}
    assert sub["deep.msh"]["kind"] == "blocked" and sub["alias.msh"]["path"] == "good.msh"


@pytest.mark.parametrize("name, says", [
    ("out.msh", "only files inside the data folder"), ("sub/deep.msh", "only files inside the data folder"),
    ("up", "only files inside the data folder"), ("../secret.msh", "only files inside the data folder"),
    (str(Path("/etc/passwd")), "only files inside the data folder"), ("good\x00.msh", "only files inside"),
    ("dangling.msh", "not found"), ("loop_a.msh", "not found"), ("pipe.msh", "not a folder, mesh or case"),
    ("x" * 5000, "not found"),
])
def test_names_sent_from_the_browser_are_refused_without_following_them(tmp_path, name, says):
    data = hostile_folder(tmp_path)
    with pytest.raises(InputError, match=says) as err:
        listing.entry_of(data, name)
    assert len(str(err.value)) < 200 and "outside\n" not in str(err.value)


def test_the_kind_of_a_listed_entry_is_found_on_the_server(tmp_path):
    data = hostile_folder(tmp_path)
    assert listing.entry_of(data, "sub/alias.msh") == (data / "good.msh", "mesh")
    assert listing.entry_of(data, "sub") == (data / "sub", "folder")


def test_a_temporary_work_folder_is_removed_and_a_named_one_kept(tmp_path):
    temp = WorkFolder.open(None)
    (temp.path / "runs").mkdir()
    named = WorkFolder.open(tmp_path / "kept")
    (named.path / "x").write_text("x")
    temp.close()
    named.close()
    assert not temp.path.exists() and (named.path / "x").exists()
    assert "removed when the UI stops" in temp.notice() and "kept in" in named.notice()


def start_ui(args, log: Path) -> subprocess.Popen:
    with open(log, "w") as out:
        return subprocess.Popen([sys.executable, "-m", "heatsoak.core.app.cli", "ui", *map(str, args), "--server"],
                                stdout=out, stderr=subprocess.STDOUT, env={**os.environ, "PYTHONUNBUFFERED": "1"})


def wait_served(proc, port: int, log: Path) -> None:
    end = time.time() + 150  # a start takes a few seconds, far more on a machine loaded by other work
    while time.time() < end:
        try:
            with urllib.request.urlopen(f"http://127.0.0.1:{port}/", timeout=2) as r:
                if r.status == 200:
                    return
        except OSError:
            assert proc.poll() is None, log.read_text()
            time.sleep(0.3)
    raise TimeoutError(log.read_text())


def test_two_users_processes_run_side_by_side_and_each_cleans_up_its_own_work_folder(tmp_path):
    """One on a hostile data folder with a temporary work folder, one with its own key and a named work
    folder: both serve, the temporary folder goes when its UI stops, the named one stays."""
    data = hostile_folder(tmp_path)
    for name in ("platen_warmup.toml", "platen.msh", "platen_base.csv"):
        (data / name).write_bytes((MESHES / name).read_bytes())
    (tmp_path / "key").write_text("second-users-key-0123\n")
    ports, logs = (free_port(), free_port()), (tmp_path / "one.log", tmp_path / "two.log")
    procs = [start_ui([data / "platen_warmup.toml", "--port", ports[0]], logs[0]),
             start_ui([DEMO, "--port", ports[1], "--key-file", tmp_path / "key", "--work-dir", tmp_path / "work"],
                      logs[1])]
    try:
        for proc, port, log in zip(procs, ports, logs):
            wait_served(proc, port, log)
        work = Path(re.search(r"go to (\S+), removed", logs[0].read_text()).group(1))
        assert work.is_dir() and f"kept in {tmp_path / 'work'}" in logs[1].read_text()
    finally:
        for proc in procs:
            proc.send_signal(signal.SIGTERM)
            proc.wait(20)
    assert not work.exists(), "the temporary work folder outlived the UI"
    assert (tmp_path / "work").is_dir(), "the named work folder was removed"
    for log in logs:
        assert "traceback" not in log.read_text().lower(), log.read_text()
