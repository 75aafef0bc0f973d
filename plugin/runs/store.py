"""Runs kept for comparison: their case, label, files and curves, until discarded."""

from __future__ import annotations

import csv
import hashlib
import json
import shutil
import weakref
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
    mesh_key: str = ""
    mesh_name: str = ""
    base_id: int | None = None

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
                "end_time": s.get("end_time", 0.0), "frames": 0 if self.series is None else len(self.series),
                "mesh": self.mesh_name, "base": self.base_id}


#: Keys already computed, per mesh object (a mesh is immutable; hashing 1M cells takes about 0.3 s).
_KEYS: weakref.WeakKeyDictionary = weakref.WeakKeyDictionary()


def mesh_key(mesh) -> str:
    """Identity of a mesh by what it holds, not by the object in memory: a digest of its node
    coordinates [m] (so the length unit it was read in counts), its cells and their regions.
    The same file opened again gives the same key; any other mesh, another one. Computed once
    per mesh object."""
    key = _KEYS.get(mesh)
    if key is None:
        digest = hashlib.blake2b(digest_size=16)
        for array in (mesh.points, mesh.cells, mesh.cell_region):
            a = np.ascontiguousarray(array)
            digest.update(f"{a.dtype.str}{a.shape}".encode())
            digest.update(a.data)
        key = _KEYS[mesh] = digest.hexdigest()
    return key


def mesh_label(mesh) -> str:
    """The mesh's file name (or a plain word when it came from no file)."""
    source = str(getattr(mesh, "source", "") or "")
    return Path(source).name if source else "a mesh"


class RunStore:
    """The runs of a session, in order; each labelled by its difference from the previous one."""

    def __init__(self):
        self.runs: list[Run] = []
        self._next = 1

    def next_id(self) -> int:
        return self._next

    def add(self, case: dict, out_dir, summary: dict, mesh=None) -> Run:
        """Keep a finished run of ``mesh``; its label compares its case with the last run on the
        same mesh (by content), or says that the mesh changed."""
        key = mesh_key(mesh) if mesh is not None else ""
        name = mesh_label(mesh) if mesh is not None else ""
        base = self.latest(key)
        if base is not None:
            label = run_label(base.case, case)
        elif self.runs:
            label = f"another mesh: {self.runs[-1].mesh_name} -> {name}"
        else:
            label = run_label(None, case)
        run = Run(self._next, label, case, Path(out_dir), summary, mesh_key=key, mesh_name=name,
                  base_id=None if base is None else base.id).load()
        self._next += 1
        self.runs.append(run)
        return run

    def latest(self, key: str) -> Run | None:
        """The newest run on the mesh of ``key``."""
        return next((r for r in reversed(self.runs) if r.mesh_key == key), None)

    def on_mesh(self, key: str) -> list[Run]:
        """Runs on the mesh of ``key``, oldest first."""
        return [r for r in self.runs if r.mesh_key == key]

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
