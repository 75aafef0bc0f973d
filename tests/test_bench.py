"""``heatsoak bench`` at its smallest size: it runs, prints its table and writes every JSON key."""

import contextlib
import io
import json

import pytest
from heatsoak.core.app import bench
from heatsoak.core.app.cli import main
from heatsoak.core.errors import InputError

KEYS = {"size", "elements", "nodes", "assemble_s", "reassemble_s", "skfem_assemble_s", "factor_s", "step_s",
        "bare_solve_s", "run_1000_s", "solver", "peak_rss_mb", "fourier", "dt_s", "solver_reason", "iterations",
        "steps", "fields_written", "field_every_step_overhead", "assemble_peak_mb", "compare", "energy_imbalance",
        "run_solver", "krylov_spmv_s", "machine"}


@pytest.fixture(scope="module")
def tiny_run(tmp_path_factory):
    out = tmp_path_factory.mktemp("bench") / "bench.json"
    printed = io.StringIO()
    with contextlib.redirect_stdout(printed):
        code = main(["bench", "--sizes", "tiny", "--steps", "20", "--json", str(out)])
    return out, code, printed.getvalue()


def test_the_tiny_benchmark_runs_and_writes_one_record_per_time_step(tiny_run):
    out, code, _ = tiny_run
    assert code == 0
    records = json.loads(out.read_text())
    assert [r["fourier"] for r in records] == list(bench.FOURIERS)
    for r in records:
        assert KEYS <= set(r)
        assert r["size"] == "tiny" and r["elements"] == 6 * 10**3 and r["nodes"] == 11**3
        assert r["steps"] == 20 and r["fields_written"] == 2  # t = 0 and the last step (every 50)
        assert 0 < r["reassemble_s"] < r["assemble_s"]
        assert r["bare_solve_s"] <= r["step_s"]
        assert r["solver"] in r["compare"] and r["compare"][r["solver"]] > 0
        assert r["peak_rss_mb"] > 10
        assert r["energy_imbalance"] < 1e-9  # heat stored = heat in (conservation)
        assert r["run_solver"] == r["solver"]
        assert 0 < r["field_every_step_overhead"] < 10


def test_the_table_has_a_row_per_size_and_phase(tiny_run):
    records = json.loads(tiny_run[0].read_text())
    rows = bench.table_rows(records)
    phases = [row[1] for row in rows]
    assert phases[:2] == ["assemble K+M (first)", "re-assemble K+M"]
    for fo in bench.FOURIERS:
        assert any(p.startswith(f"one step, Fo {fo:g}") for p in phases)
        assert any(p.startswith(f"20 steps, Fo {fo:g}") for p in phases)
    printed = tiny_run[2]
    assert bench.format_table(rows).splitlines()[0] in printed.splitlines()
    assert sum(line.startswith("tiny (6000 cells)") for line in printed.splitlines()) == len(rows)


def test_an_unknown_size_is_refused_with_the_allowed_ones():
    with pytest.raises(InputError, match="tiny, small, medium, large"):
        bench.parse_sizes("small,huge")


def test_the_machine_line_names_cores_and_solvers():
    line = bench.machine()
    assert "cores" in line and "scipy" in line and "direct solver" in line


def test_the_reduced_rows_measure_build_answer_and_error_against_the_full_run(tmp_path):
    out = tmp_path / "reduced.json"
    printed = io.StringIO()
    with contextlib.redirect_stdout(printed):
        assert main(["bench", "--sizes", "tiny", "--steps", "30", "--reduced-only", "--json", str(out)]) == 0
    (r,) = json.loads(out.read_text())
    assert r["size"] == "reduced-tiny" and r["steps"] == 30 and r["basis"] > 0
    for label in ("own", "changed"):
        assert r[f"{label}_error_K"] <= 1e-3 * r[f"{label}_span_K"]
        assert r[f"{label}_estimate_K"] >= r[f"{label}_error_K"] / 2
        assert r[f"{label}_answer_s"] > 0
    assert "build reduced model" in printed.getvalue()
