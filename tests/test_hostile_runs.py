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
