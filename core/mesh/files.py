"""Reading a mesh file into meshio's layout, every failure a MeshError that gives the cause.

meshio reads most formats; .inp decks first go through a tolerant pass
(:mod:`heatsoak.core.mesh.inp_prepass`); MSH files meshio cannot read (MSH 4.0, ...)
are read with gmsh's own API when it is installed (:mod:`heatsoak.core.mesh.gmsh_reader`).
Messages say what went wrong: the file is missing or not readable (permission), its
content is not of the format its extension names, or it is that format but broken.
"""

from __future__ import annotations

import contextlib
import io
import os
import tempfile
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path

import numpy as np
from heatsoak.core.errors import MeshError
from heatsoak.core.mesh.exodus import name_blocks
from heatsoak.core.mesh.gmsh_reader import read_with_gmsh
from heatsoak.core.mesh.inp_prepass import normalised_deck
from heatsoak.core.mesh.msh_check import bad_node_reference
from heatsoak.core.mesh.packed import check_unpacked_size

#: How files of a meshio format begin (bytes after leading white space), for telling a
#: file of another kind from a broken one. Formats not listed are not judged.
SIGNATURES = {
    "gmsh": (b"$MeshFormat", b"$NOD", b"$PhysicalNames", b"$Comments"),
    "vtu": (b"<?xml", b"<VTKFile"),
    "xdmf": (b"<?xml", b"<Xdmf"),
    "vtk": (b"# vtk DataFile",),
    "med": (b"\x89HDF",),
    "medit": (b"MeshVersionFormatted",),
    "ansys": (b"(",),
}


def formats_of(path: Path) -> list:
    """meshio format names for the file's extension, gmsh first (.msh is also ANSYS's)."""
    import meshio

    table = meshio.extension_to_filetypes
    suffix = "".join(path.suffixes[-2:]).lower()
    formats = table.get(suffix) or table.get(path.suffix.lower()) or []
    return sorted(formats, key=lambda f: f != "gmsh")


def _reader(fmt: str):
    """meshio's reader of ``fmt``: called directly because meshio.read() prints
    and exits the interpreter when a reader fails."""
    import meshio

    try:
        from meshio._helpers import reader_map

        return reader_map[fmt]
    except (ImportError, KeyError):  # a meshio that moved its table: the public call
        return lambda name: meshio.read(name, file_format=fmt)


def _reader_problem(fmt: str, exc: BaseException) -> str:
    """One line saying why the ``fmt`` reader failed, in words where the exception has none."""
    if isinstance(exc, KeyError):
        # readers look nodes and sets up by their ids: a missing one is a broken reference
        key = exc.args[0] if exc.args else "?"
        key = key.item() if isinstance(key, np.generic) else key
        return f"as {fmt}: it refers to a node, element or set {key!r} that it does not define"
    if isinstance(exc, ModuleNotFoundError):
        return f"as {fmt}: meshio needs the Python package {exc.name!r} for it (pip install {exc.name})"
    if fmt == "gmsh" and "Incompatible cell data 'gmsh:physical'" in str(exc):
        # meshio's msh 4 reader fails when some elements are in a physical group and others not
        return ("as gmsh: saved with Mesh.SaveAll=1 beside physical groups, which meshio cannot read; "
                "put every volume in a physical volume and save without Mesh.SaveAll")
    return f"as {fmt}: {type(exc).__name__}: {exc}" if str(exc) else f"not readable as {fmt}"


def _check_readable(path: Path) -> None:
    """MeshError when ``path`` is missing, not a file, or not readable by this user."""
    if not path.exists():
        raise MeshError(f"mesh file {path} not found")
    if not path.is_file():
        raise MeshError(f"mesh file {path} is not a regular file")
    try:
        with path.open("rb") as f:
            f.read(1)
    except PermissionError:
        raise MeshError(f"cannot read mesh file {path}: permission denied (the file's owner must allow reading it)") from None
    except OSError as exc:
        raise MeshError(f"cannot read mesh file {path}: {exc.strerror or exc}") from None


