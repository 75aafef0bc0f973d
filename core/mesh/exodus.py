"""Element block names of Exodus II files, which meshio's reader leaves out.

In an Exodus file each element block is one material region; meshio returns the
blocks as cell blocks without their names or numbers. This reads them with
netCDF4 (which meshio needs for Exodus anyway): the block's name from
``eb_names``, else "block-<number>" from ``eb_prop1``. Side sets are not read.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np


def _text(rows) -> list:
    """Strings of a netCDF character array (n, length)."""
    rows = np.asarray(rows)
    return [b"".join(r.tolist()).decode("utf-8", errors="replace").strip("\x00 ") for r in rows]


def block_names(path: Path) -> list:
    """The name of each ``connect<N>`` variable's block, in the order meshio reads them."""
    import netCDF4

    with netCDF4.Dataset(str(path)) as nc:
        keys = [k for k in nc.variables if k.startswith("connect")]
        names = []
        if "eb_names" in nc.variables:
            nc.variables["eb_names"].set_auto_mask(False)
            names = _text(nc.variables["eb_names"][:])
        ids = np.asarray(nc.variables["eb_prop1"][:]).tolist() if "eb_prop1" in nc.variables else []
    out = []
    for key in keys:
        k = int(key[7:]) - 1 if key[7:].isdigit() else len(out)
        name = names[k] if k < len(names) else ""
        out.append(name or f"block-{ids[k] if k < len(ids) else k + 1}")
    return out


def name_blocks(raw, path: Path):
    """``raw`` with one named cell set per element block, when it carries no tags of its own."""
    if raw.cell_data or raw.cell_sets:
        return raw
    names = block_names(path)
    if len(names) != len(raw.cells):
        return raw
    raw.cell_sets = {}
    for k, name in enumerate(names):
        per_block = raw.cell_sets.setdefault(name, [None] * len(raw.cells))
        per_block[k] = np.arange(len(raw.cells[k].data))
    return raw
