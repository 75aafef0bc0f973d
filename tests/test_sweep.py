"""heatsoak sweep on a local dask cluster of two processes: rows, failures, reruns, Ctrl-C, a lost worker."""

from __future__ import annotations

import csv
import os
import signal
import subprocess
import sys
import threading
import time
from pathlib import Path

import numpy as np
import pytest
from box_case import make_case
from sweep_fixtures import VARY, local_cluster, long_case, read_table, wait_for_processing, worker_pids

pytest.importorskip("distributed")

from heatsoak.core.app.cli import main  # noqa: E402
from heatsoak.core.app.sweep.command import run_sweep  # noqa: E402
from heatsoak.core.app.sweep.plan import plan_sweep  # noqa: E402


@pytest.fixture(scope="module")
def cluster():
    """One local cluster for the module (its start is the slow part); yields its scheduler address."""
    cl, client = local_cluster()
    yield cl.scheduler_address, client
    client.close()
    cl.close()


def test_a_2x3_sweep_gives_the_rows_of_six_separate_runs(tmp_path, capsys):
    case = make_case(tmp_path)
    out = tmp_path / "sweep"
    code = main(["sweep", str(case), "--vary", VARY[0], "--vary", VARY[1], "--out", str(out), "--workers", "2"])
    assert code == 0
    rows = read_table(out / "sweep.csv")
    assert [(r["boundary.xmax.h"], r["material.right.conductivity"]) for r in rows] == [
        ("5", "20.0"), ("5", "100.0"), ("5", "200.0"), ("50", "20.0"), ("50", "100.0"), ("50", "200.0")]
    assert {r["status"] for r in rows} == {"complete"} and {r["model"] for r in rows} == {"full"}
    header = list(rows[0])
    assert header[:4] == ["variant", "boundary.xmax.h", "material.right.conductivity", "status"]
    for col in ("core.end", "core.max", "core.crossing", "far.end", "far.max", "far.crossing",
                "region.left.max", "region.right.max", "wall_s"):
        assert col in header
    for r in rows:  # each variant file runs alone with `heatsoak run`, and gives the same numbers
        alone = tmp_path / "alone" / r["variant"]
        assert main(["run", str(out / "variants" / f"{r['variant']}.toml"), "--out", str(alone), "--quiet"]) == 0
        with open(alone / "probes.csv", newline="") as f:
            series = list(csv.reader(f))
        assert (out / r["variant"] / "probes.csv").read_text() == (alone / "probes.csv").read_text()
        core = [float(s[1]) for s in series[1:]]
        assert float(r["core.end"]) == pytest.approx(core[-1], rel=1e-12)
        assert float(r["core.max"]) == pytest.approx(max(core), rel=1e-12)
        assert r["far.crossing"] == ""  # far has no threshold
        assert 30.0 < float(r["core.max"]) and float(r["core.crossing"]) > 0  # core crosses 30 degC
    # the key does what it says: more convection at xmax cools the far probe
    assert float(rows[3]["far.end"]) < float(rows[0]["far.end"])
    assert (out / "plots" / "probes.png").stat().st_size > 1000
    assert len(list((out / "plots").glob("core.max-vs-*.png"))) == 2
    printed = capsys.readouterr().out
    assert "6 variants: 6 complete" in printed


def test_a_failing_variant_is_recorded_and_the_others_complete(tmp_path, cluster):
    case = make_case(tmp_path)
    plan = plan_sweep(case, ["material.right.conductivity=[15.0, -1.0, 30.0]"], out_dir=tmp_path / "s")
    result = run_sweep(plan, tmp_path / "s", scheduler=cluster[0])
    rows = read_table(result.table)
    assert [r["status"] for r in rows] == ["complete", "failed", "complete"]
    assert "material.right.conductivity" in rows[1]["error"] and "-1" in rows[1]["error"]
    assert rows[1]["core.end"] == "" and rows[0]["core.end"] != ""


