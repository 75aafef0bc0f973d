"""Handlers of the materials step: the region's material, its label and its heat source.

The editor is bound to flat ``hs_m_*`` state keys for the selected region;
every region's form lives in ``panel.mats`` (see :func:`material_form`).
"""

from __future__ import annotations

import json
import re

from heatsoak.core.problem.materials import LIBRARY
from heatsoak.plugin.setup.forms import SOURCE_FIELDS, default_source, source_form

#: The numbers a library material sets; a case's label describes these.
MAT_NUMBERS = ("density", "specific_heat", "conductivity")
SOURCE_KEYS = tuple(f"source_{k}" for k in SOURCE_FIELDS)
MAT_FIELDS = ("preset", *MAT_NUMBERS, *SOURCE_KEYS)
DEFAULT_MATERIAL = "carbon_steel"
#: Choices of the material selector; the last one is replaced by the region's own label when it has one.
LIBRARY_ITEMS = [{"value": k, "title": m.name} for k, m in LIBRARY.items()]
CUSTOM_TITLE = "Custom values"


def material_form(entry, read_table=None) -> dict:
    """A material form from a case ``material.<region>`` table or a library key.

    ``read_table(name) -> (times, values)`` reads a source table given as a CSV file name.
    """
    if isinstance(entry, str):
        numbers = {k: getattr(LIBRARY[entry], k) for k in MAT_NUMBERS}
        return {"preset": entry, **numbers, **default_source()}
    preset = next((k for k, m in LIBRARY.items() if str(entry.get("label", "")).startswith(m.name)), "custom")
    form = {"preset": preset, **{k: _as_number(entry.get(k, 0.0)) for k in MAT_NUMBERS}}
    if isinstance(entry.get("conductivity"), list):  # a tensor: edited as its text, one row a line
        form["conductivity"] = tensor_text(entry["conductivity"])
    form |= source_form(entry.get("source"), read_table)
    return form | ({"label": entry["label"]} if "label" in entry else {})


def tensor_text(rows) -> str:
    """A 3x3 list as text with one row a line, e.g. ``[[0.19, 0, 0],\\n [0, 0.19, 0],\\n [0, 0, 0.17]]``."""
    if not isinstance(rows, list) or not all(isinstance(r, list) for r in rows):
        return json.dumps(rows)
    return "[" + ",\n ".join(json.dumps(r) for r in rows) + "]"


def _as_number(value):
    """A float when ``value`` reads as one, else the value as text (the field then shows what is wrong)."""
    try:
        return float(value)
    except (TypeError, ValueError):
        return str(value)


def differs(a, b) -> bool:
    """Whether two field values differ: as numbers, else as text without white space (a tensor)."""
    try:
        return abs(float(a) - float(b)) > 1e-12 * max(1.0, abs(float(b)))
    except (TypeError, ValueError):
        return re.sub(r"\s+", "", str(a)) != re.sub(r"\s+", "", str(b))


def material_choices(form: dict | None) -> list:
    """Items of the material selector: the library, then the region's own label or 'Custom values'."""
    label = (form or {}).get("label") if (form or {}).get("preset") == "custom" else None
    return LIBRARY_ITEMS + [{"value": "custom", "title": str(label) if label else CUSTOM_TITLE}]


def register(panel, validate) -> None:
    """Material editor handlers; ``validate(panel)`` checks the case after each edit."""
    state = panel.state
    state.update({f"hs_m_{k}": None for k in MAT_FIELDS})
    state.hs_library = material_choices(None)

    @state.change("hs_region")
    def on_region(hs_region, **_):
        form = panel.mats.get(hs_region)
        if form is not None:
            state.update({f"hs_m_{k}": form[k] for k in MAT_FIELDS})
        state.hs_library = material_choices(form)

    @state.change("hs_m_preset")
    def on_preset(hs_m_preset, **_):
        """Fill the numbers of a library material (its heat source stays)."""
        if hs_m_preset in LIBRARY and panel.mats.get(state.hs_region, {}).get("preset") != hs_m_preset:
            state.update({f"hs_m_{k}": getattr(LIBRARY[hs_m_preset], k) for k in MAT_NUMBERS})

    @state.change(*(f"hs_m_{k}" for k in MAT_FIELDS[1:]))
    def on_material_edit(**_):
        region = state.hs_region
        if region not in panel.mats:
            return
        old = panel.mats[region]
        form = {k: state[f"hs_m_{k}"] for k in MAT_FIELDS}
        if "label" in old and not any(differs(form[k], old.get(k)) for k in MAT_NUMBERS):
            form["label"] = old["label"]  # same numbers: the case's label still holds
        lib = LIBRARY.get(form["preset"])
        if lib is not None and any(differs(form[k], getattr(lib, k)) for k in MAT_NUMBERS):
            form["preset"] = state.hs_m_preset = "custom"
        panel.mats[region] = form
        state.hs_library = material_choices(form)
        validate(panel)
