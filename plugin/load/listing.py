"""The data folder: list mesh and case files, resolve names safely, store uploads.

Browsing never leaves the data folder: every name from the browser is
resolved and checked to lie inside it.
"""

from __future__ import annotations

import os
import re
import stat
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
        When ``name`` is not a plain relative name (absolute, a NUL byte, not text) or leads out
        of ``root`` (``..``, links); a link loop resolves to itself and is refused when opened.
    """
    root = Path(os.path.realpath(root))
    text = str(name)
    if not isinstance(name, (str, os.PathLike)) or "\0" in text or Path(text).is_absolute():
        raise InputError(f"file {_shown(text)}: only files inside the data folder can be opened")
    candidate = Path(os.path.realpath(root / text))
    if candidate != root and root not in candidate.parents:
        raise InputError(f"file {_shown(text)}: only files inside the data folder can be opened")
    return candidate


def _shown(name: str, most: int = 80) -> str:
    """A browser-supplied name as it may appear in a message: quoted, control characters escaped, cut short."""
    text = repr(str(name))
    return text if len(text) <= most else text[: most - 4] + "...'"


#: What the file list says of entries it will not open.
BLOCKED_NOTES = {"outside": "a link leading outside the data folder", "broken": "a link leading nowhere (or a loop)",
                 "special": "not a regular file"}


def _kind(entry: os.DirEntry, root: Path) -> tuple[str, str]:
    """(kind, resolved path relative to root) of one folder entry; kind "blocked-<why>" for links
    out of the data folder, dangling or looping links and special files."""
    real = Path(os.path.realpath(entry.path))
    if real != root and root not in real.parents:
        return "blocked-outside", ""
    try:
        mode = real.stat().st_mode
    except OSError:
        return "blocked-broken", ""
    rel = real.relative_to(root).as_posix() if real != root else ""
    if stat.S_ISDIR(mode):
        return "folder", rel
    if not stat.S_ISREG(mode):
        return "blocked-special", ""
    suffix = Path(entry.name).suffix.lower()
    return ("mesh" if suffix in MESH_SUFFIXES else "case" if suffix in CASE_SUFFIXES else ""), rel


def list_files(root, sub: str = "") -> list[dict]:
    """Folders and usable files of ``root/sub``, folders first; entries that cannot be opened safely
    (links leading out of the data folder, dangling or looping links, devices and pipes) are listed
    as ``blocked`` with a note, never followed.

    Returns
    -------
    list of dict
        ``{"name", "path" (relative to root), "kind" ("folder"|"mesh"|"case"|"blocked"), "size" (bytes),
        "note"}``.
    """
    root_r = Path(os.path.realpath(root))
    here = inside(root_r, sub or ".")
    rows = []
    with os.scandir(here) as entries:
        for entry in entries:
            if entry.name.startswith("."):
                continue
            kind, rel = _kind(entry, root_r)
            if not kind:
                continue
            blocked = kind.startswith("blocked-")
            if blocked and Path(entry.name).suffix.lower() not in ("",) + MESH_SUFFIXES + CASE_SUFFIXES:
                continue  # not a folder, mesh or case: it would not be listed anyway
            size = (root_r / rel).stat().st_size if kind in ("mesh", "case") else 0
            rows.append({"name": entry.name, "path": rel, "kind": "blocked" if blocked else kind, "size": size,
                         "note": BLOCKED_NOTES[kind[8:]] if blocked else ""})
    return sorted(rows, key=lambda r: (r["kind"] != "folder", r["name"].lower()))


def entry_of(root, name) -> tuple[Path, str]:
    """(resolved path, kind) of a name the browser sent from the file list: the kind is found here
    ("folder", "mesh" or "case"), never taken from the browser.

    Raises
    ------
    InputError
        When the name leads outside ``root`` or to something that is not a folder, mesh or case file.
    """
    target = inside(root, name)
    try:
        mode = target.stat().st_mode
    except OSError:
        raise InputError(f"file {_shown(name)}: not found in the data folder") from None
    suffix = target.suffix.lower()
    if stat.S_ISDIR(mode):
        return target, "folder"
    if stat.S_ISREG(mode) and suffix in MESH_SUFFIXES + CASE_SUFFIXES:
        return target, "case" if suffix in CASE_SUFFIXES else "mesh"
    raise InputError(f"file {_shown(name)}: not a folder, mesh or case file")


def relative(root, path: Path) -> str:
    """``path`` (already inside ``root``) relative to it, "" for the top."""
    rel = Path(path).relative_to(Path(os.path.realpath(root))).as_posix()
    return "" if rel == "." else rel


def confinement(path, *folders) -> Path | None:
    """The first of ``folders`` that holds ``path`` (after following links), None when none does.

    The files a case names must stay inside the folder its case file came from: the data folder
    for a listed case, the upload folder for an uploaded one. A case the app itself was given from
    elsewhere (the command line's file) gets None: it reads with the user's own permissions.
    """
    real = Path(os.path.realpath(path))
    for folder in folders:
        top = Path(os.path.realpath(folder))
        if real == top or top in real.parents:
            return top
    return None


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
    if not isinstance(upload, dict):
        raise InputError("upload: not a file (the browser sent something else)")
    name = _shown(upload.get("name", ""))
    size, content = upload.get("size", 0), upload.get("content")
    if isinstance(size, bool) or not isinstance(size, (int, float)) or not 0 <= size < 2**53:
        raise InputError(f"upload {name}: its size {_shown(size, 30)} is not a number of bytes")
    if size > limit:
        raise InputError(f"upload {name}: {size / 1e6:.1f} MB is over the limit of {limit / 1e6:.0f} MB{hint}")
    if not isinstance(content, (bytes, bytearray, memoryview)):
        raise InputError(f"upload {name}: the browser sent no file content")
    return str(upload.get("name", "")), bytes(content)


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
