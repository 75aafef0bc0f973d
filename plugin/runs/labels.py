"""Labels for what-if runs: what changed in the case since the previous run.

Pure functions on case dicts (the TOML-shaped data of
:mod:`heatsoak.core.case.casefile`); no UI here, so they are unit-tested directly.
"""

from __future__ import annotations

#: Units shown after values of these keys (last path element).
UNITS = {
    "over": "s",
    "at": "s",
    "end": "s",
    "step": "s",
    "h": "W/(m² K)",
    "density": "kg/m³",
    "specific_heat": "J/(kg K)",
    "conductivity": "W/(m K)",
    "every": "steps",
}
#: Words for keys whose plain name reads badly.
WORDS = {
    "over": "over",
    "at": "starting at",
    "step": "time step",
    "h": "h",
    "specific_heat": "specific heat",
    "start": "from",
    "end": "to",
}
#: Keys that change nothing in the physics and are left out of labels.
IGNORED = {("mesh", "file_label"), ("material", "*", "label"), ("output",)}


def flatten(data, prefix=()) -> dict:
    """``{("boundary", "bore", "ramp", "duration"): 300, ...}`` for nested dicts.

    Lists of tables (probes) are keyed by their ``name`` when they have one.
    """
    out = {}
    if isinstance(data, dict):
        for key, value in data.items():
            out.update(flatten(value, prefix + (str(key),)))
    elif isinstance(data, list) and data and all(isinstance(v, dict) and "name" in v for v in data):
        for item in data:
            out.update(flatten({k: v for k, v in item.items() if k != "name"}, prefix + (str(item["name"]),)))
    else:
        out[prefix] = data
    return out


def _ignored(path) -> bool:
    for pattern in IGNORED:
        if len(path) >= len(pattern) and all(p in ("*", q) for p, q in zip(pattern, path)):
            return True
    return False


def fmt_value(value, leaf: str = "") -> str:
    """A value as a user reads it: numbers shortened, units added."""
    if isinstance(value, bool):
        text = "on" if value else "off"
    elif isinstance(value, (int, float)):
        text = f"{value:g}"
    elif isinstance(value, list) and value and all(isinstance(r, (list, tuple)) for r in value):
        text = f"table of {len(value)} rows"
    elif isinstance(value, (list, tuple)):
        text = "(" + ", ".join(fmt_value(v) for v in value) + ")"
    elif value is None:
        text = "none"
    else:
        text = str(value)
    unit = UNITS.get(leaf)
    if unit and isinstance(value, (int, float)) and not isinstance(value, bool):
        text += f" {unit}"
    return text


def _subject(path) -> str:
    """Who the change is about: the group, region or probe, then the setting."""
    section, rest = path[0], list(path[1:])
    if section in ("boundary", "material", "probe") and rest:
        who = rest.pop(0)
        rest = [r for r in rest if r != "value"]
    elif section == "time":
        who = ""
    else:
        who = section
    words = [WORDS.get(r, r.replace("_", " ")) for r in rest]
    if section == "boundary" and len(rest) >= 2 and rest[-1] in ("over", "at", "start", "end"):
        words = [rest[-2], WORDS[rest[-1]]]
    if section == "time" and rest == ["end"]:
        words = ["end time"]
    return " ".join(w for w in [who] + words if w)


def change_phrases(old: dict, new: dict) -> list[str]:
    """One phrase per changed setting, e.g. ``"bore ramp over 300 s -> 600 s"``."""
    a, b = flatten(old), flatten(new)
    phrases = []
    for path in sorted(set(a) | set(b), key=lambda p: (p[0] != "boundary", p)):
        if _ignored(path) or a.get(path) == b.get(path):
            continue
        leaf = path[-1]
        before = "unset" if path not in a else fmt_value(a[path], leaf)
        after = "unset" if path not in b else fmt_value(b[path], leaf)
        phrases.append(f"{_subject(path)} {before} -> {after}")
    return phrases


def run_label(old, new: dict, limit: int = 3) -> str:
    """A short label for a run of ``new``, after a run of ``old`` (None for the first)."""
    if old is None:
        return "first run"
    phrases = _collapse_kind_changes(old, new) or change_phrases(old, new)
    if not phrases:
        return "same case again"
    if len(phrases) > limit:
        return "; ".join(phrases[:limit]) + f"; and {len(phrases) - limit} more"
    return "; ".join(phrases)


def _collapse_kind_changes(old: dict, new: dict) -> list[str]:
    """When a group's condition changed kind or schedule type, say so in one phrase."""
    phrases = []
    ob, nb = old.get("boundary", {}), new.get("boundary", {})
    changed_groups = set()
    for g in sorted(set(ob) | set(nb)):
        o, n = ob.get(g, {}), nb.get(g, {})
        ko, kn = o.get("kind", "insulated"), n.get("kind", "insulated")
        so, sn = _schedule_type(o), _schedule_type(n)
        if ko != kn or so != sn:
            phrases.append(f"{g} {_kind_text(ko, so)} -> {_kind_text(kn, sn)}")
            changed_groups.add(g)
    if not phrases:
        return []
    rest_old = {k: v for k, v in old.items() if k != "boundary"} | {
        "boundary": {g: v for g, v in ob.items() if g not in changed_groups}
    }
    rest_new = {k: v for k, v in new.items() if k != "boundary"} | {
        "boundary": {g: v for g, v in nb.items() if g not in changed_groups}
    }
    return phrases + change_phrases(rest_old, rest_new)


def _schedule_type(bc: dict) -> str:
    for name in ("ramp", "table"):
        if name in bc:
            return name
    return "constant" if ("value" in bc or "ambient" in bc) else ""


def _kind_text(kind: str, schedule: str) -> str:
    kind = kind.replace("_", " ")
    return f"{kind} {schedule}" if schedule and schedule != "constant" else kind
