"""`heatsoak run` with several case files: a batch, each case in its own results folder."""

import json

from box_case import make_case
from heatsoak.core.app.cli import main


def _case(tmp_path, name, end):
    folder = tmp_path / name
    folder.mkdir()

    def change(d):
        d["time"]["end"] = end

    return make_case(folder, change)


def test_a_batch_runs_every_case_into_its_own_folder(tmp_path, capsys):
    a, b = _case(tmp_path, "a", 20), _case(tmp_path, "b", 40)
    b = b.rename(b.with_name("longer.toml"))
    assert main(["run", str(a), str(b), "--out", str(tmp_path / "out"), "--quiet"]) == 0
    ends = {name: json.loads((tmp_path / "out" / name / "summary.json").read_text())["end_time"]
            for name in ("case", "longer")}
    assert ends == {"case": 20.0, "longer": 40.0}


def test_a_batch_with_one_bad_case_runs_nothing_and_names_the_problem(tmp_path, capsys):
    good = _case(tmp_path, "a", 20)
    bad = _case(tmp_path, "b", 20)
    bad.write_text(bad.read_text().replace('kind = "convection"', 'kind = "convektion"'))
    assert main(["run", str(good), str(bad), "--out", str(tmp_path / "out"), "--quiet"]) == 2
    assert "convektion" in capsys.readouterr().err
    assert not (tmp_path / "out").exists()


def test_same_named_cases_get_distinct_folders_and_both_results_are_kept(tmp_path, capsys):
    a, b = _case(tmp_path, "a", 20), _case(tmp_path, "b", 40)
    assert main(["run", str(a), str(b), "--out", str(tmp_path / "out"), "--quiet"]) == 0
    ends = {name: json.loads((tmp_path / "out" / name / "summary.json").read_text())["end_time"]
            for name in ("a-case", "b-case")}
    assert ends == {"a-case": 20.0, "b-case": 40.0}
    batch = json.loads((tmp_path / "out" / "batch.json").read_text())
    assert [r["status"] for r in batch["cases"]] == ["complete", "complete"]


def test_the_same_case_named_twice_is_refused_before_anything_runs(tmp_path, capsys):
    a = _case(tmp_path, "a", 20)
    assert main(["run", str(a), str(tmp_path / "a" / ".." / "a" / "case.toml"), "--out", str(tmp_path / "o")]) == 2
    assert "named twice" in capsys.readouterr().err
    assert not (tmp_path / "o").exists()


def test_a_case_failing_at_run_time_does_not_stop_the_others_and_the_summary_says_so(tmp_path, capsys, monkeypatch):
    from heatsoak.core.results import writer

    cases = [_case(tmp_path, n, 20) for n in ("a", "b", "c")]
    real = writer.ResultFiles.__init__

    def broken_for_b(self, out_dir, *args, **kwargs):
        if "b-case" in str(out_dir):
            raise OSError(28, "No space left on device")  # not a ResultsError: an unforeseen fault
        return real(self, out_dir, *args, **kwargs)

    monkeypatch.setattr(writer.ResultFiles, "__init__", broken_for_b)
    assert main(["run", *map(str, cases), "--out", str(tmp_path / "out2"), "--quiet"]) == 1
    out = capsys.readouterr().out
    assert "batch: 3 cases, 2 complete, 1 failed" in out
    rows = json.loads((tmp_path / "out2" / "batch.json").read_text())["cases"]
    assert [r["status"] for r in rows] == ["complete", "failed", "complete"]
    assert "No space left on device" in rows[1]["error"]
    assert (tmp_path / "out2" / "c-case" / "summary.json").exists()
