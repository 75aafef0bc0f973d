"""Physically possible inputs and results: what no solid body reaches is refused or flagged.

Each kind of input has a *usual* range, outside which ``check`` and the run
summary warn, and a *possible* range, outside which the case is refused: no
heat flux of 1e300 W/m2 exists, and a run fed one would only report numbers
near the overflow limit. The ranges are facts of the trade (common practice,
no source): the sun's surface radiates about 6e7 W/m2 and laser cutting
reaches about 1e10 W/m2; boiling and condensation give h up to about 1e5
W/(m2 K); no solid stays solid above about 4000 degC; conductivities run from
about 0.01 (aerogel) to 2000 W/(m K) (diamond).

A run is checked too (:func:`result_problem`): a temperature that is not a
finite number, below absolute zero or above :data:`MAX_TEMPERATURE_C` stops
it, naming the inputs that drive it.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from heatsoak.core.case.check import ABSOLUTE_ZERO_C

#: Above this [degC] a computed temperature stops the run (far above any solid's melting point).
MAX_TEMPERATURE_C = 1e6


@dataclass(frozen=True)
class Range:
    """Usual and possible magnitudes of one kind of input, in ``unit``."""

    unit: str
    usual: tuple
    possible: tuple
    hint: str = ""


RANGES = {
    "heat flux": Range("W/m2", (0.0, 1e8), (0.0, 1e13), "is the value in W/m2?"),
    "heat source": Range("W/m3", (0.0, 1e11), (0.0, 1e16), "is the value in W/m3?"),
    "convection coefficient": Range("W/(m2 K)", (0.0, 1e5), (0.0, 1e9),
                                    "for a surface held at a temperature use kind = \"temperature\""),
    "temperature": Range("degC", (ABSOLUTE_ZERO_C, 5e3), (ABSOLUTE_ZERO_C, 1e5), "temperatures are in degC"),
    "conductivity": Range("W/(m K)", (1e-3, 5e3), (1e-6, 1e5), "is the value in W/(m K)?"),
    "density": Range("kg/m3", (1.0, 3e4), (1e-3, 1e6), "is the value in kg/m3?"),
    "specific heat": Range("J/(kg K)", (10.0, 3e4), (1e-2, 1e7), "is the value in J/(kg K)?"),
}


def _span(value) -> tuple:
    """(lowest, highest) of a number, a 3x3 tensor (its eigenvalues) or a schedule (at its corners)."""
    if hasattr(value, "breakpoints"):
        bp = np.asarray(value.breakpoints(), dtype=float)
        bp = bp[bp >= 0.0]
        t = np.concatenate([[0.0], bp, np.maximum(bp * (1.0 - 1e-12) - 1e-300, 0.0)])
        v = np.asarray(value(t), dtype=float)
        return float(v.min()), float(v.max())
    arr = np.asarray(value, dtype=float)
    if arr.ndim == 2:
        arr = np.linalg.eigvalsh(arr)
    return float(arr.min()), float(arr.max())


def judge(kind: str, value) -> tuple:
    """(error, warning) texts for ``value`` of input ``kind`` ("" when within range).

    Fluxes and sources are judged by magnitude (either sign); the others by value.
    """
    r = RANGES[kind]
    lo, hi = _span(value)
    if kind in ("heat flux", "heat source"):
        lo, hi = 0.0, max(abs(lo), abs(hi))
    hint = f"; {r.hint}" if r.hint else ""
    for (a, b), word in ((r.possible, "possible"), (r.usual, "usual")):
        for v, bad in ((hi, hi > b), (lo, lo < a)):
            if bad:
                side = f"above {b:g}" if v > b else f"below {a:g}"
                text = f"{v:.4g} {r.unit} is {side}, outside the {word} range of a {kind} ({a:g} to {b:g} {r.unit}){hint}"
                return (text, "") if word == "possible" else ("", text)
    return "", ""


def _inputs(data: dict, parts: dict):
    """(key, kind, value) of every input with a physical range, keyed as in the case file."""
    names = data.get("material", {}) if isinstance(data.get("material"), dict) else {}
    seen = set()
    for region, mat in (parts.get("materials") or {}).items():
        name = region if region in names else "*"
        if name in seen:
            continue
        seen.add(name)
        key = f"material.{name}"
        yield from ((f"{key}.density", "density", mat.density), (f"{key}.specific_heat", "specific heat",
                    mat.specific_heat), (f"{key}.conductivity", "conductivity", mat.conductivity))
        if mat.source is not None:
            yield f"{key}.source", "heat source", mat.source
    for name, bc in (parts.get("boundaries") or {}).items():
        key = f"boundary.{name}"
        if bc.kind == "heat_flux":
            yield key, "heat flux", bc.value
        elif bc.kind == "temperature":
            yield key, "temperature", bc.value
        elif bc.kind == "convection":
            yield f"{key}.h", "convection coefficient", bc.h
            yield f"{key}.ambient", "temperature", bc.ambient
    init = parts.get("initial")
    if init is not None:
        values = np.fromiter(init.values(), float) if isinstance(init, dict) else init
        yield "initial", "temperature", values


def input_problems(data: dict, parts: dict) -> tuple:
    """(errors, warnings) of a case's inputs, each a (key, message) pair."""
    errors, warnings = [], []
    for key, kind, value in _inputs(data, parts):
        if value is None:
            continue
        error, warning = judge(kind, value)
        if error:
            errors.append((key, error))
        elif warning:
            warnings.append((key, warning))
    return errors, warnings


def drivers(data: dict, parts: dict, count: int = 3) -> str:
    """The inputs most likely to drive a result out of range: those outside their usual range,
    else the largest fluxes and sources; as text for a message."""
    out = [f"{key} ({why})" for key, why in input_problems(data, parts)[1]]
    if not out:
        loads = [(abs(_span(v)[1]) + abs(_span(v)[0]), key) for key, kind, v in _inputs(data, parts)
                 if kind in ("heat flux", "heat source") and v is not None]
        out = [f"{key} (up to {size:.4g})" for size, key in sorted(loads, reverse=True)]
    return "; ".join(out[:count]) if out else "no single input stands out: check the units of every input"


def result_problem(t: float, t_min: float, t_max: float, data: dict, parts: dict) -> str:
    """The message when the computed range [t_min, t_max] [degC] at time ``t`` [s] is impossible, else ""."""
    if not (np.isfinite(t_min) and np.isfinite(t_max)):
        what = "is no longer a finite number (overflow)"
    elif t_min < ABSOLUTE_ZERO_C - 1e-6 * max(1.0, abs(t_min)):
        what = f"falls to {t_min:.4g} degC, below absolute zero"
    elif t_max > MAX_TEMPERATURE_C:
        what = f"reaches {t_max:.4g} degC, above {MAX_TEMPERATURE_C:g} degC, which no solid body reaches"
    else:
        return ""
    return f"at t = {t:g} s the computed temperature {what}; the inputs that drive it: {drivers(data, parts)}"


def problem_parts(problem) -> dict:
    """The parts of a built problem that :func:`input_problems` and :func:`drivers` read."""
    return {"materials": problem.materials, "boundaries": problem.boundaries, "initial": problem.initial}
