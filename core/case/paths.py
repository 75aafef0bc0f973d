"""Where the files a case names are, and whether they may be read.

A case names files by key: ``mesh.file``, ``initial.file`` and every
``table = "file.csv"`` of a schedule. :class:`CasePaths` turns such a name
into a path, relative to the case file's folder, and refuses what may not be
read, with a :class:`~heatsoak.core.errors.PathError` naming the key and the
value:

* always: an empty name or one holding a NUL character; anything that is not a
  regular file (a folder, a FIFO, a device such as ``/dev/zero``, a socket);
  a file larger than its limit (:data:`MAX_TABLE_BYTES`, :data:`MAX_MESH_BYTES`);
* with a confinement ``root`` (the browser panel's data folder): absolute
  names, ``..`` steps and links that lead outside ``root``, and, in an XDMF
  mesh, heavy-data files outside ``root``.

Without a root the command line's behaviour is kept: names are read with the
user's own permissions, absolute names and links included.

Files are checked where they are named; a file swapped for another between
the check and the read by someone with write access to the folder is outside
what this module guards (tables are read through the same open handle that
was checked, so for them no such gap exists).
"""

from __future__ import annotations

import os
import stat
from dataclasses import dataclass
from pathlib import Path

from heatsoak.core.errors import PathError
from heatsoak.core.mesh.packed import xdmf_heavy_files

#: Largest table (CSV) file read [bytes]; a million rows of "time, value" take about 25 MB.
MAX_TABLE_BYTES = 64 * 2**20
#: Largest mesh or initial-field file read [bytes] (a 3-million-cell MSH text file is about 400 MB).
MAX_MESH_BYTES = 2 * 2**30

_KINDS = (
    (stat.S_ISDIR, "a folder"),
    (stat.S_ISFIFO, "a FIFO (named pipe)"),
    (stat.S_ISCHR, "a character device"),
    (stat.S_ISBLK, "a block device"),
    (stat.S_ISSOCK, "a socket"),
)


def _mib(n: int) -> str:
    return f"{n / 2**20:.4g} MiB"


def describe_limits() -> str:
    """One line stating the file limits, for ``check`` and the README."""
    return (f"files a case names must be regular files; tables up to {_mib(MAX_TABLE_BYTES)}, "
            f"meshes and initial fields up to {_mib(MAX_MESH_BYTES)}")


def _kind_problem(mode: int) -> str:
    for test, what in _KINDS:
        if test(mode):
            return f"is {what}, not a regular file"
    return "" if stat.S_ISREG(mode) else "is not a regular file"


