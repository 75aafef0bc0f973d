"""Between the panel's plain form values and the case dict of heatsoak.core.case.casefile.

The panel keeps one small JSON-able form per surface group, region, the
time settings and the probes (what the widgets edit); :func:`case_from_forms`
turns them into the TOML-shaped case dict that ``heatsoak run`` reads, and
:func:`forms_from_case` goes back. No numerics here: only reshaping, plus
reading numbers out of pasted text.
"""

from __future__ import annotations

import json
import math
import re

from heatsoak.core.problem.materials import LIBRARY
from heatsoak.core.solve.stepping.theta import THETA_PRESETS

#: Boundary kinds offered, (value, label, unit of the schedule).
KINDS = (
    ("insulated", "Insulated (no heat flow)", ""),
    ("temperature", "Temperature (Dirichlet)", "°C"),
    ("heat_flux", "Heat flux into the body (Neumann)", "W/m²"),
    ("convection", "Convection to ambient (Robin)", "°C"),
)
SHAPES = (("constant", "Constant"), ("ramp", "Ramp"), ("table", "Table"))
KIND_UNITS = {k: u for k, _, u in KINDS}
#: Which case key holds the schedule of each kind.
SCHEDULE_KEY = {"temperature": "value", "heat_flux": "value", "convection": "ambient"}


class FormError(ValueError):
    """A form value that cannot become a case entry; ``key`` names the case field."""

    def __init__(self, key: str, message: str):
        super().__init__(f"{key}: {message}")
        self.key, self.message = key, message


def default_bc() -> dict:
    """A fresh condition form: insulated, with sensible numbers ready for other kinds."""
    return {"kind": "insulated", "shape": "constant", "value": 20.0, "start": 20.0, "end": 100.0,
            "at": 0.0, "over": 300.0, "table": "0, 20\n300, 100\n600, 100", "h": 10.0}


#: Shapes of a region's heat source: none, or a schedule like a condition's.
SOURCE_SHAPES = ("none",) + tuple(v for v, _ in SHAPES)
#: The schedule fields of a source form, stored on the material form with a ``source_`` prefix.
SOURCE_FIELDS = ("shape", "value", "start", "end", "at", "over", "table")


def default_source() -> dict:
    """A fresh source form (``source_*`` keys): no source, with numbers ready for the other shapes [W/m³]."""
    return {"source_shape": "none", "source_value": 0.0, "source_start": 0.0, "source_end": 1e5,
            "source_at": 0.0, "source_over": 600.0, "source_table": "0, 0\n600, 1e5"}


def source_form(value, read_table=None) -> dict:
    """The ``source_*`` fields of a material form from a case ``material.<region>.source`` value
    (a number or schedule [W/m³]; None for no source); a table given as a CSV file name is read
    with ``read_table(name) -> (times, values)``."""
    if value is None:
        return default_source()
    if isinstance(value, dict) and isinstance(value.get("table"), str) and read_table is not None:
        times, values = read_table(value["table"])
        value = {"table": [[float(t), float(v)] for t, v in zip(times, values)]}
    sched = schedule_form(value, {}) or {"shape": "constant", "value": str(value)}  # unreadable: shown where typed
    return default_source() | {f"source_{k}": v for k, v in sched.items()}


def source_value(form: dict, key: str):
    """The case ``source`` of a material form (None for no source); FormErrors are keyed under ``key``."""
    shape = form.get("source_shape", "none")
    if shape == "none":
        return form.get("source")  # a plain form may carry the case value as it was
    return schedule_value({k: form.get(f"source_{k}") for k in SOURCE_FIELDS}, key)


def parse_table_text(text: str, key: str) -> list:
    """Rows ``[[t, v], ...]`` from pasted two-column text (comma, semicolon, tab or spaces).

    A first row without numbers is taken as a header. Raises FormError naming
    the row for anything that is not two numbers; whether times increase is
    left to the core checks.
    """
    rows = []
    lines = [ln for ln in str(text).splitlines() if ln.strip() and not ln.lstrip().startswith("#")]
    for i, line in enumerate(lines, start=1):
        fields = [f for f in re.split(r"[;,\s]+", line.strip()) if f]
        numbers = []
        for f in fields:
            try:
                numbers.append(float(f))
            except ValueError:
                numbers.append(None)
        if i == 1 and all(n is None for n in numbers):
            continue
        if len(numbers) != 2 or None in numbers or not all(math.isfinite(n) for n in numbers):
            raise FormError(key, f"row {i} {line.strip()!r}: expected two numbers, time [s] and value")
        rows.append(numbers)
    if not rows:
        raise FormError(key, "the table is empty; paste lines of 'time, value'")
    return rows


