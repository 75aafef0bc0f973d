"""A case moved to another folder: the file names it holds rewritten to reach the same files.

A case names files relative to its own folder: ``mesh.file``, ``initial.file``
and every schedule given as ``{ table = "file.csv" }`` (a boundary value,
ramp or table, a convection ambient, a material source). A copy of the case
written elsewhere (a sweep's variant files) needs those names rewritten
relative to its new folder; absolute names are kept as they are.
"""

from __future__ import annotations

import copy
import os
from pathlib import Path

__all__ = ["file_keys", "relocate_files"]


def _walk_tables(node, key: str):
    """(dotted key, table) of every table below ``node`` (lists of tables by position)."""
    if isinstance(node, dict):
        yield key, node
        for name, child in node.items():
            yield from _walk_tables(child, f"{key}.{name}" if key else str(name))
    elif isinstance(node, list):
        for i, child in enumerate(node):
            yield from _walk_tables(child, f"{key}.{i}")


def _file_slots(data: dict):
    """(dotted key, table, entry) of every file name in case ``data``: ``table[entry]`` is the name."""
    for section in ("mesh", "initial"):
        table = data.get(section)
        if isinstance(table, dict) and isinstance(table.get("file"), str):
            yield f"{section}.file", table, "file"
    for section in ("boundary", "material"):
        for where, table in _walk_tables(data.get(section), section):
            if isinstance(table.get("table"), str):
                yield f"{where}.table", table, "table"


def file_keys(data: dict) -> list:
    """Dotted keys of every file name in case ``data``, e.g. ``["mesh.file", "boundary.bore.table"]``."""
    return [key for key, _, _ in _file_slots(data)]


def relocate_files(data: dict, from_dir, to_dir) -> dict:
    """A copy of case ``data`` whose relative file names, given from ``from_dir``, are written from ``to_dir``.

    Parameters
    ----------
    data : dict
        Case tables as read from TOML (not changed).
    from_dir : path
        The folder the names are relative to now (the case file's folder).
    to_dir : path
        The folder the copy will be saved in.
    """
    new = copy.deepcopy(data)
    src, dst = Path(from_dir).resolve(), Path(to_dir).resolve()
    for _, table, leaf in _file_slots(new):
        name = table[leaf]
        if name and not Path(name).is_absolute():
            table[leaf] = Path(os.path.relpath(src / name, dst)).as_posix()
    return new
