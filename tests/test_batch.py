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
