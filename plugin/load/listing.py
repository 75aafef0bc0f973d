"""The data folder: list mesh and case files, resolve names safely, store uploads.

Browsing never leaves the data folder: every name from the browser is
resolved and checked to lie inside it.
"""

from __future__ import annotations

import re
from pathlib import Path

from heatsoak.core.errors import InputError

#: File endings offered in the file list (meshes meshio reads, and cases).
MESH_SUFFIXES = (".msh", ".vtu", ".vtk", ".xdmf", ".xmf", ".inp", ".med", ".mesh", ".obj", ".stl")
CASE_SUFFIXES = (".toml",)
#: Largest upload accepted [bytes].
MAX_UPLOAD_BYTES = 200_000_000


def inside(root, name) -> Path:
    """``root / name`` resolved, refusing anything outside ``root``.

    Raises
    ------
    InputError
        When ``name`` is absolute or climbs out of ``root`` (``..``, links).
    """
    root = Path(root).resolve()
    candidate = (root / str(name)).resolve()
    if Path(str(name)).is_absolute() or (candidate != root and root not in candidate.parents):
        raise InputError(f"file {name!r}: only files inside the data folder can be opened")
    return candidate


def list_files(root, sub: str = "") -> list[dict]:
    """Folders and usable files of ``root/sub``, folders first.

    Returns
    -------
    list of dict
        ``{"name", "path" (relative to root), "kind" ("folder"|"mesh"|"case"), "size" (bytes)}``.
    """
    root_r = Path(root).resolve()
    here = inside(root_r, sub or ".")
    rows = []
    for p in sorted(here.iterdir(), key=lambda p: (not p.is_dir(), p.name.lower())):
        if p.name.startswith("."):
            continue
        suffix = p.suffix.lower()
        if p.is_dir():
            kind = "folder"
        elif suffix in MESH_SUFFIXES:
            kind = "mesh"
        elif suffix in CASE_SUFFIXES:
            kind = "case"
        else:
            continue
        rel = p.resolve().relative_to(root_r).as_posix() if p.resolve() != root_r else ""
        rows.append({"name": p.name, "path": rel, "kind": kind, "size": p.stat().st_size if kind != "folder" else 0})
    return rows


def parent_of(sub: str) -> str:
    """The folder above ``sub`` inside the data folder ("" is the top)."""
    parts = [p for p in str(sub).split("/") if p]
    return "/".join(parts[:-1])


def safe_upload_name(name: str) -> str:
    """A plain file name from a browser-supplied one (no folders, no odd characters)."""
    base = Path(str(name).replace("\\", "/")).name
    base = re.sub(r"[^A-Za-z0-9._-]+", "_", base).lstrip(".")
    if not base:
        raise InputError(f"upload {name!r}: the file name has no usable characters")
    return base


def unwrap_upload(value, limit: int = MAX_UPLOAD_BYTES, hint: str = "") -> tuple[str, bytes] | None:
    """(name, content) of the first file of a browser file-input value, None when it is empty.

    Raises
    ------
    InputError
        When the file is larger than ``limit`` bytes (checked on its declared size first, so an
        oversized file is refused before its content is touched); ``hint`` ends the message.
    """
    if not value:
        return None
    upload = value[0] if isinstance(value, list) else value
    name = str(upload.get("name", ""))
    if int(upload.get("size", 0)) > limit:
        raise InputError(f"upload {name!r}: {int(upload['size']) / 1e6:.1f} MB is over the limit of "
                         f"{limit / 1e6:.0f} MB{hint}")
    return name, bytes(upload["content"])


def save_upload(folder, name: str, content: bytes, limit: int = MAX_UPLOAD_BYTES) -> Path:
    """Write an uploaded file into ``folder`` and return its path.

    Raises
    ------
    InputError
        When the file is larger than ``limit`` bytes or its type is not a mesh or table.
    """
    size = len(content)
    if size > limit:
        raise InputError(
            f"upload {name!r}: {size / 1e6:.1f} MB is over the limit of {limit / 1e6:.0f} MB; "
            "put large meshes in the data folder instead"
        )
    base = safe_upload_name(name)
    if Path(base).suffix.lower() not in MESH_SUFFIXES + CASE_SUFFIXES + (".csv",):
        raise InputError(
            f"upload {name!r}: not a mesh, case or CSV file; allowed endings are "
            + ", ".join(MESH_SUFFIXES + CASE_SUFFIXES + (".csv",))
        )
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    path = folder / base
    path.write_bytes(content)
    return path
