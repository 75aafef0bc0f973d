"""The sweep table: one row per variant, read from its results folder, and ``sweep.csv``.

A row holds what a reader of many runs compares: each probe's last value,
its maximum over the run and its threshold crossing time, the maximum of
each region, and the wall time. Temperatures are in degC, times in s.

``sweep.csv`` columns, in order: ``variant``, each varied key as given on the
command line, ``status`` (complete, failed or cancelled), then for every probe
``<probe>.end``, ``<probe>.max``, ``<probe>.crossing`` (empty when the
threshold was not reached or there is none), ``region.<region>.max`` for every
region, ``wall_s``, ``model`` (``full`` or ``reduced``) and ``error``.
"""

from __future__ import annotations

import csv
import json
import math
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

__all__ = ["Row", "STATUSES", "columns", "read_results_row", "write_table"]

#: The statuses a variant can end with.
STATUSES = ("complete", "failed", "cancelled")


@dataclass
class Row:
    """What one variant of a sweep gave.

    Attributes
    ----------
    variant : str
        The variant's name (its case file is ``variants/<variant>.toml``).
    values : dict
        Varied key -> the value this variant used.
    status : str
        One of :data:`STATUSES`.
    probes : dict
        Probe name -> ``{"end", "max", "crossing"}`` [degC, degC, s or None].
    regions : dict
        Region name -> its highest nodal temperature over the run [degC].
    wall_s : float or None
        Wall time of the run [s].
    model : str
        ``full`` (a finite element run) or ``reduced``.
    error : str
        Why a failed variant failed.
    worker : str
        Where it ran (not written to the table).
    mesh_reused : bool
        True when the worker reused a mesh and pattern it had built for an earlier variant.
    """

    variant: str
    values: dict
    status: str
    probes: dict = field(default_factory=dict)
    regions: dict = field(default_factory=dict)
    wall_s: float | None = None
    model: str = "full"
    error: str = ""
    worker: str = ""
    mesh_reused: bool = False


def _read_numbers(path: Path):
    """(header, float array (rows, columns)) of a numeric CSV file; (header, None) when it has no rows."""
    with open(path, newline="", encoding="utf-8") as f:
        rows = list(csv.reader(f))
    if len(rows) < 2:
        return (rows[0] if rows else []), None
    return rows[0], np.array(rows[1:], dtype=float)


def _probe_values(folder: Path, summary: dict) -> dict:
    path = folder / "probes.csv"
    if not path.is_file():
        return {}
    header, data = _read_numbers(path)
    crossings = {name: p.get("crossing_time") for name, p in (summary.get("probes") or {}).items()}
    out = {}
    for j, name in enumerate(header[1:], start=1):
        if data is None:
            out[name] = {"end": None, "max": None, "crossing": None}
            continue
        out[name] = {"end": float(data[-1, j]), "max": float(data[:, j].max()), "crossing": crossings.get(name)}
    return out


def _region_maxima(folder: Path) -> dict:
    path = folder / "regions.csv"
    if not path.is_file():
        return {}
    with open(path, newline="", encoding="utf-8") as f:
        rows = list(csv.reader(f))[1:]
    if not rows:
        return {}
    names = np.array([r[1] for r in rows])
    highs = np.array([r[4] for r in rows], dtype=float)
    order = list(dict.fromkeys(names.tolist()))
    return {name: float(highs[names == name].max()) for name in order}


def read_results_row(folder, variant: str, values: dict) -> Row | None:
    """The row of a variant from the results folder ``run`` wrote; None when it holds no summary.

    Parameters
    ----------
    folder : path
        A results folder (``probes.csv``, ``regions.csv``, ``summary.json``).
    variant : str
    values : dict
        Varied key -> value of this variant.
    """
    folder = Path(folder)
    try:
        summary = json.loads((folder / "summary.json").read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    status = summary.get("status", "failed")
    return Row(variant, dict(values), status if status in STATUSES else "failed",
               probes=_probe_values(folder, summary), regions=_region_maxima(folder),
               wall_s=summary.get("wall_time_s"), error=summary.get("error", ""))


def _union(rows, attr: str) -> list:
    return list(dict.fromkeys(name for r in rows for name in getattr(r, attr)))


def columns(keys, rows) -> list:
    """The header of ``sweep.csv`` for varied ``keys`` and ``rows`` (probes and regions of every row)."""
    probe_cols = [f"{p}.{q}" for p in _union(rows, "probes") for q in ("end", "max", "crossing")]
    region_cols = [f"region.{r}.max" for r in _union(rows, "regions")]
    return ["variant", *keys, "status", *probe_cols, *region_cols, "wall_s", "model", "error"]


def _cell(value) -> str:
    if value is None:
        return ""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, float):
        return "" if math.isnan(value) else repr(value)
    if isinstance(value, (int, str)):
        return str(value)
    return json.dumps(value)


def _flat(row: Row) -> dict:
    out = {"variant": row.variant, **row.values, "status": row.status, "wall_s": row.wall_s,
           "model": row.model, "error": " | ".join(row.error.splitlines())}
    for name, p in row.probes.items():
        out.update({f"{name}.{q}": p.get(q) for q in ("end", "max", "crossing")})
    out.update({f"region.{name}.max": v for name, v in row.regions.items()})
    return out


def write_table(path, keys, rows) -> Path:
    """Write ``rows`` (a list of :class:`Row`, in variant order) to ``path`` as CSV; returns the path.

    Written to a temporary file and moved into place, so a reader never sees half a table.
    """
    path = Path(path)
    header = columns(keys, rows)
    tmp = path.with_name(path.name + ".tmp")
    with open(tmp, "w", newline="", encoding="utf-8") as f:
        w = csv.writer(f)
        w.writerow(header)
        for row in rows:
            flat = _flat(row)
            w.writerow([_cell(flat.get(c)) for c in header])
    tmp.replace(path)
    return path
