"""Node references of an ASCII gmsh MSH file (2.2 or 4.x) that meshio reads silently wrong.

gmsh numbers nodes from 1. meshio maps an element's node numbers through a table
indexed by number - 1, so a node number 0 or below wraps around to some other node
instead of failing: the element then has the wrong shape (often zero volume), and
the message would name the symptom, not the cause. This scans the ``$Elements``
section, block by block (4.x) or by line length (2.2), with numpy.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np


def _node_counts() -> np.ndarray:
    """Number of nodes of each gmsh element type (index: type), from meshio's tables; 0 where unknown."""
    try:
        from meshio._common import num_nodes_per_cell
        from meshio.gmsh.common import _gmsh_to_meshio_type
    except ImportError:
        return np.zeros(1, dtype=np.int64)
    known = {t: num_nodes_per_cell[m] for t, m in _gmsh_to_meshio_type.items() if m in num_nodes_per_cell}
    table = np.zeros(max(known) + 1, dtype=np.int64)
    table[list(known)] = list(known.values())
    return table


def _section_body(text: bytes, name: bytes) -> bytes:
    """The bytes of section ``name`` after its opening line, up to its closing one (b"" if absent)."""
    start = text.find(b"$" + name)
    end = text.find(b"$End" + name, start)
    if start < 0 or end < 0:
        return b""
    first = text.find(b"\n", start, end)
    return b"" if first < 0 else text[first + 1:end]


def _section(text: bytes, name: bytes) -> list:
    """The lines of section ``name`` between its opening and closing lines."""
    return _section_body(text, name).splitlines()


def _bad_v2(lines: list, counts: np.ndarray):
    """(element number, node number) of the first element line referring to a node <= 0, or None.

    Lines are "number type n_tags tags... nodes...": the nodes are the last ones, as many as
    the type has; all tokens are read at once and each is given its line and place from the end.
    """
    body = b"\n".join(lines[1:])
    chars = np.frombuffer(body, dtype=np.uint8)
    space = (chars == ord(" ")) | (chars == ord("\n")) | (chars == ord("\t")) | (chars == ord("\r"))
    starts = np.flatnonzero(~space & np.concatenate([[True], space[:-1]]))
    line = np.searchsorted(np.flatnonzero(chars == ord("\n")), starts)  # line of each token
    tokens = np.array(body.split(), dtype=np.int64)
    if len(tokens) != len(starts) or not len(tokens):
        return None
    first = np.searchsorted(line, np.arange(line[-1] + 1))  # first token of each line
    size = np.diff(np.append(first, len(tokens)))
    kind = tokens[np.minimum(first + 1, len(tokens) - 1)]
    k = counts[np.clip(kind, 0, len(counts) - 1)]
    from_end = (first + size)[line] - np.arange(len(tokens))  # 1 for a line's last token
    bad = (from_end <= k[line]) & (tokens <= 0)
    if not bad.any():
        return None
    t = int(np.argmax(bad))
    return int(tokens[first[line[t]]]), int(tokens[t])


def _bad_v4(body: bytes, counts: np.ndarray):
    """As :func:`_bad_v2` for MSH 4.x: blocks of elements of one type after a 4-number header.

    Every number of the section is parsed at once (``np.fromstring`` in text mode, several times
    faster than splitting into Python objects), then the blocks are walked by their headers.
    """
    tokens = np.fromstring(body, dtype=np.int64, sep=" ")  # noqa: NPY201 - the text mode is not deprecated
    if len(tokens) < 4:
        return None
    at = 4  # numEntityBlocks numElements minElementTag maxElementTag
    for _ in range(int(tokens[0])):
        if at + 4 > len(tokens):
            return None
        kind, n = int(tokens[at + 2]), int(tokens[at + 3])
        width = 1 + int(counts[kind]) if 0 <= kind < len(counts) else 1
        at += 4
        if width == 1 or at + n * width > len(tokens):
            return None  # a type this does not know, or a short section: the reader says what is wrong
        block = tokens[at:at + n * width].reshape(n, width)
        bad = block[:, 1:] <= 0
        if bad.any():
            row = int(np.argmax(bad.any(axis=1)))
            return int(block[row, 0]), int(block[row, 1:][bad[row]][0])
        at += n * width
    return None


def bad_node_reference(path: Path):
    """(element number, node number) of the first element of an ASCII MSH file that refers to a
    node number below 1, or None (also for binary files and formats this does not know)."""
    text = Path(path).read_bytes()
    fmt = _section(text, b"MeshFormat")
    if not fmt or len(fmt[0].split()) < 2 or fmt[0].split()[1] != b"0":  # version, file type (0: ASCII)
        return None
    try:
        if fmt[0].startswith(b"4"):
            return _bad_v4(_section_body(text, b"Elements"), _node_counts())
        return _bad_v2(_section(text, b"Elements"), _node_counts()) if fmt[0].startswith(b"2") else None
    except ValueError:  # a malformed section: the reader has said what is wrong with it
        return None
