"""heatsoak sweep sent to a running cluster: a dask scheduler and workers started here, on 127.0.0.1."""

from __future__ import annotations

import os
import shutil
import signal
import socket
import subprocess
import sys
import time
from pathlib import Path

import pytest
from box_case import make_case
from sweep_fixtures import VARY, read_table

pytest.importorskip("distributed")

from heatsoak.core.app.cli import main  # noqa: E402

#: Ports this test may use for its scheduler.
PORTS = range(18740, 18760)


def _free_port() -> int:
    for port in PORTS:
        with socket.socket() as s:
            try:
                s.bind(("127.0.0.1", port))
            except OSError:
                continue
            return port
    pytest.skip(f"no free port in {PORTS.start}-{PORTS.stop - 1}")


def _dask(*args) -> list:
    exe = shutil.which("dask")
    return [exe, *args] if exe else [sys.executable, "-m", "distributed.cli.dask_" + args[0], *args[1:]]


def _start(cmd, log: Path):
    out = open(log, "w")
    return subprocess.Popen(cmd, stdout=out, stderr=subprocess.STDOUT, start_new_session=True, env=os.environ), out


def _stop(proc) -> None:
    if proc.poll() is None:
        os.killpg(proc.pid, signal.SIGTERM)
        try:
            proc.wait(timeout=15)
        except subprocess.TimeoutExpired:
            os.killpg(proc.pid, signal.SIGKILL)
            proc.wait()


@pytest.fixture
def running_cluster(tmp_path):
    """``dask scheduler`` and ``dask worker --nworkers 2`` on 127.0.0.1; yields the scheduler address."""
    distributed = pytest.importorskip("distributed")
    address = f"tcp://127.0.0.1:{_free_port()}"
    port = address.rsplit(":", 1)[1]
    procs = [_start(_dask("scheduler", "--host", "127.0.0.1", "--port", port, "--dashboard-address", "127.0.0.1:0"),
                    tmp_path / "scheduler.log")]
    try:
        procs.append(_start(_dask("worker", address, "--nworkers", "2", "--nthreads", "1", "--host", "127.0.0.1"),
                            tmp_path / "worker.log"))
        deadline = time.monotonic() + 60
        while True:
            try:
                with distributed.Client(address, timeout=5) as client:
                    client.wait_for_workers(2, timeout=max(deadline - time.monotonic(), 1))
                break
            except OSError:
                if time.monotonic() > deadline:
                    raise
                time.sleep(0.3)
        yield address
    finally:
        for proc, log in reversed(procs):
            _stop(proc)
            log.close()


def test_the_same_sweep_runs_on_a_cluster_started_apart(tmp_path, running_cluster, capsys):
    case = make_case(tmp_path)
    out = tmp_path / "s"
    args = ["sweep", str(case), "--vary", VARY[0], "--vary", VARY[1], "--out", str(out), "--scheduler", running_cluster]
    assert main(args) == 0
    rows = read_table(out / "sweep.csv")
    assert len(rows) == 6 and {r["status"] for r in rows} == {"complete"}
    for r in rows:
        alone = tmp_path / "alone" / r["variant"]
        assert main(["run", str(out / "variants" / f"{r['variant']}.toml"), "--out", str(alone), "--quiet"]) == 0
        assert (out / r["variant"] / "probes.csv").read_text() == (alone / "probes.csv").read_text()
        assert (out / r["variant"] / "regions.csv").read_text() == (alone / "regions.csv").read_text()
    assert "6 variants: 6 complete" in capsys.readouterr().out


def test_an_unreachable_scheduler_is_a_clear_error():
    from heatsoak.core.app.sweep.engine import EngineError, open_engine

    address = f"tcp://127.0.0.1:{_free_port()}"
    with pytest.raises(EngineError, match=f"--scheduler {address}: cannot reach a dask scheduler"):
        with open_engine(scheduler=address, timeout=1.0):
            pass


def test_a_scheduler_without_workers_is_a_clear_error():
    distributed = pytest.importorskip("distributed")
    from heatsoak.core.app.sweep.engine import EngineError, open_engine

    with distributed.LocalCluster(n_workers=0, host="127.0.0.1", dashboard_address=None,
                                  scheduler_kwargs={"dashboard": False, "dashboard_address": "127.0.0.1:0"}) as empty:
        with pytest.raises(EngineError, match="the scheduler has no workers .* dask worker tcp://127.0.0.1:"):
            with open_engine(scheduler=empty.scheduler_address, timeout=1.0):
                pass
