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

import numpy as np
from heatsoak.core.errors import MeshError

#: Element types meshio reads, when its table cannot be imported.
_FALLBACK_TYPES = {"C3D4", "C3D10", "C3D8", "C3D20", "C3D6", "C3D15", "S3", "S3R", "STRI3", "R3D3", "CPS3",
                   "STRI65", "CPE6", "S4", "S4R", "CPS4", "T3D2", "B31"}
#: Solid elements: optional "D" (heat transfer), "C3D", node count, any letters (hybrid, modified, ...).
_SOLID = re.compile(r"^D?C3D(4|6|8|10|15|20)[A-Z]*$")
MAX_INCLUDE_DEPTH = 10

# Faces S1, S2, ... of solid elements by their corner nodes (0-based; the deck format's numbering,
# from memory): tetrahedra, hexahedra, wedges.
_TET_FACES = ((0, 1, 2), (0, 3, 1), (1, 3, 2), (2, 3, 0))
_HEX_FACES = ((0, 1, 2, 3), (4, 7, 6, 5), (0, 4, 5, 1), (1, 5, 6, 2), (2, 6, 7, 3), (3, 7, 4, 0))
_WEDGE_FACES = ((0, 1, 2), (3, 5, 4), (0, 3, 4, 1), (1, 4, 5, 2), (2, 5, 3, 0))
FACES = {"C3D4": _TET_FACES, "C3D10": _TET_FACES, "C3D8": _HEX_FACES, "C3D20": _HEX_FACES,
         "C3D6": _WEDGE_FACES, "C3D15": _WEDGE_FACES}


def _known_types() -> dict:
    """{deck element type meshio reads: its number of nodes, or None when not known here}."""
    try:
        from meshio._common import num_nodes_per_cell
        from meshio.abaqus._abaqus import abaqus_to_meshio_type
    except ImportError:
        return dict.fromkeys(_FALLBACK_TYPES)
    # meshio's C3D4H maps to "tetra4", which is not a cell type
    return {k: num_nodes_per_cell.get(v) for k, v in abaqus_to_meshio_type.items() if v != "tetra4"}


def canonical_type(name: str, known) -> str | None:
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
    elements: list = field(default_factory=list)  # (type, (n, 1 + nodes) int array: number, nodes)
    sets: dict = field(default_factory=dict)  # name -> list of element numbers (str)
    surfaces: dict = field(default_factory=dict)  # name -> [(element number or set, "S1"), ...]
    internal: set = field(default_factory=set)  # set names the deck marks internal (not regions)
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


def _element_block(deck: _Deck, params: dict, data: list, known: dict):
    kind = params.get("TYPE") or ""
    target = canonical_type(kind, known)
    if target is None:
        deck.skipped[kind] = deck.skipped.get(kind, 0) + len(_records(data))
        return
    nodes = int(target[3:]) if _SOLID.match(target) else known.get(target)
    tokens = [t for line in data for t in line.split(",") if t.strip()]
    if nodes is None:  # rows as the deck's records
        rows = [r.rstrip(",").split(",") for r in _records(data)]
        nodes = len(rows[0]) - 1 if rows else 1
        tokens = [t for r in rows for t in r]
    if len(tokens) % (nodes + 1):
        raise MeshError(f"*ELEMENT, TYPE={kind}: {len(tokens)} numbers, not a whole number of elements of "
                        f"{nodes} nodes plus the element number")
    try:
        rows = np.array(tokens, dtype=np.int64).reshape(-1, nodes + 1)
    except ValueError:
        raise MeshError(f"*ELEMENT, TYPE={kind}: element data that are not whole numbers") from None
    deck.elements.append((target, rows))
    if params.get("ELSET"):
        deck.sets.setdefault(params["ELSET"], []).extend(rows[:, 0].astype(str).tolist())


def _surface_block(deck: _Deck, params: dict, data: list):
    """*SURFACE of element faces: (element number or element set, face label) per line."""
    name = params.get("NAME") or ""
    if (params.get("TYPE") or "ELEMENT").upper() != "ELEMENT":
        deck.notes.append(f"surface {name} is given by nodes, not element faces (not used)")
        return
    for line in data:
        parts = [t.strip() for t in line.split(",")]
        if len(parts) >= 2 and parts[0]:
            deck.surfaces.setdefault(name, []).append((parts[0], parts[1].upper()))


def _set_block(deck: _Deck, params: dict, data: list):
    name = params.get("ELSET") or ""
    if "INTERNAL" in params:
        deck.internal.add(name)
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
        elif keyword == "*SURFACE":
            _surface_block(deck, params, data)

    parts = 0
    for line in _lines(path):
        if line.startswith("*"):
            close()
            keyword, params, data = line.split(",")[0].strip().upper(), _params(line), []
            parts += keyword == "*PART"
        else:
            data.append(line)
    close()
    _check_node_numbers(deck, parts, path)
    return deck


