"""Runs that meet hostile inputs and faults: what check says, what a run leaves behind."""

from __future__ import annotations

import json
import re

import numpy as np
import pytest
from box_case import make_case
from heatsoak.core.app.cli import main


def _table_case(tmp_path, rows: int, theta="crank-nicolson"):
    t = np.linspace(0.0, 120.0, rows)
    np.savetxt(tmp_path / "flux.csv", np.column_stack([t, 500 + 100 * np.sin(t)]), delimiter=", ")

    def change(d):
        d["boundary"]["zmin"] = {"kind": "heat_flux", "table": "flux.csv"}
        d["boundary"]["xmin"]["ramp"] = {"start": 20, "end": 180, "at": 35, "over": 0}  # a jump: restarts
        d["time"]["theta"] = theta

    return make_case(tmp_path, change)


@pytest.mark.parametrize("rows, theta", [(2, 1.0), (500, "crank-nicolson"), (800, 1.0)])
def test_check_states_the_step_count_the_run_takes(tmp_path, capsys, rows, theta):
    case = _table_case(tmp_path, rows, theta)
    assert main(["check", str(case)]) == 0
    said = int(re.search(r"\((\d+) steps", capsys.readouterr().out).group(1))
    assert main(["run", str(case), "--quiet", "--out", str(tmp_path / "out")]) == 0
    assert json.loads((tmp_path / "out" / "summary.json").read_text())["steps"] == said
    assert said >= min(rows, 12)


# --------------------------------------------------------------------------- faults while writing

def _long_case(tmp_path, end=60.0, every=1):
    def change(d):
        d["time"].update(end=end, step=2.0)
        d["output"]["every"] = every

    return make_case(tmp_path, change)


def _files_agree(out) -> dict:
    """The summary, probes.csv and the field file all end on the same step; returns the summary."""
    import meshio

    summary = json.loads((out / "summary.json").read_text())
    rows = (out / "probes.csv").read_text().splitlines()[1:]
    with meshio.xdmf.TimeSeriesReader(str(out / "temperature.xdmf")) as reader:
        reader.read_points_cells()
        last_field = reader.read_data(reader.num_steps - 1)[0] if reader.num_steps else None
    import h5py

    with h5py.File(out / "temperature.h5") as h5:
        datasets = len(h5.get("temperature", {}))
    assert len(rows) == summary["steps"] + 1
    assert float(rows[-1].split(",")[0]) == summary["end_time"] == last_field
    assert datasets == summary["field_steps_written"]
    return summary


def _fail_after(n: int, exc: BaseException):
    calls = {"n": 0}

    def maybe_fail(*args, **kwargs):
        calls["n"] += 1
        if calls["n"] > n:
            raise exc
        return calls.setdefault("real", None)

    return maybe_fail


ENOSPC = OSError(28, "No space left on device")
FAULTS = {  # where the write fails -> (object, attribute, failure, words in the message)
    "field, disk full": ("XdmfSeries", "write", ENOSPC, "the disk is full"),
    "field, I/O error": ("XdmfSeries", "write", OSError(5, "Input/output error"), "Input/output error"),
    "csv, disk full": ("CsvSeries", "_write", ENOSPC, "the disk is full"),
    "hdf5, error": ("XdmfSeries", "write", RuntimeError("HDF5 write failed"), "HDF5 write failed"),
    "blocks, disk full": ("module", "reserve_blocks", ENOSPC, "the disk is full"),
}


