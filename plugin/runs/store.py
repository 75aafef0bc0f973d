"""Runs kept for comparison: their case, label, files and curves, until discarded."""

from __future__ import annotations

import csv
import json
import shutil
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
from heatsoak.core.results.result_field import FieldSeries
from heatsoak.plugin.runs.labels import run_label


def read_probes_csv(path) -> tuple:
    """``(times (n,), {probe name: values (n,)})`` from a run's probes.csv."""
    with open(path, newline="", encoding="utf-8") as f:
        rows = list(csv.reader(f))
    header, body = rows[0], np.array(rows[1:], dtype=float).reshape(-1, len(rows[0]))
    return body[:, 0], {name: body[:, i] for i, name in enumerate(header[1:], start=1)}


def read_regions_csv(path) -> dict:
    """``{region: {"time", "mean", "min", "max": (n,) arrays}}`` from a run's regions.csv."""
    with open(path, newline="", encoding="utf-8") as f:
        rows = list(csv.DictReader(f))
    out: dict = {}
    for row in rows:
        r = out.setdefault(row["region"], {"time": [], "mean": [], "min": [], "max": []})
        for k in r:
            r[k].append(float(row[k]))
    return {name: {k: np.array(v) for k, v in r.items()} for name, r in out.items()}


@dataclass
class Run:
    """One finished (or cancelled) run.

    Attributes
    ----------
    id : int
    label : str
        What changed from the run before it.
    case : dict
        The case data it ran.
    out_dir : Path
        Its results folder (probes.csv, regions.csv, summary.json, temperature.xdmf/.h5, case.toml).
    summary : dict
    """

    id: int
    label: str
    case: dict
    out_dir: Path
    summary: dict
    times: np.ndarray = field(default_factory=lambda: np.empty(0))
    probes: dict = field(default_factory=dict)
    regions: dict = field(default_factory=dict)
    series: FieldSeries | None = None
    mesh: object = None

    @property
    def status(self) -> str:
        return self.summary.get("status", "failed")

    def load(self) -> Run:
        """Read the curves and open the field of the results folder."""
        if (self.out_dir / "probes.csv").is_file():
            self.times, self.probes = read_probes_csv(self.out_dir / "probes.csv")
        if (self.out_dir / "regions.csv").is_file():
            self.regions = read_regions_csv(self.out_dir / "regions.csv")
        self.series = FieldSeries(self.out_dir)
        return self

    def row(self) -> dict:
        """What the run list shows."""
        s = self.summary
        return {"id": self.id, "label": self.label, "status": self.status, "steps": s.get("steps", 0),
                "end_time": s.get("end_time", 0.0), "frames": 0 if self.series is None else len(self.series)}


class RunStore:
    """The runs of a session, in order; each labelled by its difference from the previous one."""

    def __init__(self):
        self.runs: list[Run] = []
        self._next = 1

    def next_id(self) -> int:
        return self._next

    def add(self, case: dict, out_dir, summary: dict, mesh=None) -> Run:
        """Keep a finished run of ``mesh``; its label compares its case with the last run's."""
        previous = self.runs[-1].case if self.runs else None
        run = Run(self._next, run_label(previous, case), case, Path(out_dir), summary, mesh=mesh).load()
        self._next += 1
        self.runs.append(run)
        return run

    def get(self, run_id) -> Run | None:
        return next((r for r in self.runs if r.id == run_id), None)

    def discard(self, run_id) -> None:
        """Forget a run and delete its results folder."""
        run = self.get(run_id)
        if run is None:
            return
        self.runs.remove(run)
        if run.series is not None:
            run.series.close()
        shutil.rmtree(run.out_dir, ignore_errors=True)

    def rows(self) -> list:
        return [r.row() for r in self.runs]


def read_summary(out_dir) -> dict:
    path = Path(out_dir) / "summary.json"
    return json.loads(path.read_text(encoding="utf-8")) if path.is_file() else {"status": "failed"}