@dataclass(frozen=True)
class CasePaths:
    """Resolves the file names of one case.

    Parameters
    ----------
    base_dir : Path
        Folder relative names are taken from (the case file's folder).
    root : Path or None
        Confinement folder: when given, every file read must lie inside it
        (after following links), and absolute names are refused. None keeps
        the command line's behaviour.
    root_label : str
        How messages call ``root``.
    """

    base_dir: Path
    root: Path | None = None
    root_label: str = "the data folder"

    def __post_init__(self):
        object.__setattr__(self, "base_dir", Path(self.base_dir))
        if self.root is not None:
            object.__setattr__(self, "root", Path(os.path.realpath(self.root)))

    def _error(self, key: str, name, detail: str) -> PathError:
        return PathError(key, name, detail)

    def _inside(self, real: Path) -> bool:
        return real == self.root or self.root in real.parents

    def locate(self, key: str, name) -> Path:
        """The path of file ``name`` given at ``key``, links followed when confined; not yet checked."""
        if not isinstance(name, str) or not name.strip():
            raise self._error(key, name, "expected a file name")
        if "\0" in name:
            raise self._error(key, name, "a file name may not hold a NUL character")
        path = Path(name)
        if self.root is None:
            return self.base_dir / path
        if path.is_absolute() or path.drive:
            raise self._error(key, name, f"absolute file names are not allowed; name a file inside "
                                         f"{self.root_label}, relative to the case file")
        real = Path(os.path.realpath(self.base_dir / path))
        if not self._inside(real):
            raise self._error(key, name, f"leads outside {self.root_label} (through '..' or a link); "
                                         f"only files inside it may be read")
        return real

    def resolve(self, key: str, name, limit: int | None = None) -> Path:
        """The checked path of regular file ``name`` given at ``key``, at most ``limit`` bytes
        (default :data:`MAX_MESH_BYTES`).

        Raises
        ------
        PathError
            Naming ``key`` and ``name``: not found, not a regular file, too
            large, or (confined) outside the root.
        """
        path = self.locate(key, name)
        try:
            st = os.stat(path)
        except FileNotFoundError:
            raise self._error(key, name, "file not found (names are relative to the case file)") from None
        except OSError as exc:
            raise self._error(key, name, f"cannot be read ({exc.strerror})") from None
        return self._checked(key, name, path, st, MAX_MESH_BYTES if limit is None else limit)

    def _checked(self, key, name, path: Path, st, limit: int) -> Path:
        why = _kind_problem(st.st_mode)
        if why:
            raise self._error(key, name, why)
        if st.st_size > limit:
            raise self._error(key, name, f"is {_mib(st.st_size)}, above the limit of {_mib(limit)} for this file")
        return path

    def read_text(self, key: str, name, limit: int | None = None) -> tuple[Path, str]:
        """(path, text) of the UTF-8 text file ``name`` given at ``key``, checked on its open handle.

        The file is opened without blocking (a FIFO never hangs), checked to be
        a regular file of at most ``limit`` bytes (default :data:`MAX_TABLE_BYTES`)
        and read through the same handle; a byte-order mark is dropped.
        """
        limit = MAX_TABLE_BYTES if limit is None else limit
        path = self.locate(key, name)
        try:
            fd = os.open(path, os.O_RDONLY | getattr(os, "O_NONBLOCK", 0) | getattr(os, "O_CLOEXEC", 0))
        except FileNotFoundError:
            raise self._error(key, name, "file not found (names are relative to the case file)") from None
        except OSError as exc:
            raise self._error(key, name, f"cannot be read ({exc.strerror})") from None
        try:
            self._checked(key, name, path, os.fstat(fd), limit)
        except PathError:
            os.close(fd)
            raise
        with os.fdopen(fd, "rb") as fh:
            raw = fh.read(limit + 1)
        if len(raw) > limit:  # grew since the check
            raise self._error(key, name, f"is above the limit of {_mib(limit)} for this file")
        try:
            return path, raw.decode("utf-8-sig")
        except UnicodeDecodeError as exc:
            raise self._error(key, name, f"is not UTF-8 text (byte {exc.start})") from None

    def resolve_mesh(self, key: str, name) -> Path:
        """:meth:`resolve` for a mesh or field file; an XDMF file's heavy-data files are checked too."""
        path = self.resolve(key, name)
        if path.suffix.lower() in (".xdmf", ".xmf"):
            for ref in xdmf_heavy_files(path):
                self._check_heavy(key, name, path, ref)
        return path

    def _check_heavy(self, key, name, xdmf: Path, ref: tuple[str, str]) -> None:
        fmt, file = ref
        if self.root is not None and fmt == "Binary":
            raise self._error(key, name, f"its XDMF names raw binary data {file!r}, which is not read "
                                         f"from {self.root_label}; store the data in HDF5")
        # meshio reads HDF5 files relative to the XDMF file, raw binary ones relative to the working folder
        inner = CasePaths(xdmf.parent if fmt == "HDF" else Path.cwd(), self.root, self.root_label)
        try:
            inner.resolve("heavy data", file)
        except PathError as exc:
            raise self._error(key, name, f"its XDMF names the data file {file!r}, which {exc.detail}") from None
