"""``heatsoak whatif``: files as ``run`` writes them, the model cache, staleness, a published
solution answered through the reduced model, and ``--find`` confirmed by a full run."""

import csv
import json

import numpy as np
import pytest
from box_case import BASE, make_case, write_box_msh
from exact_solutions import semi_infinite_ramp
from heatsoak.core.app.cli import main
from heatsoak.core.case.casefile import save_case


def _csv(path):
    with open(path, newline="") as f:
        return list(csv.reader(f))


def _summary(folder):
    return json.loads((folder / "summary.json").read_text())


@pytest.fixture(scope="module")
def box(tmp_path_factory):
    return make_case(tmp_path_factory.mktemp("whatif"), shape=(6, 4, 3))


def test_whatif_writes_the_run_files_and_matches_a_full_run(box, tmp_path):
    change = "boundary.xmin.ramp={ start = 20, end = 250, at = 0, over = 30 }"
    assert main(["whatif", str(box), "--set", change, "--out", str(tmp_path / "w"), "--quiet"]) == 0
    assert main(["whatif", str(box), "--set", change, "--out", str(tmp_path / "f"), "--quiet", "--field"]) == 0
    box2 = box.parent / "changed.toml"
    data = json.loads(json.dumps(BASE))
    data["boundary"]["xmin"]["ramp"] = {"start": 20, "end": 250, "at": 0, "over": 30}
    save_case(data, box2)
    assert main(["run", str(box2), "--out", str(tmp_path / "r"), "--quiet"]) == 0
    w, r = _csv(tmp_path / "w" / "probes.csv"), _csv(tmp_path / "r" / "probes.csv")
    assert w[0] == r[0] and len(w) == len(r)
    a, b = np.array(w[1:], float), np.array(r[1:], float)
    span = np.ptp(b[:, 1:])
    assert np.abs(a - b).max() <= 1e-3 * span
    rw, rr = _csv(tmp_path / "w" / "regions.csv"), _csv(tmp_path / "r" / "regions.csv")
    assert rw[0] == rr[0] and [row[1] for row in rw] == [row[1] for row in rr]
    stats = lambda rows: np.array([row[2:] for row in rows[1:]], float)  # noqa: E731
    assert np.abs(stats(rw) - stats(rr)).max() <= 1e-3 * span
    s = _summary(tmp_path / "w")
    assert set(_summary(tmp_path / "r")) <= set(s)
    red = s["reduced"]
    assert {"basis", "error_estimate", "build_s", "answer_s", "reused"} <= set(red)
    assert isinstance(red["basis"], int) and red["basis"] > 0 and isinstance(red["reused"], bool)
    assert red["error_estimate"] >= np.abs(a - b).max() / 2
    assert abs(s["energy"]["stored_J"] - _summary(tmp_path / "r")["energy"]["stored_J"]) <= 1e-3 * abs(
        s["energy"]["stored_J"])
    run_terr, terr = _summary(tmp_path / "r")["time_error"], s["time_error"]  # the run's step-doubling estimate
    assert run_terr.keys() == terr.keys()
    assert all(abs(terr[p] - run_terr[p]) <= 1e-3 * span for p in terr) and max(terr.values()) > 0
    assert not (tmp_path / "w" / "temperature.xdmf").exists()
    assert (tmp_path / "f" / "temperature.xdmf").exists()


def test_the_first_whatif_builds_later_ones_reuse_and_a_changed_h_rebuilds_saying_why(tmp_path, capsys):
    case = make_case(tmp_path)
    runs = [[], ["boundary.zmin.value=900"], ["boundary.xmax.h=40"], []]
    reused = []
    for i, sets in enumerate(runs):
        args = ["whatif", str(case), "--out", str(tmp_path / f"o{i}")]
        for s in sets:
            args += ["--set", s]
        assert main(args) == 0
        reused.append(_summary(tmp_path / f"o{i}")["reduced"]["reused"])
    assert reused == [False, True, False, False]
    err = capsys.readouterr().err
    assert "boundary.xmax.h changed from 15.0 to 40.0" in err
    assert (tmp_path / ".heatsoak-cache" / "case.reduced.npz").is_file()


