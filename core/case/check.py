"""Reading and checking the sections of a case file, collecting every problem.

Each section reader takes a :class:`_Checker`, reports what is wrong with the
section as :class:`Issue` objects (dotted key, message naming the file, key,
value and what is allowed) and returns what it could build, or None. The
public entry points are in :mod:`heatsoak.core.case.casefile`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from difflib import get_close_matches

import numpy as np
from heatsoak.core.case.initial_field import read_nodal_field
from heatsoak.core.case.paths import CasePaths
from heatsoak.core.errors import InputError, PathError, ScheduleError
from heatsoak.core.mesh.read import UNITS, read_mesh, unit_scale
from heatsoak.core.problem.problem import BOUNDARY_KINDS, MASS_KINDS, Boundary, Material, Probe, TimeSettings
from heatsoak.core.problem.schedule import parse_schedule
from heatsoak.core.results.probes import place
from heatsoak.core.solve.linear import SOLVERS
from heatsoak.core.solve.stepping import THETA_PRESETS
from heatsoak.core.solve.stepping.adaptive import ADAPTIVE_STEPS
from heatsoak.core.solve.stepping.base import MAX_STEPS

#: Absolute zero [degC]: no temperature may be below it.
ABSOLUTE_ZERO_C = -273.15
#: Top-level tables, in the order they are written.
SECTIONS = ("title", "mesh", "material", "initial", "boundary", "time", "probe", "output")
REQUIRED_SECTIONS = ("mesh", "material", "initial", "time")
MESH_KEYS = ("file", "unit", "feature_angle")
MATERIAL_KEYS = ("density", "specific_heat", "conductivity", "source", "label")
INITIAL_KEYS = ("temperature", "region", "file")
SCHEDULE_KEYS = ("value", "ramp", "table")
BOUNDARY_KEYS = {
    "temperature": ("kind", *SCHEDULE_KEYS),
    "heat_flux": ("kind", *SCHEDULE_KEYS),
    "convection": ("kind", "h", "ambient"),
    "insulated": ("kind",),
}
TIME_KEYS = ("end", "step", "tolerance", "theta", "mass", "solver", "start_steps")
PROBE_KEYS = ("name", "at", "threshold")
OUTPUT_KEYS = ("every",)
SOLVER_NAMES = ("auto", *SOLVERS)
_BAD_HEADER_CHARS = set(',;"\n\r\t')


@dataclass
class Issue:
    """One problem in a case: the dotted key (e.g. ``boundary.bore.ramp.over``) and a full message."""

    key: str
    message: str

    def __str__(self) -> str:
        return self.message


def _join(key: str, name) -> str:
    return f"{key}.{name}" if key else str(name)


def _is_number(x) -> bool:
    return isinstance(x, (int, float)) and not isinstance(x, bool) and math.isfinite(x)


class _Checker:
    """Collects issues while the sections of a case are read."""

    def __init__(self, source: str, paths: CasePaths):
        self.source = source
        self.paths = paths
        self.issues: list[Issue] = []

    def add(self, key: str, message: str) -> None:
        prefix = f"{self.source}: " if self.source else ""
        self.issues.append(Issue(key, f"{prefix}{key}: {message}"))

    def bad(self, key: str, value, allowed: str) -> None:
        self.add(key, f"{value!r} is not allowed; {allowed}")

    def table(self, value, key: str, allowed, required=()) -> dict:
        """The table at ``key`` with unknown keys reported; {} if it is not a table."""
        if not isinstance(value, dict):
            self.bad(key, value, f"expected a table with keys {list(allowed)}")
            return {}
        for k in value:
            if k not in allowed:
                close = get_close_matches(str(k), list(allowed), n=1)
                hint = f"did you mean {close[0]!r}? " if close else ""
                self.add(_join(key, k), f"unknown key; {hint}valid keys are {list(allowed)}")
        for k in required:
            if k not in value:
                self.add(_join(key, k), "missing")
        return value

    def number(self, table: dict, key: str, name: str, default=None, lo=None, hi=None, open_lo=False):
        """A finite number in [lo, hi] (or (lo, hi] when ``open_lo``); None after reporting an issue."""
        if name not in table:
            return default
        v = table[name]
        if not _is_number(v):
            self.bad(f"{key}.{name}", v, "expected a finite number")
            return None
        if lo is not None and (v <= lo if open_lo else v < lo):
            self.bad(f"{key}.{name}", v, f"must be {'>' if open_lo else '>='} {lo:g}")
            return None
        if hi is not None and v > hi:
            self.bad(f"{key}.{name}", v, f"must be <= {hi:g}")
            return None
        return float(v)

    def schedule(self, value, key: str):
        try:
            return parse_schedule(value, key, read_text=self.paths.read_text)
        except ScheduleError as exc:
            self.add(getattr(exc, "key", key), getattr(exc, "detail", str(exc)))
            return None

    def name(self, name: str, valid, key: str, what: str) -> bool:
        if name in valid:
            return True
        close = get_close_matches(name, list(valid), n=3)
        hint = f"did you mean {' or '.join(map(repr, close))}? " if close else ""
        self.add(key, f"no {what} {name!r} in the mesh; {hint}{what}s are {list(valid)}")
        return False


def _read_mesh_section(ck: _Checker, data: dict, mesh):
    sec = ck.table(data.get("mesh", {}), "mesh", MESH_KEYS, required=("file",))
    unit = sec.get("unit", "m")
    if not isinstance(unit, str) or unit not in UNITS:
        ck.bad("mesh.unit", unit, f"allowed units are {list(UNITS)}")
        unit = None
    angle = ck.number(sec, "mesh", "feature_angle", 30.0, lo=0, hi=180, open_lo=True)
    file = sec.get("file")
    if file is not None and not isinstance(file, str):
        ck.bad("mesh.file", file, "expected a file name relative to the case file")
        file = None
    path = None
    if file is not None:
        try:
            # a mesh already read is not read again, but its name must still be one the case may use
            path = ck.paths.locate("mesh.file", file) if mesh is not None else ck.paths.resolve_mesh("mesh.file", file)
        except PathError as exc:
            ck.add("mesh.file", f"{file!r}: {exc.detail}")
            return mesh, None, unit or "m"
    if mesh is None and path is not None and unit is not None and angle is not None:
        try:
            mesh = read_mesh(path, unit, angle)
        except (InputError, OSError) as exc:
            ck.add("mesh.file", f"{file!r}: {exc}")
    return mesh, path, unit or "m"


def _conductivity(ck: _Checker, value, key: str):
    if _is_number(value):
        if value > 0:
            return float(value)
        ck.bad(key, value, "conductivity must be > 0 W/(m K)")
        return None
    try:
        k = np.array(value, dtype=float)
    except (TypeError, ValueError):
        k = np.zeros(0)
    if k.shape != (3, 3) or not np.isfinite(k).all():
        ck.bad(key, value, "expected a number > 0 or a 3x3 list of numbers [W/(m K)]")
        return None
    if not np.allclose(k, k.T, rtol=1e-10, atol=1e-12 * np.abs(k).max()):
        ck.bad(key, value, "a conductivity tensor must be symmetric")
        return None
    if np.linalg.eigvalsh(k).min() <= 0:
        ck.bad(key, value, "a conductivity tensor must be positive definite (all eigenvalues > 0)")
        return None
    return k


def _read_materials(ck: _Checker, data: dict, mesh) -> dict:
    sec = data.get("material", {})
    if not isinstance(sec, dict):
        ck.bad("material", sec, "expected tables [material.REGION] or [material.\"*\"]")
        return {}
    out = {}
    for name, spec in sec.items():
        key = f"material.{name}"
        if mesh is not None and name != "*" and not ck.name(name, mesh.region_names, key, "region"):
            continue
        t = ck.table(spec, key, MATERIAL_KEYS, required=("density", "specific_heat", "conductivity"))
        rho = ck.number(t, key, "density", lo=0, open_lo=True)
        c = ck.number(t, key, "specific_heat", lo=0, open_lo=True)
        k = _conductivity(ck, t["conductivity"], f"{key}.conductivity") if "conductivity" in t else None
        src = ck.schedule(t["source"], f"{key}.source") if "source" in t else None
        label = t.get("label", "")
        if not isinstance(label, str):
            ck.bad(f"{key}.label", label, "expected text")
        if all(x is not None for x in (rho, c, k)) and ("source" not in t or src is not None):
            out[name] = Material(rho, c, k, source=src, label=str(label))
    if mesh is None:
        return out
    missing = [r for r in mesh.region_names if r not in sec and "*" not in sec]
    if missing:
        ck.add("material", f"no material for regions {missing}; add [material.REGION] tables or [material.\"*\"]")
    return {r: out[r if r in sec else "*"] for r in mesh.region_names if (r if r in sec else "*") in out}


def _read_initial_file(ck: _Checker, value, mesh, unit: str):
    if not isinstance(value, str):
        ck.bad("initial.file", value, "expected a file name")
        return None
    try:
        path = ck.paths.resolve_mesh("initial.file", value)
    except PathError as exc:
        ck.add("initial.file", f"{value!r}: {exc.detail}")
        return None
    try:
        field = read_nodal_field(path, mesh, unit_scale(unit))
    except InputError as exc:
        ck.add("initial.file", str(exc))
        return None
    if field.min() < ABSOLUTE_ZERO_C:
        ck.add("initial.file", f"{value}: its lowest temperature {field.min():g} degC is below absolute zero "
                               f"({ABSOLUTE_ZERO_C:g} degC); is it in kelvin or another unit?")
        return None
    return field


def _read_initial(ck: _Checker, data: dict, mesh, unit: str = "m"):
    raw = data.get("initial", {})
    need = () if isinstance(raw, dict) and "file" in raw else ("temperature",)
    sec = ck.table(raw, "initial", INITIAL_KEYS, required=need)
    both = [k for k in ("temperature", "region") if k in sec]
    if "file" in sec and both:
        ck.add("initial", f"give either file or {' and '.join(both)}, not both: the file sets every node")
    if "file" in sec:
        if mesh is None:
            return None
        return _read_initial_file(ck, sec["file"], mesh, unit)
    t0 = ck.number(sec, "initial", "temperature", lo=ABSOLUTE_ZERO_C)
    per = sec.get("region", {})
    if not isinstance(per, dict):
        ck.bad("initial.region", per, "expected a table REGION = temperature")
        return t0
    values = {}
    for name in per:
        if mesh is not None and not ck.name(name, mesh.region_names, f"initial.region.{name}", "region"):
            continue
        values[name] = ck.number(per, "initial.region", name, lo=ABSOLUTE_ZERO_C)
    if not values or t0 is None or mesh is None:
        return t0
    return {r: values.get(r, t0) for r in mesh.region_names}


def _temperature_schedule(ck: _Checker, value, key: str):
    """A temperature schedule [degC] that never falls below absolute zero; None after reporting."""
    sched = ck.schedule(value, key)
    lowest = None if sched is None else sched.lowest()
    if lowest is not None and lowest < ABSOLUTE_ZERO_C:
        ck.add(key, f"falls to {lowest:g} degC, below absolute zero ({ABSOLUTE_ZERO_C:g} degC)")
        return None
    return sched


def _read_boundary(ck: _Checker, key: str, spec):
    if not isinstance(spec, dict):
        ck.bad(key, spec, f"expected a table with kind = one of {list(BOUNDARY_KINDS)}")
        return None
    kind = spec.get("kind")
    if kind not in BOUNDARY_KINDS:
        ck.bad(f"{key}.kind", kind, f"kind must be one of {list(BOUNDARY_KINDS)}")
        return None
    t = ck.table(spec, key, BOUNDARY_KEYS[kind])
    if kind == "insulated":
        return Boundary("insulated")
    if kind == "convection":
        h = ck.number(t, key, "h", lo=0)
        if "h" not in t:
            ck.add(f"{key}.h", "missing (convection coefficient [W/(m2 K)])")
        if "ambient" not in t:
            ck.add(f"{key}.ambient", "missing (ambient temperature [degC], a number or a schedule)")
            return None
        amb = _temperature_schedule(ck, t["ambient"], f"{key}.ambient")
        return None if h is None or amb is None or "h" not in t else Boundary("convection", h=h, ambient=amb)
    given = [k for k in SCHEDULE_KEYS if k in t]
    if len(given) != 1:
        ck.add(key, f"give exactly one of value = number, ramp = {{...}} or table = ...; found {given or 'none'}")
        return None
    value, at = (t["value"], f"{key}.value") if given == ["value"] else ({given[0]: t[given[0]]}, key)
    sched = _temperature_schedule(ck, value, at) if kind == "temperature" else ck.schedule(value, at)
    return None if sched is None else Boundary(kind, value=sched)


def _read_boundaries(ck: _Checker, data: dict, mesh) -> dict:
    sec = data.get("boundary", {})
    if not isinstance(sec, dict):
        ck.bad("boundary", sec, "expected tables [boundary.GROUP]")
        return {}
    out = {}
    for name, spec in sec.items():
        key = f"boundary.{name}"
        if mesh is not None and not ck.name(name, mesh.group_names, key, "surface group"):
            continue
        b = _read_boundary(ck, key, spec)
        if b is not None:
            out[name] = b
    return out


def _read_step(ck: _Checker, sec: dict, end):
    """(step, tolerance) of ``[time]``: a fixed step, or a tolerance [K] with the step as its upper
    limit (default end / ADAPTIVE_STEPS); step None after reporting an issue."""
    tolerance = ck.number(sec, "time", "tolerance", lo=0, open_lo=True)
    if "tolerance" not in sec and "step" not in sec:
        ck.add("time.step", "missing; give a step [s], or a tolerance [K] for adaptive steps")
        return None, None
    default = None if end is None else end / ADAPTIVE_STEPS
    step = ck.number(sec, "time", "step", default, lo=0, open_lo=True)
    if end is not None and step is not None and step > end:
        ck.bad("time.step", sec["step"], f"the step must be <= time.end = {end:g} s")
        step = None
    elif end is not None and step is not None and end / step > MAX_STEPS:
        ck.bad("time.step", sec["step"], f"time.end = {end:g} s would take {end / step:.3g} steps; "
               f"at most {MAX_STEPS:d} are allowed; use a larger step")
        step = None
    if "tolerance" in sec and tolerance is None:
        step = None
    return step, tolerance


def _read_time(ck: _Checker, data: dict):
    sec = ck.table(data.get("time", {}), "time", TIME_KEYS, required=("end",))
    end = ck.number(sec, "time", "end", lo=0, open_lo=True)
    step, tolerance = _read_step(ck, sec, end)
    theta = sec.get("theta", 1.0)
    if isinstance(theta, str):
        if theta not in THETA_PRESETS:
            ck.bad("time.theta", theta, f"expected a number in [0, 1] or one of {list(THETA_PRESETS)}")
        theta = THETA_PRESETS.get(theta)
    else:
        theta = ck.number(sec, "time", "theta", 1.0, lo=0, hi=1)
    mass = sec.get("mass", "consistent")
    if mass not in MASS_KINDS:
        ck.bad("time.mass", mass, f"mass must be one of {list(MASS_KINDS)}")
    solver = sec.get("solver", "auto")
    if solver not in SOLVER_NAMES:
        ck.bad("time.solver", solver, f"solver must be one of {list(SOLVER_NAMES)}")
    start = sec.get("start_steps")
    if start is not None and (not isinstance(start, int) or isinstance(start, bool) or start < 0):
        ck.bad("time.start_steps", start, "expected a whole number >= 0")
    if None in (end, step, theta) or mass not in MASS_KINDS or solver not in SOLVER_NAMES:
        return None
    return TimeSettings(end=end, step=step, theta=theta, mass=mass, solver=solver, start_steps=start,
                        tolerance=tolerance)


def _probe_name_problem(name) -> str:
    if not isinstance(name, str) or not name.strip():
        return "a probe name must be non-empty text"
    if name != name.strip() or _BAD_HEADER_CHARS & set(name) or not name.isprintable():
        return "a probe name is a CSV column header: no leading/trailing spaces, commas, semicolons, quotes or tabs"
    if name == "time":
        return "'time' is the name of the time column"
    return ""


def _read_probes(ck: _Checker, data: dict, mesh, unit: str) -> list:
    sec = data.get("probe", [])
    if not isinstance(sec, list):
        ck.bad("probe", sec, "expected [[probe]] tables")
        return []
    out, keys, seen = [], [], set()
    for i, spec in enumerate(sec):
        key = f"probe[{i}]"
        t = ck.table(spec, key, PROBE_KEYS, required=("name", "at"))
        name = t.get("name")
        why = _probe_name_problem(name) if "name" in t else ""
        if why:
            ck.bad(f"{key}.name", name, why)
        elif name in seen:
            ck.bad(f"{key}.name", name, "probe names must be unique")
        if isinstance(name, str):
            seen.add(name)
        at = t.get("at")
        if "at" in t and not (isinstance(at, list) and len(at) == 3 and all(_is_number(x) for x in at)):
            ck.bad(f"{key}.at", at, f"expected [x, y, z] in the mesh unit ({unit})")
            at = None
        thr = ck.number(t, key, "threshold")
        if why or at is None or ("threshold" in t and thr is None):
            continue
        out.append(Probe(name, np.array(at, dtype=float) * UNITS[unit], thr))
        keys.append(i)
    if mesh is not None and out:
        _place_probes(ck, mesh, out, [sec[i]["at"] for i in keys], keys, unit)
    return out


def _place_probes(ck: _Checker, mesh, probes, given, keys, unit: str) -> None:
    """Report the probes outside the mesh; a point far outside its box (1e300) is not searched for."""
    pts = np.array([p.point for p in probes])
    lo, hi = mesh.points.min(axis=0), mesh.points.max(axis=0)
    far = np.any(np.abs(pts - 0.5 * (lo + hi)) > 1e6 * max(float(np.linalg.norm(hi - lo)), 1e-300), axis=1)
    scale = UNITS[unit]
    span = f"{' x '.join(f'{e:.4g}' for e in (hi - lo) / scale)} {unit}"
    for j in np.flatnonzero(far):
        ck.bad(f"probe[{keys[j]}].at", given[j], f"the point is far outside the mesh, which spans {span}")
    near = np.flatnonzero(~far)
    if near.size:
        _, cells, _, dist = place(mesh, pts[near])
        for j, c, d in zip(near, cells, dist):
            if c < 0:
                ck.bad(f"probe[{keys[j]}].at", given[j], f"the point is outside the mesh, {d / scale:.4g} {unit} "
                       "from its surface")


def _read_output(ck: _Checker, data: dict) -> int:
    sec = ck.table(data.get("output", {}), "output", OUTPUT_KEYS)
    every = sec.get("every", 1)
    if not isinstance(every, int) or isinstance(every, bool) or every < 1:
        ck.bad("output.every", every, "expected a whole number of steps >= 1")
        return 1
    return every