def schedule_value(form: dict, key: str):
    """The case-file schedule of a condition form: a number, ``{"ramp": ...}`` or ``{"table": ...}``."""
    shape = form.get("shape", "constant")
    if shape == "constant":
        return _number(form.get("value"), f"{key}")
    if shape == "ramp":
        return {"ramp": {k: _number(form.get(k), f"{key}.ramp.{k}") for k in ("start", "end", "at", "over")}}
    if shape == "table":
        return {"table": parse_table_text(form.get("table", ""), f"{key}.table")}
    raise FormError(key, f"unknown schedule shape {shape!r}; use constant, ramp or table")


def _number(value, key: str) -> float:
    try:
        x = float(value)
    except (TypeError, ValueError):
        raise FormError(key, f"{value!r} is not a number") from None
    if not math.isfinite(x):
        raise FormError(key, f"{value!r} is not a finite number")
    return x


def _whole(value, key: str) -> int:
    """A whole number typed as text ("3", "3.0", "1e3"); its range is left to the core checks."""
    x = _number(value, key)
    if x != int(x):
        raise FormError(key, f"{value!r} is not a whole number")
    return int(x)


def boundary_entry(form: dict, group: str) -> dict:
    """``boundary.<group>`` of the case from a condition form.

    Temperature and heat flux write ``value = x``, ``ramp = {...}`` or
    ``table = [...]`` beside ``kind``; convection writes ``h`` and an
    ``ambient`` schedule.
    """
    kind = form.get("kind", "insulated")
    key = f"boundary.{group}"
    if kind == "insulated":
        return {"kind": "insulated"}
    if kind == "convection":
        return {"kind": kind, "h": _number(form.get("h"), f"{key}.h"),
                "ambient": schedule_value(form, f"{key}.ambient")}
    sched = schedule_value(form, key)
    return {"kind": kind, **(sched if isinstance(sched, dict) else {"value": sched})}


def conductivity_value(value, key: str):
    """A conductivity from a form: a number, or a 3x3 tensor given as a list or as its text
    ``[[kxx, kxy, kxz], [..], [..]]`` [W/(m K)]; whether it is symmetric and positive is left to the core checks."""
    if isinstance(value, str) and value.strip().startswith("["):
        try:
            value = json.loads(value)
        except ValueError:
            raise FormError(key, f"{value!r} is not a 3x3 list like [[0.2, 0, 0], [0, 0.2, 0], [0, 0, 0.17]]") from None
    if isinstance(value, list):
        if len(value) != 3 or not all(isinstance(r, list) and len(r) == 3 for r in value):
            raise FormError(key, f"{value!r}: a conductivity tensor has 3 rows of 3 numbers")
        return [[_number(v, key) for v in row] for row in value]
    return _number(value, key)


def material_entry(form: dict, region: str) -> dict:
    """``material.<region>`` of the case from a material form, with its heat source when it has one."""
    key = f"material.{region}"
    entry = {k: _number(form.get(k), f"{key}.{k}") for k in ("density", "specific_heat")}
    entry["conductivity"] = conductivity_value(form.get("conductivity"), f"{key}.conductivity")
    if form.get("preset") in LIBRARY:
        entry["label"] = LIBRARY[form["preset"]].as_case()["label"]
    elif form.get("label"):
        entry["label"] = str(form["label"])
    source = source_value(form, f"{key}.source")
    if source is not None:
        entry["source"] = source
    return entry


def theta_value(value, key: str = "time.theta"):
    """Theta from the form: a number, or one of the named presets the case files accept."""
    if isinstance(value, str) and value.strip().lower() in THETA_PRESETS:
        return value.strip().lower()
    return _number(value, key)


def case_from_forms(mesh: dict, bcs: dict, materials: dict, initial, time: dict, probes: list,
                    every: int = 1) -> tuple[dict, list]:
    """The case dict, and the FormErrors of values that could not even be read.

    Parameters
    ----------
    mesh : dict
        ``{"file", "unit", "feature_angle"}``.
    bcs, materials : dict of name to form
    initial : number
        Initial temperature [degC].
    time : dict
        ``{"end", "step", "theta", "mass"}``.
    probes : list of dict
        ``{"name", "x", "y", "z", "threshold"}`` with coordinates in the mesh unit.
    """
    errors, case = [], {"mesh": dict(mesh), "material": {}, "boundary": {}}

    def attempt(fn, *args):
        try:
            return fn(*args)
        except FormError as exc:
            errors.append(exc)
            return None

    for region, form in materials.items():
        case["material"][region] = attempt(material_entry, form, region) or {}
    for group, form in bcs.items():
        if form.get("kind", "insulated") != "insulated":
            case["boundary"][group] = attempt(boundary_entry, form, group) or {"kind": form["kind"]}
    case["initial"] = {"temperature": attempt(_number, initial, "initial.temperature")}
    case["time"] = {k: attempt(_number, time.get(k), f"time.{k}") for k in ("end", "step")}
    case["time"]["theta"] = attempt(theta_value, time.get("theta"))
    case["time"]["mass"] = time.get("mass", "consistent")
    case["time"].update(time.get("kept") or {})  # keys the forms do not edit, as the case file gave them
    # keyed by position, as the core checks key them, so the message lands on the probe's row
    case["probe"] = [p for p in (attempt(probe_entry, p, f"probe[{i}]") for i, p in enumerate(probes)) if p]
    case["output"] = {"every": attempt(_whole, every, "output.every")}
    return case, errors