def _check_node_numbers(deck: _Deck, parts: int, path: Path) -> None:
    """MeshError when node numbers repeat: several parts numbered alike, which one flat mesh cannot hold."""
    numbers = [line.split(",", 1)[0].strip() for line in deck.nodes]
    unique, counts = np.unique(numbers, return_counts=True)
    if (counts > 1).any():
        again = unique[counts > 1]
        why = f"the deck has {parts} parts numbered alike; " if parts > 1 else ""
        raise MeshError(f"{path}: {len(again)} node numbers are defined more than once (first: {again[0]}): {why}"
                        "export the model as one mesh with one numbering (a flat deck without parts)")


def normalised_deck(path: Path) -> tuple:
    """The deck at ``path`` rewritten for meshio's reader, and notes of what was skipped.

    Returns
    -------
    text : str
    notes : tuple of str
    """
    deck = parse(path)
    if not deck.nodes and not deck.elements and not deck.skipped:
        raise MeshError(f"{path}: format not recognised: a deck should hold *NODE and *ELEMENT keyword lines, "
                        "this file holds neither")
    _surface_elements(deck)
    out = ["*NODE", *deck.nodes]
    for kind, rows in deck.elements:
        out += [f"*ELEMENT, TYPE={kind}", *(", ".join(r) for r in rows.astype(str).tolist())]
    for name, members in deck.sets.items():
        if members and name not in deck.internal:
            out.append(f"*ELSET, ELSET={name}")
            out += [", ".join(members[i : i + 16]) for i in range(0, len(members), 16)]
    notes = list(deck.notes)
    if deck.skipped:
        listed = ", ".join(f"{k or '(no TYPE)'} {n}" for k, n in deck.skipped.items())
        notes.append(f"skipped elements of types heatsoak does not read: {listed}")
    return "\n".join(out) + "\n", tuple(notes)


def _element_index(deck: _Deck):
    """Element numbers sorted, with the block and row of each."""
    sizes = [len(rows) for _, rows in deck.elements]
    ids = np.concatenate([rows[:, 0] for _, rows in deck.elements] + [np.empty(0, np.int64)])
    block = np.repeat(np.arange(len(sizes)), sizes)
    row = np.concatenate([np.arange(n) for n in sizes] + [np.empty(0, np.int64)])
    order = np.argsort(ids, kind="stable")
    return ids[order], block[order], row[order]


def _face_corners(deck: _Deck, index, name: str, ref: str, face: str) -> list:
    """Corner nodes (k, 3 or 4) of face ``face`` of the elements ``ref`` (a number or a set)."""
    ids, block, row = index
    wanted = np.array([ref] if ref.lstrip("-").isdigit() else deck.sets.get(ref, []), dtype=np.int64)
    at = np.clip(np.searchsorted(ids, wanted), 0, max(len(ids) - 1, 0))
    hit = at[ids[at] == wanted] if len(ids) else at[:0]
    if len(hit) < len(wanted) or not len(wanted):
        deck.notes.append(f"surface {name} refers to {ref!r}, which names no element read (not used)")
    k = int(face[1:]) - 1 if face[1:].isdigit() else -1
    out = []
    for b in np.unique(block[hit]):
        kind, rows = deck.elements[b]
        table = FACES.get(kind, ())
        if 0 <= k < len(table):
            out.append(rows[row[hit[block[hit] == b]], 1:][:, list(table[k])])
        else:
            deck.notes.append(f"surface {name}: face {face} of {kind} elements is not read (not used)")
    return out


def _surface_elements(deck: _Deck) -> None:
    """Each element-face surface as triangle (S3) and quadrilateral (S4) elements in a set of its name."""
    if not deck.surfaces:
        return
    index = _element_index(deck)
    faces = [(name, c) for name, refs in deck.surfaces.items() for ref, face in refs
             for c in _face_corners(deck, index, name, ref, face)]
    next_id = int(index[0][-1]) + 1 if len(index[0]) else 1
    for size, kind in ((3, "S3"), (4, "S4")):
        mine = [(name, c) for name, c in faces if c.shape[1] == size]
        if not mine:
            continue
        numbers = next_id + np.arange(sum(len(c) for _, c in mine))
        next_id += len(numbers)
        deck.elements.append((kind, np.hstack([numbers[:, None], np.vstack([c for _, c in mine])])))
        for (name, _), part in zip(mine, np.split(numbers, np.cumsum([len(c) for _, c in mine])[:-1])):
            deck.sets.setdefault(name, []).extend(part.astype(str).tolist())
