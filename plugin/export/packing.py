"""A run's results folder packed into a zip file, as a job in a worker process.

The zip is written to a file piece by piece (never whole in memory), under a
``.part`` name that becomes the final name only when every file is in it: a
cancelled or failed job leaves no half zip behind. Progress is counted in
bytes read, since one field file often holds nearly all of a run's bytes.
"""

from __future__ import annotations

import time
import zipfile
from pathlib import Path

from heatsoak.core.errors import ResultsError

#: Bytes copied into the zip between two looks at cancel and two progress reports.
CHUNK_BYTES = 4 << 20
#: Bytes packed before the time left is estimated (small files first would give a rate far off).
ETA_AFTER_BYTES = 2 * CHUNK_BYTES
#: Deflate level. Temperature fields (float64 in HDF5) barely shrink more at higher levels: a 66 MB
#: temperature.h5 of the demo went to 0.69 of its size at level 1 (35 MB/s here) and 0.68 at level 6
#: (19 MB/s), so the fastest level halves the wait for 1% more bytes.
COMPRESS_LEVEL = 1
#: Suffix of the zip while it is being written.
PART_SUFFIX = ".part"


class _Stop(Exception):
    """The user cancelled: the half zip is removed."""


def folder_files(folder: Path) -> list:
    """Regular files of ``folder`` and its subfolders, sorted, with their zip names and sizes.

    Returns
    -------
    list of (Path, str, int)
        Path, name in the zip (relative, ``/``-separated) and size [bytes] of each file.

    Raises
    ------
    ResultsError
        The folder is missing or not a folder (e.g. the run was discarded).
    """
    folder = Path(folder)
    if not folder.is_dir():
        raise ResultsError(f"results folder {folder} is gone (discarded or moved?): nothing to zip")
    paths = sorted(p for p in folder.rglob("*") if p.is_file() and not p.is_symlink())
    return [(p, p.relative_to(folder).as_posix(), p.stat().st_size) for p in paths]


def pack_folder(report, folder, target) -> dict:
    """Zip every file of ``folder`` (deflated, fastest level) into the file ``target``; runs in a worker.

    Parameters
    ----------
    report : heatsoak.plugin.jobs.pool.Reporter
        Phase ``packing``, progress in bytes read, and the cancel flag.
    folder : path
        The results folder.
    target : path
        The zip file to write (its folder is made if missing).

    Returns
    -------
    dict
        ``path`` (str, the zip; None when cancelled), ``files`` (files packed), ``bytes`` (bytes
        read), ``zip_bytes`` (size of the zip; 0 when cancelled).

    Raises
    ------
    ResultsError
        The folder is gone, or a file could not be read or the zip written (disk full, no
        permission); the message names the file.
    """
    folder, target = Path(folder), Path(target)
    files = folder_files(folder)
    total = sum(size for _, _, size in files)
    report.phase("packing", total)
    part = target.with_name(target.name + PART_SUFFIX)
    progress = _Progress(report, total, len(files))
    try:
        target.parent.mkdir(parents=True, exist_ok=True)
        with zipfile.ZipFile(part, "w", zipfile.ZIP_DEFLATED, allowZip64=True, compresslevel=COMPRESS_LEVEL) as z:
            for i, (path, name, _) in enumerate(files):
                _copy_into(z, path, name, lambda n, i=i: progress.add(n, i + 1))
        part.replace(target)
    except _Stop:
        _remove(part)
        return {"path": None, "files": progress.files, "bytes": progress.done, "zip_bytes": 0}
    except OSError as exc:
        _remove(part)
        where = exc.filename or target
        raise ResultsError(f"results zip of {folder.name} not made: {exc.strerror or exc} ({where})") from None
    except BaseException:
        _remove(part)
        raise
    return {"path": str(target), "files": len(files), "bytes": total, "zip_bytes": target.stat().st_size}


def _remove(part: Path) -> None:
    """Remove the half zip, if there is one to remove."""
    try:
        part.unlink(missing_ok=True)
    except OSError:  # its folder could not be made: no file was written
        pass


def _copy_into(z: zipfile.ZipFile, path: Path, name: str, added) -> None:
    """Copy ``path`` into ``z`` as ``name`` in chunks, calling ``added(n_bytes)`` after each."""
    info = zipfile.ZipInfo.from_file(path, name)  # knows the size: zip64 is chosen when needed
    info.compress_type = zipfile.ZIP_DEFLATED
    info._compresslevel = COMPRESS_LEVEL  # what ZipFile.write sets; an alias of compress_level from Python 3.13
    with path.open("rb") as src, z.open(info, "w") as dst:
        while chunk := src.read(CHUNK_BYTES):
            dst.write(chunk)
            added(len(chunk))
    added(0)


class _Progress:
    """Bytes and files packed so far, reported with the time left from the measured rate."""

    def __init__(self, report, total: int, n_files: int):
        self.report, self.total, self.n_files = report, total, n_files
        self.done, self.files, self.start = 0, 0, time.perf_counter()

    def add(self, n_bytes: int, files: int) -> None:
        if self.report.stopped():
            raise _Stop
        self.done += n_bytes
        self.files = files if n_bytes == 0 else files - 1
        elapsed = time.perf_counter() - self.start
        eta = (self.total - self.done) * elapsed / self.done if self.done >= ETA_AFTER_BYTES else None
        detail = f"{self.done / 1e6:.0f} of {self.total / 1e6:.0f} MB, file {files} of {self.n_files}"
        self.report.advance(self.done, self.total, detail=detail, eta_s=eta)
