"""A tolerant first pass over an Abaqus-style .inp deck, before meshio reads it.

meshio's reader takes a narrow subset of the format. This pass rewrites a deck into
that subset, keeping what a heat model needs (nodes, elements, element sets):

* ``**`` comments dropped; keyword lines that end in a comma joined with the next
  line (continuation lines); ``*INCLUDE, INPUT=...`` files inlined;
* every ``*NODE`` block gathered into one (meshio keeps only the last one);
* solid element types named by their node count: ``C3D10``, ``C3D10M``, ``DC3D10``,
  ``C3D10T``, ... are all read as ``C3D10`` (same node order); element types meshio
  does not know (6-node plane triangles, ...) are skipped and listed in a note;
* ``ELSET=`` on an ``*ELEMENT`` line turned into an ``*ELSET`` block of element
  numbers (meshio mixes up blocks that share one set name), ``GENERATE`` ranges and
  sets of sets expanded, repeated sets joined; every set written after all elements;
* other keywords and their data dropped.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field
from pathlib import Path

from heatsoak.core.errors import MeshError

#: Element types meshio reads, when its table cannot be imported.
_FALLBACK_TYPES = {"C3D4", "C3D10", "C3D8", "C3D20", "C3D6", "C3D15", "S3", "S3R", "STRI3", "R3D3", "CPS3",
                   "STRI65", "CPE6", "S4", "S4R", "CPS4", "T3D2", "B31"}
#: Solid elements: optional "D" (heat transfer), "C3D", node count, any letters (hybrid, modified, ...).
_SOLID = re.compile(r"^D?C3D(4|6|8|10|15|20)[A-Z]*$")
MAX_INCLUDE_DEPTH = 10


def _known_types() -> set:
    try:
        from meshio.abaqus._abaqus import abaqus_to_meshio_type
    except ImportError:
        return set(_FALLBACK_TYPES)
    return {k for k, v in abaqus_to_meshio_type.items() if v != "tetra4"}  # meshio's C3D4H is not a cell type


def canonical_type(name: str, known: set) -> str | None:
    """The element type meshio should read for deck type ``name``, or None to skip it."""
    name = name.strip().upper()
    solid = _SOLID.match(name)
    if solid:
        return f"C3D{solid.group(1)}"
    return name if name in known else None


def _params(line: str) -> dict:
    """{KEY: value or None} of a keyword line's parameters (keys upper case)."""
    out = {}
    for part in line.split(",")[1:]:
        key, _, value = part.partition("=")
        if key.strip():
            out[key.strip().upper()] = value.strip() if value else None
    return out


def _lines(path: Path, depth: int = 0):
    """Logical lines of a deck: comments and blank lines dropped, includes inlined,
    continued keyword lines joined."""
    if depth > MAX_INCLUDE_DEPTH:
        raise MeshError(f"{path}: *INCLUDE nested more than {MAX_INCLUDE_DEPTH} deep (a file including itself?)")
    try:
        text = path.read_text(errors="replace")
    except OSError as exc:
        raise MeshError(f"cannot read included deck {path}: {exc.strerror or exc}") from None
    pending = ""
    for raw in text.splitlines():
        line = raw.strip()
        if not line or line.startswith("**"):
            continue
        if pending:
            line, pending = pending + line, ""
        if line.startswith("*") and line.endswith(","):
            pending = line
            continue
        if line.startswith("*") and line.split(",")[0].strip().upper() == "*INCLUDE":
            name = _params(line).get("INPUT") or ""
            inc = Path(name.strip("\"'"))
            yield from _lines(inc if inc.is_absolute() else path.parent / inc, depth + 1)
            continue
        yield line
    if pending:
        yield pending


@dataclass
class _Deck:
    nodes: list = field(default_factory=list)
    elements: list = field(default_factory=list)  # (type, [records])
    sets: dict = field(default_factory=dict)  # name -> list of element numbers (str)
    skipped: dict = field(default_factory=dict)  # type -> count
    notes: list = field(default_factory=list)


def _records(lines: list) -> list:
    """Element data lines joined where a line ends in a comma (a record continued)."""
    out, pending = [], ""
    for line in lines:
        pending += line
        if not line.endswith(","):
            out.append(pending)
            pending = ""
    if pending:
        out.append(pending.rstrip(","))
    return out


def _element_block(deck: _Deck, params: dict, data: list, known: set):
    kind = params.get("TYPE") or ""
    records = _records(data)
    target = canonical_type(kind, known)
    if target is None:
        deck.skipped[kind] = deck.skipped.get(kind, 0) + len(records)
        return
    deck.elements.append((target, records))
    if params.get("ELSET"):
        deck.sets.setdefault(params["ELSET"], []).extend(r.split(",")[0].strip() for r in records)


def _set_block(deck: _Deck, params: dict, data: list):
    name = params.get("ELSET") or ""
    tokens = [t.strip() for line in data for t in line.split(",") if t.strip()]
    members = deck.sets.setdefault(name, [])
    if "GENERATE" in params:
        try:
            first, last, *step = (int(t) for t in tokens[:3])
        except ValueError:
            raise MeshError(f"*ELSET, ELSET={name}, GENERATE: expected 'first, last, step', got {tokens[:3]}") from None
        members.extend(str(i) for i in range(first, last + 1, step[0] if step else 1))
        return
    for t in tokens:
        if t.lstrip("-").isdigit():
            members.append(t)
        elif t in deck.sets:
            members.extend(deck.sets[t])
        else:
            deck.notes.append(f"element set {name} names a set {t!r} the deck does not define before it (ignored)")


def parse(path: Path) -> _Deck:
    """Nodes, element blocks and element sets of the deck at ``path``."""
    known = _known_types()
    deck = _Deck()
    keyword, params, data = None, {}, []

    def close():
        if keyword == "*NODE":
            deck.nodes.extend(line.rstrip(",") for line in data)
        elif keyword == "*ELEMENT":
            _element_block(deck, params, data, known)
        elif keyword == "*ELSET":
            _set_block(deck, params, data)

    for line in _lines(path):
        if line.startswith("*"):
            close()
            keyword, params, data = line.split(",")[0].strip().upper(), _params(line), []
        else:
            data.append(line)
    close()
    return deck


def normalised_deck(path: Path) -> tuple:
    """The deck at ``path`` rewritten for meshio's reader, and notes of what was skipped.

    Returns
    -------
    text : str
    notes : tuple of str
    """
    deck = parse(path)
    out = ["*NODE", *deck.nodes]
    for kind, records in deck.elements:
        out += [f"*ELEMENT, TYPE={kind}", *records]
    for name, members in deck.sets.items():
        if members:
            out.append(f"*ELSET, ELSET={name}")
            out += [", ".join(members[i : i + 16]) for i in range(0, len(members), 16)]
    notes = list(deck.notes)
    if deck.skipped:
        listed = ", ".join(f"{k or '(no TYPE)'} {n}" for k, n in deck.skipped.items())
        notes.append(f"skipped elements of types heatsoak does not read: {listed}")
    return "\n".join(out) + "\n", tuple(notes)