def test_a_rerun_skips_complete_variants_and_reruns_changed_ones(tmp_path, cluster):
    case = make_case(tmp_path)
    out = tmp_path / "s"
    first = run_sweep(plan_sweep(case, ["boundary.xmax.h=[5, 50]"], out_dir=out), out, scheduler=cluster[0])
    assert first.skipped == [] and [r.status for r in first.rows] == ["complete", "complete"]
    stamp = (out / first.rows[0].variant / "summary.json").stat().st_mtime_ns
    again = run_sweep(plan_sweep(case, ["boundary.xmax.h=[5, 50, 500]"], out_dir=out), out, scheduler=cluster[0])
    assert again.skipped == [first.rows[0].variant, first.rows[1].variant]
    assert (out / first.rows[0].variant / "summary.json").stat().st_mtime_ns == stamp
    assert [r["status"] for r in read_table(out / "sweep.csv")] == ["complete"] * 3


def test_the_mesh_and_pattern_are_built_once_per_worker(tmp_path, cluster):
    case = make_case(tmp_path)
    result = run_sweep(plan_sweep(case, VARY, out_dir=tmp_path / "s"), tmp_path / "s", scheduler=cluster[0])
    fresh = [r for r in result.rows if not r.mesh_reused]
    assert len(fresh) <= 2 and len({r.worker for r in fresh}) == len(fresh)  # at most one read per worker process


def test_a_schedule_only_sweep_is_answered_by_one_reduced_model_without_the_engine(tmp_path, capsys):
    case = make_case(tmp_path)
    out = tmp_path / "s"
    nowhere = "tcp://127.0.0.1:9"  # nothing listens there: the engine is never asked
    code = main(["sweep", str(case), "--vary", "boundary.xmin.ramp.over=[30, 90]", "--vary",
                 "initial.temperature=[20, 40]", "--out", str(out), "--scheduler", nowhere])
    assert code == 0
    assert "differ only in schedules" in capsys.readouterr().out
    rows = read_table(out / "sweep.csv")
    assert [r["model"] for r in rows] == ["reduced"] * 4 and {r["status"] for r in rows} == {"complete"}
    for r in rows:  # against the full finite element run of the same variant file
        alone = tmp_path / "alone" / r["variant"]
        assert main(["run", str(out / "variants" / f"{r['variant']}.toml"), "--out", str(alone), "--quiet"]) == 0
        full = np.loadtxt(alone / "probes.csv", delimiter=",", skiprows=1)
        reduced = np.loadtxt(out / r["variant"] / "probes.csv", delimiter=",", skiprows=1)
        assert reduced.shape == full.shape
        np.testing.assert_allclose(reduced, full, rtol=0, atol=1e-4)  # K, on a 160 K rise
        assert (out / r["variant"] / "temperature.xdmf").is_file()


def test_full_runs_every_variant_even_schedule_only_ones(tmp_path, cluster):
    case = make_case(tmp_path)
    plan = plan_sweep(case, ["boundary.xmin.ramp.over=[30, 90]"], out_dir=tmp_path / "s")
    result = run_sweep(plan, tmp_path / "s", scheduler=cluster[0], full=True)
    assert [(r.model, r.status) for r in result.rows] == [("full", "complete")] * 2


def test_stopping_cancels_the_rest_and_writes_the_table_so_far(tmp_path, cluster):
    case = long_case(tmp_path, step=0.2)
    seen = []
    plan = plan_sweep(case, ["boundary.xmax.h=[5, 10, 20, 40, 80, 160]"], out_dir=tmp_path / "s")
    result = run_sweep(plan, tmp_path / "s", scheduler=cluster[0], on_row=seen.append,
                       should_stop=lambda: len(seen) >= 1)
    assert result.status == "cancelled"
    statuses = [r["status"] for r in read_table(result.table)]
    assert len(statuses) == 6 and statuses.count("complete") >= 1 and statuses.count("cancelled") >= 3
    stopped = [r for r in result.rows if r.status == "cancelled" and r.probes]  # stopped mid-run, curves so far
    for r in stopped:
        assert r.probes["core"]["end"] is not None


