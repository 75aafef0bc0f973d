"""Pictures of a sweep, written as PNG files into ``DIR/plots``.

* ``probes.png``: every probe's temperature against time, one curve per variant;
* ``<quantity>-vs-<key>.png``: one quantity of the table against each varied
  key, one line per combination of the other keys.

matplotlib is optional for the core (it comes with the ``ui`` extra): it is
imported here only, lazily, through its object API (no pyplot, no display).
Without it no plot is written and the table is all there is.
"""

from __future__ import annotations

import csv
import re
from pathlib import Path

import numpy as np

__all__ = ["write_plots"]


def _figure(n_axes: int = 1):
    from matplotlib.figure import Figure

    fig = Figure(figsize=(6.4, 2.6 * n_axes), dpi=100)
    axes = [fig.add_subplot(n_axes, 1, i + 1) for i in range(n_axes)]
    for ax in axes:
        ax.grid(True, linewidth=0.5, alpha=0.5)
    return fig, axes


def _save(fig, path: Path) -> Path:
    fig.tight_layout()
    fig.savefig(path)
    return path


def _probe_series(folder: Path):
    """(header, (steps, 1 + probes) array) of a results folder's probes.csv, or None."""
    try:
        with open(folder / "probes.csv", newline="", encoding="utf-8") as f:
            table = list(csv.reader(f))
    except OSError:
        return None
    if len(table) < 2:
        return None
    return table[0], np.array(table[1:], dtype=float)


def _probe_curves(out: Path, rows, path: Path) -> Path | None:
    series = {r.variant: s for r in rows if (s := _probe_series(out / r.variant)) is not None}
    names = list(dict.fromkeys(n for header, _ in series.values() for n in header[1:]))
    if not names:
        return None
    fig, axes = _figure(len(names))
    for ax, name in zip(axes, names):
        for variant, (header, data) in series.items():
            if name in header:
                ax.plot(data[:, 0], data[:, header.index(name)], linewidth=1.2, label=variant)
        ax.set_title(f"probe {name}", fontsize=9)
        ax.set_xlabel("time [s]")
        ax.set_ylabel("temperature [degC]")
    if len(series) <= 12:
        axes[0].legend(fontsize=6, loc="best")
    return _save(fig, path)


def _value(row, quantity: str):
    probe, _, what = quantity.rpartition(".")
    if quantity.startswith("region.") and what == "max":
        return row.regions.get(quantity[len("region."):-len(".max")])
    if quantity == "wall_s":
        return row.wall_s
    return (row.probes.get(probe) or {}).get(what)


def _numeric(values) -> bool:
    return all(isinstance(v, (int, float)) and not isinstance(v, bool) for v in values)


def _against(key: str, keys, rows, quantity: str, path: Path) -> Path | None:
    others = [k for k in keys if k != key]
    xs = [r.values.get(key) for r in rows]
    labels = None if _numeric(xs) else list(dict.fromkeys(map(str, xs)))
    groups = {}
    for r in rows:
        y = _value(r, quantity)
        if r.status == "complete" and y is not None:
            x = r.values.get(key) if labels is None else labels.index(str(r.values.get(key)))
            group = ", ".join(f"{k.rsplit('.', 1)[-1]}={r.values.get(k)}" for k in others)
            groups.setdefault(group, []).append((x, y))
    if not groups:
        return None
    fig, (ax,) = _figure(1)
    for group, points in groups.items():
        points.sort()
        ax.plot(*zip(*points), marker="o", linewidth=1.2, label=group or None)
    if labels is not None:
        ax.set_xticks(range(len(labels)), labels)
    ax.set_xlabel(key)
    ax.set_ylabel(quantity + (" [s]" if quantity.endswith((".crossing", "wall_s")) else " [degC]"))
    if others and len(groups) <= 12:
        ax.legend(fontsize=6, loc="best")
    return _save(fig, path)


def default_quantity(rows) -> str | None:
    """The first probe's maximum, else the first region's maximum: what a sweep plots by default."""
    for r in rows:
        if r.probes:
            return f"{next(iter(r.probes))}.max"
    for r in rows:
        if r.regions:
            return f"region.{next(iter(r.regions))}.max"
    return None


def write_plots(out_dir, keys, rows, quantity: str | None = None) -> list:
    """Write the sweep's plots into ``out_dir/plots``; the paths written (empty without matplotlib).

    Parameters
    ----------
    out_dir : path
        The sweep's folder (variant results in ``out_dir/<variant>``).
    keys : list of str
        Varied keys.
    rows : list of Row
    quantity : str, optional
        A table column (``core.max``, ``core.crossing``, ``region.body.max``, ``wall_s``).
    """
    try:
        import matplotlib  # noqa: F401
    except ImportError:
        return []
    out = Path(out_dir)
    folder = out / "plots"
    folder.mkdir(exist_ok=True)
    written = [_probe_curves(out, rows, folder / "probes.png")]
    quantity = quantity or default_quantity(rows)
    if quantity is not None:
        for key in keys:
            name = re.sub(r"[^A-Za-z0-9._+-]", "_", f"{quantity}-vs-{key}")
            written.append(_against(key, keys, rows, quantity, folder / f"{name}.png"))
    return [p for p in written if p is not None]