def test_a_bad_set_names_the_key(box, tmp_path, capsys):
    assert main(["whatif", str(box), "--set", "boundary.xmin.ramp.over=-5", "--out", str(tmp_path)]) == 2
    assert "boundary.xmin.ramp" in capsys.readouterr().err


def test_a_ramped_end_through_whatif_follows_the_i2erfc_solution(tmp_path):
    # Carslaw & Jaeger, Conduction of Heat in Solids, 2nd ed., §2.5 (from memory): a semi-infinite
    # solid whose surface rises at rate r: T = 4 r t i2erfc(x / (2 sqrt(alpha t))). The base case
    # holds the end at 0; the what-if sets the ramp. Bar as in test_validation_semi_infinite
    # (n = 100, Crank-Nicolson, dt = 0.5 s), where the full run's error is 0.0146 K; bound 0.022 K.
    alpha, k = 1e-5, 10.0
    write_box_msh(tmp_path / "bar.msh", shape=(100, 1, 1), size=(0.25, 0.0025, 0.0025))
    xs = [2.5, 5.0, 10.0, 20.0]
    data = {"mesh": {"file": "bar.msh", "unit": "mm"},
            "material": {"*": {"density": k / alpha, "specific_heat": 1.0, "conductivity": k}},
            "initial": {"temperature": 0.0}, "boundary": {"xmin": {"kind": "temperature", "value": 0.0}},
            "time": {"end": 100.0, "step": 0.5, "theta": 0.5},
            "probe": [{"name": f"x{x:g}", "at": [x, 1.25, 1.25]} for x in xs]}
    save_case(data, tmp_path / "bar.toml")
    ramp = "boundary.xmin.ramp={ start = 0, end = 100, at = 0, over = 100 }"
    assert main(["whatif", str(tmp_path / "bar.toml"), "--set", ramp, "--out", str(tmp_path / "o"), "--quiet"]) == 0
    rows = np.array(_csv(tmp_path / "o" / "probes.csv")[1:], float)
    t = rows[:, 0]
    for j, x in enumerate(xs):
        keep = t >= 25.0
        exact = semi_infinite_ramp(np.full(keep.sum(), x / 1000.0), t[keep], alpha, 1.0)
        assert np.abs(rows[keep, j + 1] - exact).max() < 0.022
    # and the error estimate covers at least half the difference to the full run of the same case
    data["boundary"]["xmin"] = {"kind": "temperature", "ramp": {"start": 0, "end": 100, "at": 0, "over": 100}}
    save_case(data, tmp_path / "ramped.toml")
    assert main(["run", str(tmp_path / "ramped.toml"), "--out", str(tmp_path / "r"), "--quiet"]) == 0
    full = np.array(_csv(tmp_path / "r" / "probes.csv")[1:], float)
    assert _summary(tmp_path / "o")["reduced"]["error_estimate"] >= np.abs(full - rows).max() / 2


def test_find_gives_the_shortest_ramp_keeping_a_probe_below_a_limit_confirmed_by_a_full_run(box, tmp_path, capsys):
    # The limit is the full model's own maximum for a 60 s ramp, so the edge must come out at 60 s.
    assert main(["run", str(box), "--out", str(tmp_path / "r"), "--quiet"]) == 0
    core = np.array(_csv(tmp_path / "r" / "probes.csv")[1:], float)[:, 1]
    limit = float(core.max())
    args = ["whatif", str(box), "--out", str(tmp_path / "f"), "--find", "boundary.xmin.ramp.over=10:120",
            "--goal", f"max(core) < {limit!r}"]
    assert main(args) == 0
    out = capsys.readouterr().out
    assert "answer: boundary.xmin.ramp.over =" in out and "confirming full run" in out
    found = json.loads((tmp_path / "f" / "find.json").read_text())
    assert found["edge"] > found["fails_at"]  # longer ramps keep the core cooler
    assert 60.0 <= found["edge"] < 61.0  # on the safe side of the full model's edge, by the estimate
    full, est = found["full_run"], found["reduced"]["error_estimate"]
    assert full["holds"] and 0 <= full["margin"] <= 2 * est + 1e-6