def _head(path: Path) -> bytes:
    with path.open("rb") as f:
        return f.read(512).lstrip()


def _unrecognised(path: Path, formats: list) -> str | None:
    """A message when the file begins like none of ``formats`` that have a known beginning."""
    judged = [f for f in formats if f in SIGNATURES]
    if not judged or len(judged) < len(formats):
        return None
    head = _head(path)
    if any(head.startswith(s) for f in judged for s in SIGNATURES[f]):
        return None
    shown = head[:24].decode("ascii", errors="replace").replace("\n", " ")
    return (f"{path}: format not recognised: a {path.suffix} file should be {' or '.join(judged)}, "
            f"which begins {' or '.join(repr(s.decode('latin-1')) for f in judged for s in SIGNATURES[f][:1])}, "
            f"but this one begins {shown!r}")


def _meshio_read(fmt: str, name: str):
    """(raw, notes) from meshio's ``fmt`` reader, what it prints kept as notes."""
    out = io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(out):
        raw = _reader(fmt)(name)
    return raw, tuple(f"reader: {line.strip()}" for line in out.getvalue().splitlines() if line.strip())


def _read_msh(path: Path):
    """meshio's MSH reader, the node-number check parsing the file beside it (numpy releases the GIL)."""
    with ThreadPoolExecutor(1) as pool:
        check = pool.submit(_check_msh_nodes, path)
        raw = _meshio_read("gmsh", str(path))
        check.result()
    return raw


def _read_inp(path: Path):
    """An .inp deck through the tolerant pass, then meshio."""
    text, notes = normalised_deck(path)
    with tempfile.TemporaryDirectory(prefix="heatsoak-inp-") as tmp:
        name = os.path.join(tmp, "deck.inp")
        with open(name, "w") as f:
            f.write(text)
        raw, more = _meshio_read("abaqus", name)
    return raw, (*notes, *more)


def _check_msh_nodes(path: Path) -> None:
    """MeshError for an element of an ASCII MSH file referring to a node number below 1."""
    bad = bad_node_reference(path)
    if bad:
        raise MeshError(f"{path}: element {bad[0]} refers to node {bad[1]}: node numbers start at 1, "
                        "so it cannot be negative or zero (a broken or hand-edited file)")


def read_raw(path: Path):
    """The mesh at ``path`` in meshio's layout, and notes (what readers printed or skipped).

    Raises
    ------
    MeshError
        Missing or unreadable file, unknown extension, content not of the format, broken
        content; the message names the file and the cause.
    """
    import meshio

    path = Path(path)
    _check_readable(path)
    check_unpacked_size(path)  # a zip bomb is refused before a reader unpacks it
    formats = formats_of(path)
    if not formats:
        known = ", ".join(sorted(meshio.extension_to_filetypes))
        raise MeshError(f"{path}: unknown mesh file extension {path.suffix!r}; readable: {known}")
    wrong = _unrecognised(path, formats)
    if wrong:
        raise MeshError(wrong)
    problems = []
    for fmt in formats:
        try:
            if fmt == "abaqus":
                return _read_inp(path)
            raw, notes = _read_msh(path) if fmt == "gmsh" else _meshio_read(fmt, str(path))
            if fmt == "exodus":
                raw, more = name_blocks(raw, path)
                notes = (*notes, *more)
            return raw, notes
        except MeshError:
            raise
        except (Exception, SystemExit) as exc:  # noqa: BLE001 - each reader fails its own way on a bad file
            problems.append(_reader_problem(fmt, exc))
    if "gmsh" in formats and _head(path).startswith(SIGNATURES["gmsh"]):
        return read_with_gmsh(path, "; ".join(problems)), (f"read with gmsh's own reader ({problems[0]})",)
    raise MeshError(f"cannot read mesh file {path} (corrupt or truncated?): {'; '.join(problems)}")