def probe_entry(form: dict, key: str | None = None) -> dict:
    """One ``[[probe]]`` table from a probe form (coordinates in the mesh unit); errors are keyed
    ``key`` (default ``probe.<name>``), e.g. ``probe[2]`` for the third probe of a case."""
    name = str(form.get("name", "")).strip()
    key = key or f"probe.{name or '?'}"
    if not name:
        raise FormError(key, "a probe needs a name")
    entry = {"name": name, "at": [_number(form.get(c), f"{key}.{c}") for c in ("x", "y", "z")]}
    if form.get("threshold") not in (None, ""):
        entry["threshold"] = _number(form["threshold"], f"{key}.threshold")
    return entry


def field_key(issue_key: str) -> str:
    """The panel field an issue key belongs to.

    ``boundary.bore.value.ramp.over`` -> ``boundary.bore.over``;
    ``boundary.bore.value.table[3]`` -> ``boundary.bore.table``;
    ``boundary.bore.ambient`` -> ``boundary.bore.value``;
    ``material.core.source.ramp.at`` -> ``material.core.source.at``.
    """
    probe = re.match(r"probe\[(\d+)\]", str(issue_key))
    if probe:
        return f"probe.{probe.group(1)}"
    key = re.sub(r"\[\d+\]", "", str(issue_key))
    parts = key.split(".")
    if parts[0] == "material" and parts[2:3] == ["source"]:  # like a condition: the schedule field itself
        rest = [p for p in parts[3:] if p != "ramp"]
        return ".".join(parts[:3] + (rest[-1:] or ["value"]))
    if parts[0] == "boundary" and len(parts) >= 3:
        rest = [p for p in parts[2:] if p not in ("value", "ambient", "ramp")]
        return ".".join(parts[:2] + (rest[-1:] or ["value"]))
    return ".".join(parts[:3])


def short_message(key: str, message: str) -> str:
    """The part of a message after its ``file: key:`` prefix (the field already says where)."""
    marker = f"{key}: "
    return message.split(marker, 1)[1] if marker in message else message


def issues_by_field(issues) -> dict:
    """``{field key: [messages]}`` from Issue(key, message) objects or FormErrors."""
    out: dict = {}
    for issue in issues:
        message = short_message(issue.key, str(issue.message))
        part = re.match(r"probe\[\d+\]\.(\w+)", str(issue.key))  # a probe row has one message line: name the entry
        out.setdefault(field_key(issue.key), []).append(f"{part.group(1)}: {message}" if part else message)
    return out


def schedule_form(value, form: dict) -> dict:
    """Fill the shape fields of ``form`` from a case-file schedule value."""
    if isinstance(value, dict) and "ramp" in value:
        form.update({"shape": "ramp", **{k: float(value["ramp"].get(k, 0.0)) for k in ("start", "end", "at", "over")}})
    elif isinstance(value, dict) and "table" in value and isinstance(value["table"], list):
        form.update({"shape": "table", "table": "\n".join(f"{t:g}, {v:g}" for t, v in value["table"])})
    elif isinstance(value, (int, float)):
        form.update({"shape": "constant", "value": float(value)})
    return form


def bc_form_from_case(entry: dict, read_table=None) -> dict:
    """A condition form from a case ``boundary.<group>`` entry.

    ``read_table(name) -> (times, values)`` reads tables given as CSV file names.
    """
    form = default_bc()
    kind = entry.get("kind", "insulated")
    form["kind"] = kind
    if kind == "convection":
        value = entry.get("ambient")
        form["h"] = float(entry.get("h", form["h"]))
    else:
        value = entry.get("value", {k: entry[k] for k in ("ramp", "table") if k in entry})
    if isinstance(value, dict) and isinstance(value.get("table"), str) and read_table is not None:
        times, values = read_table(value["table"])
        value = {"table": [[float(t), float(v)] for t, v in zip(times, values)]}
    schedule_form(value, form)
    return form