def test_ctrl_c_stops_the_sweep_command_with_the_table_written(tmp_path, cluster):
    case = long_case(tmp_path, step=0.2)
    out = tmp_path / "s"
    cmd = [sys.executable, "-m", "heatsoak.core.app.cli", "sweep", str(case), "--vary",
           "boundary.xmax.h=[5, 10, 20, 40, 80, 160]", "--out", str(out), "--scheduler", cluster[0]]
    # a shell's background job ignores SIGINT and its children inherit that: give the command Python's default
    default = lambda: signal.signal(signal.SIGINT, signal.SIG_DFL)  # noqa: E731
    proc = subprocess.Popen(cmd, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, env=os.environ,
                            preexec_fn=default)
    first = proc.stdout.readline()
    assert first.startswith("running 6 variant(s) on 2 worker(s)"), first + proc.stderr.read()
    first = proc.stdout.readline()  # the first finished variant
    assert first.startswith("[1/6]"), first + proc.stderr.read()
    proc.send_signal(signal.SIGINT)
    _, err = proc.communicate(timeout=60)
    assert proc.returncode == 130, err
    statuses = [r["status"] for r in read_table(out / "sweep.csv")]
    assert len(statuses) == 6 and "cancelled" in statuses and "complete" in statuses
    assert "Traceback" not in err


def test_the_local_cluster_listens_on_loopback_only_and_serves_no_dashboard(cluster):
    import urllib.error
    import urllib.request

    psutil = pytest.importorskip("psutil")
    address, client = cluster
    pids = [*worker_pids(client).values(), os.getpid()]
    listening = {(c.laddr.ip, c.laddr.port) for pid in pids for c in psutil.Process(pid).net_connections()
                 if c.status == psutil.CONN_LISTEN}
    assert listening and {ip for ip, _ in listening} == {"127.0.0.1"}
    assert address.startswith("tcp://127.0.0.1:")
    http = client.scheduler_info().get("services", {}).get("dashboard")
    if http:  # the scheduler's health endpoint answers; the dashboard pages do not exist
        assert urllib.request.urlopen(f"http://127.0.0.1:{http}/health", timeout=5).read() == b"ok"
        with pytest.raises(urllib.error.HTTPError):
            urllib.request.urlopen(f"http://127.0.0.1:{http}/status", timeout=5)


def test_sweep_needs_something_to_vary(tmp_path, capsys):
    case = make_case(tmp_path)
    assert main(["sweep", str(case), "--out", str(tmp_path / "s")]) == 2
    assert "--vary" in capsys.readouterr().err
    assert main(["sweep", str(case), "--vary", "time.step=0.5", "--out", str(tmp_path / "s")]) == 2
    assert "TOML array" in capsys.readouterr().err
    assert not Path(tmp_path / "s" / "sweep.csv").exists()


def test_a_worker_killed_mid_sweep_gets_its_variant_run_again(tmp_path, cluster):
    # last of the tests on the module's cluster: its nanny restarts the killed worker meanwhile
    address, client = cluster
    case = long_case(tmp_path)
    plan = plan_sweep(case, ["boundary.xmax.h=[5, 10, 20]"], out_dir=tmp_path / "s")
    pids, box = worker_pids(client), {}
    runner = threading.Thread(target=lambda: box.update(result=run_sweep(plan, tmp_path / "s", scheduler=address)))
    runner.start()
    victim, key = wait_for_processing(client)
    time.sleep(0.3)  # well inside its run
    os.kill(pids[victim], signal.SIGKILL)
    runner.join(timeout=120)
    result = box["result"]
    assert [r.status for r in result.rows] == ["complete"] * 3
    ran_again = next(r for r in result.rows if key.startswith(f"heatsoak-{r.variant}-"))
    assert ran_again.worker.rsplit(":", 1)[1] != str(pids[victim])
    assert result.table.is_file()


@pytest.mark.slow
def test_the_sweep_bench_times_the_same_variants_both_ways(cluster):
    from heatsoak.core.app.sweep.bench import measure_reduced, measure_sweep, sweep_rows

    record = measure_sweep(workers=2, cubes=3, steps=5, scheduler=cluster[0])
    record["reduced"] = measure_reduced(cubes=3, steps=5)
    assert record["reduced"]["variants"] == 8 and record["reduced"]["statuses"] == ["complete"]
    assert record["variants"] == 8 and record["statuses"] == ["complete"]
    assert record["sequential_s"] > 0 and record["cluster_s"] > 0
    assert record["ratio"] == pytest.approx(record["sequential_s"] / record["cluster_s"])
    rows = sweep_rows(record, lambda s: f"{s:.3g} s")
    assert rows[0][1] == "2 workers, local cluster" and rows[0][4].startswith("speed-up ")
    assert rows[2][1] == "one reduced model, this process" and rows[2][2].endswith("variants/s")
