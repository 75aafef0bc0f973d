"""Changes to a case given as ``KEY=VALUE`` text, as on the command line (``--set``, ``--vary``).

KEY is a dotted path into the case's tables: ``boundary.bore.ramp.over``,
``time.step``, ``initial.temperature``. An element of the ``[[probe]]`` list is
reached by its position from 0 (``probe.0.threshold``) or by its name
(``probe.sleeve.threshold``).

VALUE is a TOML value: ``300``, ``1.5e3``, ``"lumped"``, ``[0, 16, 10]``,
``{ start = 22, end = 200, at = 0, over = 300 }``. A value that is not valid
TOML is taken as text when it is one plain word: no spaces and none of
``[ ] { } " ' = ,`` (so ``mesh.file=platen.msh`` and
``time.theta=crank-nicolson`` need no quotes); anything else that does not
parse is an error showing TOML's reason.

Applying a change never alters its input: it returns a new case dict.
Missing tables on the way are created (``boundary.lid.kind=...`` adds the
table ``boundary.lid``); the case check then reports whatever the new
table still lacks. Setting one of the exclusive schedule forms (``value``,
``ramp``, ``table``) drops the others from the same table, so
``boundary.base.table=[[0, 20], [600, 80]]`` replaces a ramp.
"""

from __future__ import annotations

import copy
from pathlib import Path

try:
    import tomllib
except ModuleNotFoundError:  # Python 3.10
    import tomli as tomllib

from heatsoak.core.case.casefile import Case, case_from_data, read_case_toml
from heatsoak.core.case.check import SCHEDULE_KEYS
from heatsoak.core.errors import CaseError

__all__ = ["apply_assignment", "apply_assignments", "load_case_with", "parse_assignment", "parse_value"]

_TOML_PUNCTUATION = set("[]{}\"'=,")


def parse_value(text: str, key: str = "value"):
    """The TOML value of ``text``, or ``text`` itself when it is one plain word.

    Parameters
    ----------
    text : str
        A TOML value (``300``, ``"x"``, ``[1, 2]``, ``{ a = 1 }``) or a bare word.
    key : str
        Named in the error message.
    """
    stripped = text.strip()
    try:
        return tomllib.loads(f"v = {stripped}")["v"]
    except tomllib.TOMLDecodeError as exc:
        plain = stripped and not (_TOML_PUNCTUATION & set(stripped)) and not any(c.isspace() for c in stripped)
        if plain:
            return stripped
        raise CaseError(f"{key}: {text!r} is not a TOML value ({exc}); write text in quotes, lists as "
                        "[a, b] and tables as { name = value, ... }") from None


def parse_assignment(text: str) -> tuple:
    """``(key, value)`` of one ``KEY=VALUE`` text; CaseError naming the text if malformed.

    The key is split at the first ``=``; the value is read by :func:`parse_value`.
    """
    if "=" not in text:
        raise CaseError(f"{text!r}: expected KEY=VALUE, e.g. boundary.bore.ramp.over=300")
    key, value = text.split("=", 1)
    key = key.strip()
    parts = key.split(".")
    if not key or any(not p.strip() or p != p.strip() for p in parts):
        raise CaseError(f"{text!r}: the key {key!r} must be names joined by dots, e.g. time.step")
    if not value.strip():
        raise CaseError(f"{text!r}: no value after '=' for {key}")
    return key, parse_value(value, key)


def _list_index(items: list, part: str, where: str) -> int:
    """Position in a list of tables of ``part``: an index from 0 or an element's ``name``."""
    if part.lstrip("-").isdigit():
        i = int(part)
        if 0 <= i < len(items):
            return i
        raise CaseError(f"{where}.{part}: there are {len(items)} entries in {where} (0 to {len(items) - 1})")
    names = [t.get("name") for t in items if isinstance(t, dict)]
    if part in names:
        return names.index(part)
    raise CaseError(f"{where}.{part}: no entry named {part!r} in {where}; "
                    f"use a position 0..{len(items) - 1} or one of {names}")


def _join(where: str, part: str) -> str:
    return f"{where}.{part}" if where else part


def _child(node, part: str, where: str):
    """The container below ``node`` at ``part``, created as an empty table if missing."""
    if isinstance(node, list):
        return node[_list_index(node, part, where)]
    if part not in node:
        node[part] = {}
    child = node[part]
    if not isinstance(child, (dict, list)):
        raise CaseError(f"{_join(where, part)} is the value {child!r}, not a table, so nothing can be set inside it")
    return child


def _set_leaf(node, part: str, value, where: str) -> None:
    if isinstance(node, list):
        node[_list_index(node, part, where)] = value
        return
    if part in SCHEDULE_KEYS:
        for other in SCHEDULE_KEYS:
            node.pop(other, None)
    node[part] = value


def apply_assignment(data: dict, key: str, value) -> dict:
    """A copy of case ``data`` with ``value`` set at the dotted ``key`` (``data`` is not changed).

    Parameters
    ----------
    data : dict
        Case tables as read from TOML.
    key : str
        Dotted path, e.g. ``boundary.bore.ramp.over`` or ``probe.sleeve.threshold``.
    value : object
        A TOML value (number, text, list, table).

    Raises
    ------
    CaseError
        When a part of the path is a plain value or names no element of a list.
    """
    new = copy.deepcopy(data)
    parts = key.split(".")
    node, where = new, ""
    for part in parts[:-1]:
        node = _child(node, part, where)
        where = _join(where, part)
    _set_leaf(node, parts[-1], copy.deepcopy(value), where)
    return new


def apply_assignments(data: dict, assignments) -> dict:
    """``data`` with each ``KEY=VALUE`` text (or ``(key, value)`` pair) applied in order."""
    for item in assignments:
        key, value = parse_assignment(item) if isinstance(item, str) else item
        data = apply_assignment(data, key, value)
    return data


def load_case_with(path, assignments=()) -> Case:
    """Read the case file ``path``, apply ``assignments`` and return the checked :class:`Case`.

    File names in the case (mesh, tables, initial field) stay relative to the
    original file's folder. Problems are reported as for the file itself,
    with the keys the assignments set.
    """
    path = Path(path)
    data = apply_assignments(read_case_toml(path), assignments)
    return case_from_data(data, path.parent, path=path)
