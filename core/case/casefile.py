"""The case file: a TOML description of a run, read, checked and written.

Layout (all tables but ``[mesh]``, ``[material.*]``, ``[initial]`` and
``[time]`` optional)::

    title = "free text"
    [mesh]
    file = "bracket.msh"     # relative to the case file
    unit = "mm"              # m | cm | mm | in (default m)
    feature_angle = 30       # degrees, splits untagged surfaces (default 30)
    [material.body]          # a region name, or "*" for every region not named
    density = 7900           # kg/m3
    specific_heat = 500      # J/(kg K)
    conductivity = 15        # W/(m K), or a symmetric positive definite 3x3 list
    source = 0               # W/m3, a number or a schedule (optional)
    label = "stainless"      # free text (optional)
    [initial]
    temperature = 20         # degC
    region = { body = 40 }   # per-region values (optional)
    file = "start.vtu"       # or a nodal field: point array "temperature" of a
                             # file on the same mesh, or a previous run's
                             # temperature.xdmf (its last step)
    [boundary.bore]          # a surface group; groups not listed are insulated
    kind = "temperature"     # temperature | heat_flux | convection | insulated
    ramp = { start = 20, end = 180, at = 0, over = 600 }   # or value = 180, or table = "file.csv"
    [boundary.outer]
    kind = "convection"
    h = 15                   # W/(m2 K)
    ambient = 20             # degC, a number or { ramp = {...} } or { table = ... }
    [time]
    end = 3600               # s
    step = 10                # s
    theta = 1.0              # 0..1 or forward-euler | crank-nicolson | galerkin | backward-euler
    mass = "consistent"      # consistent | lumped
    solver = "auto"          # auto | direct | cg-jacobi | cg-amg
    start_steps = 4          # backward-Euler half steps at the start (optional)
    [[probe]]
    name = "core"            # a CSV column header
    at = [20.0, 15.0, 10.0]  # in the mesh unit
    threshold = 120          # degC, its first crossing time is reported (optional)
    [output]
    every = 1                # write the field every this many steps (and the last)

Heat flux is into the body [W/m2]; schedules are described in
:mod:`heatsoak.core.problem.schedule`.
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass, field
from pathlib import Path

try:
    import tomllib
except ModuleNotFoundError:  # Python 3.10
    import tomli as tomllib

import numpy as np
import tomli_w
from heatsoak.core.case.check import (
    REQUIRED_SECTIONS,
    SECTIONS,
    Issue,
    _Checker,
    _read_boundaries,
    _read_initial,
    _read_materials,
    _read_mesh_section,
    _read_output,
    _read_probes,
    _read_time,
)
from heatsoak.core.case.paths import CasePaths
from heatsoak.core.case.plausible import input_problems
from heatsoak.core.errors import CaseError, PathError, StabilityError
from heatsoak.core.mesh.mesh import Mesh
from heatsoak.core.problem.problem import Problem, TimeSettings

__all__ = [
    "Case",
    "Issue",
    "case_from_data",
    "case_to_toml",
    "check_case",
    "check_case_data",
    "load_case",
    "read_case_toml",
    "save_case",
]


@dataclass
class Case:
    """A checked case, ready to run.

    Attributes
    ----------
    path : Path or None
        The case file (None for a case built from data in memory).
    base_dir : Path
        Folder that file names in the case are relative to.
    data : dict
        The case as read (TOML tables as dicts).
    problem : Problem
    time : TimeSettings
    probes : list of Probe
        Positions in metres.
    output_every : int
        Write the temperature field every this many steps (and the last).
    mesh_file : Path
    unit : str
    warnings : list of str
        Inputs outside their usual range (:mod:`~heatsoak.core.case.plausible`).
    """

    path: Path | None
    base_dir: Path
    data: dict
    problem: Problem
    time: TimeSettings
    probes: list
    output_every: int
    mesh_file: Path
    unit: str
    warnings: list = field(default_factory=list)

    @property
    def mesh(self) -> Mesh:
        return self.problem.mesh


def _build(data, paths: CasePaths, mesh: Mesh | None, source: str, stability: bool = False):
    """Read every section; returns (issues, parts) with parts None where a section failed.

    ``stability`` also checks an explicit theta's step against its limit; building a case to
    run skips it, since the stepper makes the same check once, on the operators it keeps.
    """
    ck = _Checker(source, paths)
    if not isinstance(data, dict):
        ck.bad("case", data, "expected TOML tables")
        return ck.issues, None
    ck.table(data, "", SECTIONS, required=REQUIRED_SECTIONS)
    if not isinstance(data.get("title", ""), str):
        ck.bad("title", data["title"], "expected text")
    mesh, mesh_file, unit = _read_mesh_section(ck, data, mesh)
    parts = {
        "mesh": mesh,
        "mesh_file": mesh_file,
        "unit": unit,
        "materials": _read_materials(ck, data, mesh),
        "initial": _read_initial(ck, data, mesh, unit),
        "boundaries": _read_boundaries(ck, data, mesh),
        "time": _read_time(ck, data),
        "probes": _read_probes(ck, data, mesh, unit),
        "output_every": _read_output(ck, data),
    }
    errors, warnings = input_problems(data, parts)
    for key, message in errors:
        ck.add(key, message)
    parts["warnings"] = [f"{key}: {message}" for key, message in warnings]
    if stability and not ck.issues:
        _check_stability(ck, parts)
    return ck.issues, parts


def stability_problem(problem: Problem, time) -> str | None:
    """The message of an explicit theta (< 1/2) whose step is above its stability limit, else None."""
    if time is None or time.theta >= 0.5:
        return None
    from heatsoak.core.solve.stepping import ThetaMethod

    try:
        ThetaMethod(problem, time)
    except StabilityError as exc:
        return str(exc)
    return None


def _check_stability(ck, parts) -> None:
    """A step above the stability limit is a problem of time.step."""
    problem = Problem(parts["mesh"], parts["materials"], parts["boundaries"], parts["initial"])
    message = stability_problem(problem, parts["time"])
    if message:
        ck.add("time.step", message)


def check_case_data(data: dict, base_dir, mesh: Mesh | None = None, source: str = "", root=None) -> list:
    """Every problem of a case given as data, as a list of :class:`Issue` (empty when fine).

    Parameters
    ----------
    data : dict
        The case's TOML tables.
    base_dir : path
        Folder that the mesh and CSV file names are relative to.
    mesh : Mesh, optional
        The case's mesh if already read (skips reading ``mesh.file``).
    source : str
        Name of the case file, prefixed to each message.
    root : path, optional
        Confinement folder: every file the case names must lie inside it
        (:class:`~heatsoak.core.case.paths.CasePaths`); None reads with the
        user's own permissions.
    """
    return _build(data, CasePaths(base_dir, root), mesh, source, stability=True)[0]


def case_from_data(data: dict, base_dir, mesh: Mesh | None = None, path=None, root=None) -> Case:
    """Build a runnable :class:`Case` from its data; CaseError listing every problem otherwise.

    ``root`` confines the files the case names, as in :func:`check_case_data`.
    """
    source = "" if path is None else Path(path).name
    issues, parts = _build(data, CasePaths(base_dir, root), mesh, source)
    if issues:
        raise CaseError([i.message for i in issues])
    problem = Problem(parts["mesh"], parts["materials"], parts["boundaries"], parts["initial"])
    return Case(path=None if path is None else Path(path), base_dir=Path(base_dir), data=data, problem=problem,
                time=parts["time"], probes=parts["probes"], output_every=parts["output_every"],
                mesh_file=parts["mesh_file"], unit=parts["unit"], warnings=parts["warnings"])


def read_case_toml(path, root=None) -> dict:
    """The tables of a case file; CaseError naming the file (and line) if it cannot be read or parsed.

    The file must be a regular file of at most ``paths.MAX_TABLE_BYTES`` (inside ``root`` when given).
    """
    path = Path(path)
    try:
        # utf-8-sig (in read_text): editors on Windows start UTF-8 files with a byte-order mark
        _, text = CasePaths(path.parent, root).read_text("case file", path.name)
        return tomllib.loads(text)
    except PathError as exc:
        what = "case file not found" if exc.detail.startswith("file not found") else exc.detail
        raise CaseError(f"{path}: {what}") from None
    except tomllib.TOMLDecodeError as exc:
        raise CaseError(f"{path}: not valid TOML: {exc}") from None
    except RecursionError:
        raise CaseError(f"{path}: not valid TOML: arrays or tables nested too deeply") from None


def load_case(path, root=None) -> Case:
    """Read, check and build the case in file ``path``; CaseError listing every problem.

    ``root`` confines the case file and every file it names (see :func:`check_case_data`).
    """
    path = Path(path)
    return case_from_data(read_case_toml(path, root), path.parent, path=path, root=root)


def check_case(path, root=None) -> list:
    """Every problem of the case file ``path`` as a list of :class:`Issue` (empty when fine).

    ``root`` confines the case file and every file it names (see :func:`check_case_data`).
    """
    path = Path(path)
    try:
        data = read_case_toml(path, root)
    except CaseError as exc:
        return [Issue("", str(exc))]
    return check_case_data(data, path.parent, source=path.name, root=root)


def _plain(x):
    """Case data with numpy values made plain Python and None entries dropped."""
    if isinstance(x, dict):
        return {str(k): _plain(v) for k, v in x.items() if v is not None}
    if isinstance(x, (list, tuple, np.ndarray)):
        return [_plain(v) for v in x]
    if isinstance(x, np.generic):
        return x.item()
    if isinstance(x, float) and not math.isfinite(x):
        raise CaseError(f"cannot write the non-finite number {x!r} to a case file")
    return x


def _leaf(value) -> str:
    """TOML literal of a scalar, formatted by tomli_w (public API: dump one key and strip it)."""
    return tomli_w.dumps({"x": value})[4:].rstrip("\n")


def _key(name: str) -> str:
    return tomli_w.dumps({name: 0})[: -len(" = 0\n")]


def _inline(value) -> str:
    """Inline TOML of a value: arrays as [a, b], tables as { k = v }, on one line."""
    if isinstance(value, dict):
        return "{ " + ", ".join(f"{_key(k)} = {_inline(v)}" for k, v in value.items()) + " }" if value else "{}"
    if isinstance(value, list):
        return "[" + ", ".join(_inline(v) for v in value) + "]"
    return _leaf(value)


def _table(header: str, table: dict) -> list:
    return [header, *(f"{_key(k)} = {_inline(v)}" for k, v in table.items()), ""]


def _is_table(value) -> bool:
    """True for a dict or a non-empty list of dicts (written as [table] / [[table]])."""
    return isinstance(value, dict) or (isinstance(value, list) and bool(value)
                                       and all(isinstance(v, dict) for v in value))


def case_to_toml(data: dict) -> str:
    """TOML text of case ``data``, laid out for hand editing (the inverse of reading it).

    Sections are tables; a section whose entries are all tables (material,
    boundary) gets one table per entry; ``probe`` is an array of tables;
    everything deeper (ramps, inline tables, lists) is written inline.
    """
    rank = {name: i for i, name in enumerate(SECTIONS)}
    plain = dict(sorted(_plain(data).items(), key=lambda kv: rank.get(kv[0], len(rank))))
    lines = ["# heatsoak case file: SI units, temperatures in degC, lengths in the mesh unit"]
    top = [f"{_key(k)} = {_inline(v)}" for k, v in plain.items() if not _is_table(v)]
    lines += [*top, ""]
    for name, value in ((k, v) for k, v in plain.items() if _is_table(v)):
        if isinstance(value, dict) and value and all(isinstance(v, dict) for v in value.values()):
            for sub, table in value.items():
                lines += _table(f"[{_key(name)}.{_key(sub)}]", table)
        elif isinstance(value, dict):
            lines += _table(f"[{_key(name)}]", value)
        else:
            for table in value:
                lines += _table(f"[[{_key(name)}]]", table)
    text = "\n".join(lines).rstrip("\n") + "\n"
    if tomllib.loads(text) != plain:  # the layout rules above must never change the data
        raise CaseError("internal error: the case could not be written as TOML that reads back the same")
    return text


def save_case(data: dict, path) -> None:
    """Write case ``data`` to ``path`` as TOML (atomically: a crash leaves the old file)."""
    path = Path(path)
    tmp = path.with_name(path.name + ".tmp")
    tmp.write_text(case_to_toml(data), encoding="utf-8")
    os.replace(tmp, path)
