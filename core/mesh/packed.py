"""How large a mesh file's compressed data becomes once unpacked, found from what the file declares,
before any of it is unpacked.

A few kilobytes of zlib data can declare gigabytes (a "zip bomb"); a reader that trusts it fills the
memory. Two kinds of mesh files hold compressed data:

* VTK XML files (``.vtu`` and kin) with a ``compressor``: every binary array starts with a header of
  block counts and sizes (VTK file format, "XML File Formats", compressed binary data: header
  ``[nblocks, blocksize, lastblocksize, compressed sizes...]`` in ``header_type`` integers);
* HDF5 files (MED, and the heavy data an XDMF file names): each compressed dataset declares its
  shape and type.

:func:`check_unpacked_size` adds up the declared sizes and refuses a file above the limit; arrays that
are not compressed are bounded by the file's own size and are not counted.
"""

from __future__ import annotations

import base64
import re
import xml.etree.ElementTree as ET
from pathlib import Path

import numpy as np
from heatsoak.core.errors import MeshError

#: Most bytes a mesh file's compressed data may unpack to (the same bound as a mesh file's size).
MAX_UNPACKED_BYTES = 2 * 2**30
#: Most bytes of a VTK XML file read to find its array headers (they precede appended data).
_XML_HEAD_BYTES = 8 * 2**20
_VTK_XML = (".vtu", ".vtp", ".vts", ".vtr", ".vti", ".pvtu")
_HDF5 = (".h5", ".hdf5", ".med", ".h5m")
_ATTR = re.compile(rb'(\w+)="([^"]*)"')


def check_unpacked_size(path, limit: int = MAX_UNPACKED_BYTES) -> int:
    """Bytes the compressed data of mesh file ``path`` declares it unpacks to (0 for other files).

    Raises
    ------
    MeshError
        When the declared size is above ``limit``, naming the file, the size and the limit.
    """
    path = Path(path)
    suffix = path.suffix.lower()
    if suffix in _VTK_XML:
        total = _vtk_xml_unpacked(path)
    elif suffix in _HDF5:
        total = _hdf5_unpacked(path)
    elif suffix in (".xdmf", ".xmf"):  # its heavy data, where meshio looks for it
        total = sum(_hdf5_unpacked(path.parent / name) for fmt, name in xdmf_heavy_files(path) if fmt == "HDF")
    else:
        total = 0
    if total > limit:
        raise MeshError(f"{path.name}: its compressed data declares {total / 2**20:.6g} MiB once unpacked, above "
                        f"the limit of {limit / 2**20:.6g} MiB; refused before unpacking it")
    return total


def _vtk_xml_unpacked(path: Path) -> int:
    """Sum of the unpacked sizes the compressed arrays of a VTK XML file declare."""
    with path.open("rb") as f:
        head = f.read(_XML_HEAD_BYTES)
    top = re.search(rb"<VTKFile\b([^>]*)>", head)
    if top is None:
        return 0
    attrs = dict(_ATTR.findall(top.group(1)))
    if not attrs.get(b"compressor"):
        return 0
    width = 8 if attrs.get(b"header_type") == b"UInt64" else 4
    order = "<" if attrs.get(b"byte_order", b"LittleEndian") == b"LittleEndian" else ">"
    appended = _appended_start(path, head)
    total = 0
    for match in re.finditer(rb"<DataArray\b([^>]*?)(/?)>", head):
        array = dict(_ATTR.findall(match.group(1)))
        fmt = array.get(b"format", b"ascii")
        if fmt == b"binary" and not match.group(2):
            raw = head[match.end(): match.end() + 64].lstrip()
            total += _declared(base64.b64decode(raw[:_b64_len(3 * width)] or b"", validate=False), width, order)
        elif fmt == b"appended" and appended is not None:
            total += _appended_declared(path, appended, int(array.get(b"offset", b"0") or 0), width, order)
    return total


def _b64_len(n: int) -> int:
    """Characters of base64 that hold the first ``n`` bytes."""
    return 4 * -(-n // 3)


def _declared(header: bytes, width: int, order: str) -> int:
    """Unpacked bytes a block header ``[nblocks, blocksize, lastblocksize, ...]`` declares."""
    if len(header) < 3 * width:
        return 0
    nblocks, blocksize, last = np.frombuffer(header[: 3 * width], dtype=f"{order}u{width}").tolist()
    if nblocks == 0:
        return 0
    return (nblocks - 1) * blocksize + (last or blocksize)


def _appended_start(path: Path, head: bytes) -> tuple[int, bool] | None:
    """(offset of the first byte after ``_`` in the file, base64 encoded?) of the appended data."""
    match = re.search(rb"<AppendedData\b([^>]*)>\s*_", head)
    if match is None:
        return None
    encoding = dict(_ATTR.findall(match.group(1))).get(b"encoding", b"raw")
    return match.end(), encoding == b"base64"


def _appended_declared(path: Path, start: tuple[int, bool], offset: int, width: int, order: str) -> int:
    first, encoded = start
    with path.open("rb") as f:
        f.seek(first + offset)
        raw = f.read(_b64_len(3 * width) if encoded else 3 * width)
    return _declared(base64.b64decode(raw, validate=False) if encoded else raw, width, order)


def _hdf5_unpacked(path: Path) -> int:
    """Sum of the sizes the compressed datasets of an HDF5 file declare (0 without h5py)."""
    try:
        import h5py
    except ImportError:
        return 0
    if not path.is_file():  # missing, or a pipe or device that must not be opened: its reader says so
        return 0
    sizes = []

    def visit(_name, item):
        if isinstance(item, h5py.Dataset) and item.compression is not None:
            sizes.append(int(np.prod(item.shape, dtype=np.float64)) * item.dtype.itemsize)

    try:
        with h5py.File(path, "r") as f:
            f.visititems(visit)
    except OSError:
        return 0  # not HDF5 after all: its reader says so
    return int(sum(sizes))


def xdmf_heavy_files(path) -> list[tuple[str, str]]:
    """(format, file name) of every HDF5 or binary data file an XDMF file names, in order, once each.

    An XDMF file that is not valid XML gives no names (its reader reports it).
    """
    try:
        tree = ET.parse(path)  # noqa: S314 - expat refuses external entities; sizes bounded by MAX_MESH_BYTES
    except (ET.ParseError, OSError):
        return []
    out = {}
    for item in tree.iter():
        if not str(item.tag).endswith("DataItem"):
            continue
        fmt = item.get("Format", "XML")
        text = (item.text or "").strip()
        if fmt == "HDF" and text:
            out[(fmt, text.split(":", 1)[0])] = None  # as meshio splits "file.h5:/path"
        elif fmt == "Binary" and text:
            out[(fmt, text)] = None
    return list(out)