@pytest.mark.parametrize("fault", sorted(FAULTS))
@pytest.mark.parametrize("every", [1, 4])
def test_a_write_fault_stops_the_run_with_exit_1_and_leaves_agreeing_files(tmp_path, monkeypatch, capsys, fault,
                                                                           every):
    from heatsoak.core.results import writer

    owner, attr, exc, words = FAULTS[fault]
    target = writer if owner == "module" else getattr(writer, owner)
    real, calls = getattr(target, attr), {"n": 0}
    limit = {"CsvSeries": 30, "XdmfSeries": 9 // every + 2, "module": 5}[owner]

    def failing(*args, **kwargs):
        calls["n"] += 1
        if calls["n"] > limit:
            raise exc
        return real(*args, **kwargs)

    monkeypatch.setattr(target, attr, failing)
    case = _long_case(tmp_path, every=every)
    assert main(["run", str(case), "--quiet", "--out", str(tmp_path / "out")]) == 1
    err = capsys.readouterr().err
    assert "Traceback" not in err and words in err and str(tmp_path / "out") in err
    summary = _files_agree(tmp_path / "out")
    assert summary["status"] == "failed" and words in summary["error"]
    assert 0 < summary["steps"] < 30


def test_a_nearly_full_disk_stops_the_run_before_hdf5_meets_it(tmp_path, monkeypatch, capsys):
    from heatsoak.core.results import writer

    free = {"MiB": 20.0}

    def usage(path):
        free["MiB"] -= 1.0  # the disk fills as the run goes
        return type("U", (), {"free": int(free["MiB"] * 2**20)})()

    monkeypatch.setattr(writer.shutil, "disk_usage", usage)
    assert main(["run", str(_long_case(tmp_path)), "--quiet", "--out", str(tmp_path / "out")]) == 1
    assert "the disk is full" in capsys.readouterr().err
    summary = _files_agree(tmp_path / "out")
    assert summary["status"] == "failed" and 10 < summary["steps"] < 30


def test_a_results_folder_that_cannot_be_written_is_one_clear_line(tmp_path, monkeypatch, capsys):
    from heatsoak.core.results import writer

    def no_permission(*args, **kwargs):
        raise PermissionError(13, "Permission denied")

    (tmp_path / "out").mkdir()
    monkeypatch.setattr(writer.CsvSeries, "__init__", no_permission)  # root ignores chmod: simulate it
    assert main(["run", str(_long_case(tmp_path)), "--quiet", "--out", str(tmp_path / "out")]) == 1
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "cannot write in it (Permission denied)" in err


def test_a_real_small_disk_fills_and_the_run_says_so(tmp_path, capsys):
    import subprocess

    mnt = tmp_path / "small"
    mnt.mkdir()
    if subprocess.run(["mount", "-t", "tmpfs", "-o", "size=3m", "tmpfs", str(mnt)], capture_output=True).returncode:
        pytest.skip("mounting a small tmpfs needs root")
    try:
        case = make_case(tmp_path, lambda d: d["time"].update(end=4000.0, step=5.0), shape=(8, 6, 5))
        assert main(["run", str(case), "--quiet", "--out", str(mnt / "out")]) == 1
        assert "the disk is full" in capsys.readouterr().err
        assert _files_agree(mnt / "out")["status"] == "failed"
    finally:
        subprocess.run(["umount", str(mnt)], check=False)


# --------------------------------------------------------------------------- Ctrl-C

def test_ctrl_c_mid_write_without_signals_leaves_no_half_step(tmp_path, monkeypatch, capsys):
    """In a UI thread Ctrl-C cannot be held back: a step it cuts short leaves every file."""
    from heatsoak.core.results import writer

    real, calls = writer.XdmfSeries.write, {"n": 0}

    class CutXml:  # the XML write of the 6th field step is cut short: its HDF5 data is on disk then
        def __init__(self, f):
            self.f, self.armed = f, True

        def __getattr__(self, name):
            return getattr(self.f, name)

        def write(self, data):
            if self.armed:
                self.armed = False
                self.f.write(data[: len(data) // 2])
                raise KeyboardInterrupt
            return self.f.write(data)

    def interrupted(self, t, T):
        calls["n"] += 1
        if calls["n"] == 6:
            self._xml = CutXml(self._xml)
        return real(self, t, T)

    monkeypatch.setattr(writer.XdmfSeries, "write", interrupted)
    assert main(["run", str(_long_case(tmp_path, every=2)), "--quiet", "--out", str(tmp_path / "out")]) == 130
    summary = _files_agree(tmp_path / "out")
    assert summary["status"] == "cancelled" and summary["steps"] == 8


@pytest.mark.parametrize("command", ["run", "check"])
def test_ctrl_c_during_set_up_exits_130(tmp_path, monkeypatch, capsys, command):
    from heatsoak.core.app import runner

    def interrupted(*args, **kwargs):
        raise KeyboardInterrupt

    monkeypatch.setattr(runner, "load_case", interrupted)
    monkeypatch.setattr(runner, "check_case", interrupted)
    assert main([command, str(_long_case(tmp_path))]) == 130
    assert "interrupted" in capsys.readouterr().err


def test_ctrl_c_at_any_moment_leaves_agreeing_files_and_exit_130(tmp_path):
    import signal
    import subprocess
    import sys
    import time

    case = make_case(tmp_path, lambda d: (d["time"].update(end=6000.0, step=1.0), d["output"].update(every=7)))
    outs = []
    for i, delay in enumerate((0.0, 0.15, 0.4)):
        out = tmp_path / f"out{i}"
        proc = subprocess.Popen([sys.executable, "-m", "heatsoak.core.app.cli", "run", str(case), "--quiet",
                                 "--out", str(out)], stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
        while not (out / "probes.csv").exists() and proc.poll() is None:  # the run has begun writing
            time.sleep(0.01)
        time.sleep(delay)
        proc.send_signal(signal.SIGINT)
        assert proc.wait(timeout=60) == 130, proc.stderr.read().decode()
        assert b"Traceback" not in proc.stderr.read()
        if (out / "summary.json").exists():
            outs.append(_files_agree(out)["status"])
    assert set(outs) == {"cancelled"}


# --------------------------------------------------------------------------- memory

def test_check_states_the_memory_a_run_needs_and_may_use(tmp_path, capsys):
    assert main(["check", str(_long_case(tmp_path))]) == 0
    line = next(x for x in capsys.readouterr().out.splitlines() if x.startswith("memory"))
    assert "MiB estimated" in line and "a run may use at most" in line and "--max-memory" in line


def test_a_case_estimated_above_the_memory_bound_is_refused_before_it_runs(tmp_path, capsys):
    assert main(["run", str(_long_case(tmp_path)), "--quiet", "--max-memory", "0.01",
                 "--out", str(tmp_path / "out")]) == 2
    assert "the case needs more" in capsys.readouterr().err
    assert not (tmp_path / "out").exists()


def test_a_run_that_runs_out_of_memory_fails_cleanly_with_its_steps_kept(tmp_path, monkeypatch, capsys):
    from heatsoak.core.results import record

    real, calls = record.Recorder.record, {"n": 0}

    def grows(self, t, T):
        calls["n"] += 1
        if calls["n"] == 7:
            raise MemoryError
        return real(self, t, T)

    monkeypatch.setattr(record.Recorder, "record", grows)
    assert main(["run", str(_long_case(tmp_path, every=4)), "--quiet", "--out", str(tmp_path / "out")]) == 1
    assert "out of memory" in capsys.readouterr().err
    summary = _files_agree(tmp_path / "out")
    assert summary["status"] == "failed" and "out of memory" in summary["error"] and summary["steps"] == 5
