"""Result files of a run, written as the run goes so a crash leaves what was done readable.

A results folder holds:

* ``probes.csv`` - ``time`` [s] then one column per probe [degC], one row per step;
* ``regions.csv`` - ``time, region, mean, min, max``, one row per region and step;
* ``temperature.xdmf`` + ``temperature.h5`` - the nodal temperature field
  [degC] on the mesh (coordinates in metres) at the written steps, an XDMF 3
  temporal collection (readable by ``meshio.xdmf.TimeSeriesReader`` and
  common visualisation tools);
* ``summary.json`` - what the run found, written at the end.

The heavy data of each step is appended to the HDF5 file and flushed, then
the step is added to the XML file by one small write that overwrites the
closing tags with the new step and the closing tags, so the XML is a complete
document between steps and only names steps whose data is on disk.
"""

from __future__ import annotations

import csv
import ctypes
import ctypes.util
import errno
import io
import json
import os
import shutil
import sys
from pathlib import Path

import h5py
import numpy as np
from heatsoak.core.errors import InputError, ResultsError
from heatsoak.core.mesh.mesh import Mesh

FIELD_NAME = "temperature"
_TOPOLOGY = {4: "Tetrahedron", 10: "Tetrahedron_10"}
_XI = "http://www.w3.org/2001/XInclude"
_NOTE = ("Results are engineering estimates from a finite element model; check them against measurements, "
         "hand calculations, local codes and licensed professional practice before relying on them.")


def _atomic_write(path: Path, text: str) -> None:
    tmp = path.with_name(path.name + ".tmp")
    tmp.write_text(text, encoding="utf-8")
    os.replace(tmp, path)


def _item(h5name: str, dataset: str, shape, dtype: str, precision: int) -> str:
    dims = " ".join(str(s) for s in shape)
    return (f'<DataItem DataType="{dtype}" Dimensions="{dims}" Format="HDF" Precision="{precision}">'
            f"{h5name}:{dataset}</DataItem>")


#: Bytes reserved past a step's heavy data for HDF5's own bookkeeping (object headers, indexes).
H5_SLACK = 256 * 1024
_FALLOC_FL_KEEP_SIZE = 1


def _libc_fallocate():
    try:
        libc = ctypes.CDLL(ctypes.util.find_library("c") or "libc.so.6", use_errno=True)
        fn = libc.fallocate
    except (OSError, AttributeError):
        return None
    fn.argtypes = [ctypes.c_int, ctypes.c_int, ctypes.c_longlong, ctypes.c_longlong]
    return fn


_FALLOCATE = _libc_fallocate() if sys.platform.startswith("linux") else None


def reserve_blocks(fd: int, nbytes: int) -> None:
    """Allocate ``nbytes`` of disk past the end of file ``fd`` without changing its size (Linux
    ``fallocate`` with ``FALLOC_FL_KEEP_SIZE``); OSError(ENOSPC) when the disk cannot hold them.
    Where the call is not available or the file system does not support it, nothing is done."""
    if _FALLOCATE is None:
        return
    size = os.fstat(fd).st_size
    if _FALLOCATE(fd, _FALLOC_FL_KEEP_SIZE, size, nbytes) != 0:
        err = ctypes.get_errno()
        if err in (errno.ENOSPC, errno.EDQUOT, errno.EFBIG):
            raise OSError(err, os.strerror(err))


class XdmfSeries:
    """Nodal temperature over time as XDMF 3 + HDF5, written step by step.

    Parameters
    ----------
    path : path of the ``.xdmf`` file; the heavy data goes next to it, same stem, ``.h5``.
    mesh : Mesh
    """

    def __init__(self, path, mesh: Mesh):
        self.path = Path(path)
        self.h5_path = self.path.with_suffix(".h5")
        self._h5 = h5py.File(self.h5_path, "w")
        self._reserve(mesh.points.nbytes + 8 * mesh.cells.size + 8 * mesh.n_cells)
        self._h5.create_dataset("mesh/points", data=mesh.points)
        self._h5.create_dataset("mesh/cells", data=mesh.cells.astype(np.int64))
        self._h5.create_dataset("mesh/region", data=mesh.cell_region.astype(np.int64))
        self._h5.flush()
        self._shape = (mesh.n_nodes,)
        h5 = self.h5_path.name
        self._head = (
            '<?xml version="1.0"?>\n'
            f'<Xdmf Version="3.0" xmlns:xi="{_XI}">\n<Domain>\n'
            '<Grid Name="mesh" GridType="Uniform">\n'
            f'<Topology TopologyType="{_TOPOLOGY[mesh.cells.shape[1]]}" NumberOfElements="{mesh.n_cells}">'
            f"{_item(h5, '/mesh/cells', mesh.cells.shape, 'Int', 8)}</Topology>\n"
            f'<Geometry GeometryType="XYZ">{_item(h5, "/mesh/points", mesh.points.shape, "Float", 8)}</Geometry>\n'
            "</Grid>\n"
            '<Grid Name="temperature over time" GridType="Collection" CollectionType="Temporal">\n'
        )
        self._region = (f'<Attribute Name="region" AttributeType="Scalar" Center="Cell">'
                        f"{_item(h5, '/mesh/region', (mesh.n_cells,), 'Int', 8)}</Attribute>")
        self._tail = b"</Grid>\n</Domain>\n</Xdmf>\n"
        self.times = []
        self._xml = open(self.path, "wb")  # noqa: SIM115 (open for the whole run)
        self._xml.write(self._head.encode() + self._tail)
        self._xml.flush()
        self._end = len(self._head.encode())  # where the next step's grid goes

    def write(self, t: float, T: np.ndarray) -> None:
        """Append the field ``T`` (n_nodes,) [degC] at time ``t`` [s]."""
        k = len(self.times)
        name = f"/{FIELD_NAME}/{k}"
        self._reserve(8 * self._shape[0])
        try:
            self._h5.create_dataset(name, data=np.asarray(T, dtype=np.float64).reshape(self._shape))
            self._h5.flush()
        except BaseException:  # a step not named in the XML must not stay in the HDF5 file either
            self._drop(name)
            raise
        ptr = "xpointer(//Grid[@Name=&quot;mesh&quot;]/*[self::Topology or self::Geometry])"
        grid = (
            f'<Grid Name="step {k}" GridType="Uniform"><xi:include xpointer="{ptr}"/>'
            f'<Time Value="{float(t)!r}"/>'
            f'<Attribute Name="{FIELD_NAME}" AttributeType="Scalar" Center="Node">'
            f"{_item(self.h5_path.name, name, self._shape, 'Float', 8)}</Attribute>{self._region}</Grid>\n"
        ).encode()
        # One small write replaces the closing tags by the new grid and the closing tags:
        # the file is a complete document before and after it, in constant time per step.
        self._xml.seek(self._end)
        try:
            self._xml.write(grid + self._tail)
            self._xml.flush()
        except BaseException:
            self._restore_tail()
            self._drop(name)
            raise
        self._end += len(grid)
        self.times.append(float(t))

    def _reserve(self, nbytes: int) -> None:
        """Set aside disk blocks past the end of the HDF5 file for the next step, so a full disk is
        found here, as an OSError, and never inside HDF5 (which does not survive it)."""
        reserve_blocks(self._h5.id.get_vfd_handle(), nbytes + H5_SLACK)

    def _drop(self, name: str) -> None:
        """Remove dataset ``name`` if it was (partly) made; errors here would hide the first one."""
        try:
            if name in self._h5:
                del self._h5[name]
                self._h5.flush()
        except Exception:  # noqa: BLE001, S110 - best effort after a failed write
            pass

    def _restore_tail(self) -> None:
        """Put the closing tags back after the last complete step (their bytes were on disk before)."""
        try:
            self._xml.seek(self._end)
            self._xml.write(self._tail)
            self._xml.truncate()
            self._xml.flush()
        except OSError:
            pass

    def close(self) -> None:
        if not self._xml.closed:
            self._xml.close()
        if self._h5.id.valid:
            self._h5.close()


class CsvSeries:
    """A CSV file written row by row, each call's rows in one unbuffered write.

    A call that cannot be written completely (disk full) is cut off again, so
    the file always ends with a whole step.
    """

    def __init__(self, path, header):
        self.path = Path(path)
        self._f = open(self.path, "wb", buffering=0)  # noqa: SIM115 (open for the whole run)
        self._write([header])

    def _write(self, rows) -> None:
        text = io.StringIO()
        csv.writer(text).writerows(rows)
        data = memoryview(text.getvalue().encode("utf-8"))
        start = self._f.tell()
        try:
            while data:
                data = data[self._f.write(data):]
        except BaseException:
            self.truncate(start)
            raise

    def rows(self, rows) -> None:
        """Append ``rows`` (numbers written with 10 significant digits)."""
        self._write([[f"{x:.10g}" if isinstance(x, (float, np.floating)) else x for x in r] for r in rows])

    def tell(self) -> int:
        return self._f.tell()

    def truncate(self, offset: int) -> None:
        """Cut the file back to ``offset`` bytes (a step that did not reach every file)."""
        self._f.truncate(offset)
        self._f.seek(offset)

    def close(self) -> None:
        self._f.close()


def _json(summary: dict) -> str:
    def convert(x):
        if isinstance(x, np.ndarray):
            return x.tolist()
        if isinstance(x, np.generic):
            return x.item()
        raise TypeError(f"cannot write {type(x).__name__} to JSON")

    return json.dumps(summary, indent=2, default=convert) + "\n"


def write_summary(path, summary: dict, reserve=None) -> None:
    """Write ``summary`` as indented JSON (numpy scalars and arrays converted), atomically.

    When the disk is full, the file ``reserve`` (space set aside when the run
    started) is overwritten in place instead and renamed to ``path``.
    """
    path, text = Path(path), _json(summary)
    try:
        _atomic_write(path, text)
    except OSError:
        path.with_name(path.name + ".tmp").unlink(missing_ok=True)
        data = text.encode("utf-8")
        if reserve is None or not Path(reserve).is_file() or len(data) > Path(reserve).stat().st_size:
            raise
        with open(reserve, "r+b") as f:  # blocks already on disk: no new space needed
            f.write(data)
            f.truncate()
        os.replace(reserve, path)
    else:
        if reserve is not None:
            Path(reserve).unlink(missing_ok=True)


#: Bytes reserved for summary.json when a run starts, so a full disk can still take the last word.
SUMMARY_RESERVE = 64 * 1024
#: Free space [bytes] kept on the results disk besides a step's data (HDF5 metadata, closing, summary).
SPACE_MARGIN = 2 * 2**20


def _reason(exc: BaseException) -> str:
    if isinstance(exc, OSError) and exc.errno == errno.ENOSPC:
        return "the disk is full"
    if isinstance(exc, OSError) and exc.strerror:
        return exc.strerror
    return str(exc) or type(exc).__name__


class ResultFiles:
    """The four result files of one run in ``out_dir`` (created if needed), always ending on one step.

    Every step goes to the CSV files, every ``every``-th step (and, at
    :meth:`finish`, the last) to the field file. A step that cannot be written
    whole (disk full, a write error) is taken out of every file again and
    raises :class:`ResultsError`; ``times`` lists the steps in every file.

    Parameters
    ----------
    out_dir : path
    mesh : Mesh
    probe_names : sequence of str
    every : int
        Write the field every this many steps.
    field : bool
        Write the temperature field (``temperature.xdmf`` + ``.h5``); without it
        ``field`` is None and the field files are not listed.
    """

    def __init__(self, out_dir, mesh: Mesh, probe_names, every: int = 1, field: bool = True):
        self.out_dir = Path(out_dir)
        try:
            self.out_dir.mkdir(parents=True, exist_ok=True)
        except OSError as exc:
            if self.out_dir.is_file():
                raise InputError(f"results folder {self.out_dir}: cannot create it (a file of that name exists)") \
                    from None
            raise ResultsError(f"results folder {self.out_dir}: cannot create it ({_reason(exc)})") from None
        self.regions = tuple(mesh.region_names)
        self.every, self.times, self._pending, self._unfielded = int(every), [], None, []
        self._step_bytes = 8 * mesh.n_nodes + 64 * (len(probe_names) + 4 * len(self.regions)) + 4096
        self.summary_path = self.out_dir / "summary.json"
        self._reserve = self.out_dir / ".summary.reserve"
        try:
            self._reserve.write_bytes(b" " * SUMMARY_RESERVE)
            self.probes_csv = CsvSeries(self.out_dir / "probes.csv", ["time", *probe_names])
            self.regions_csv = CsvSeries(self.out_dir / "regions.csv", ["time", "region", "mean", "min", "max"])
            self.field = XdmfSeries(self.out_dir / f"{FIELD_NAME}.xdmf", mesh) if field else None
        except (OSError, RuntimeError) as exc:
            raise ResultsError(f"results folder {self.out_dir}: cannot write in it ({_reason(exc)})") from None

    def _check_space(self, t: float) -> None:
        free = shutil.disk_usage(self.out_dir).free
        if free < self._step_bytes + SPACE_MARGIN:
            raise ResultsError(f"results folder {self.out_dir}: the disk is full ({free / 2**20:.3g} MiB free); "
                               f"the run stopped before t = {t:g} s")

    def step(self, t: float, probe_values, region_stats, T=None) -> bool:
        """Append one step: a row to probes.csv, a row per region to regions.csv, and the field
        ``T`` (n_nodes,) [degC] every ``every`` steps (the others held until :meth:`flush_field`).

        Returns True when the field of this step was written."""
        self._check_space(t)
        marks = (self.probes_csv.tell(), self.regions_csv.tell())
        try:
            self.probes_csv.rows([[float(t), *map(float, probe_values)]])
            self.regions_csv.rows([[float(t), name, *map(float, s)] for name, s in zip(self.regions, region_stats)])
        except BaseException as exc:
            self._cut(marks)
            if isinstance(exc, OSError):
                raise ResultsError(f"results folder {self.out_dir}: cannot write step t = {t:g} s "
                                   f"({_reason(exc)})") from None
            raise
        self.times.append(float(t))
        if self.field is None:
            return False
        self._unfielded.append(marks)
        if T is not None and (len(self.times) - 1) % self.every == 0:
            self._field(t, T)
            return True
        self._pending = None if T is None else (t, T)
        return False

    def _cut(self, marks) -> None:
        for series, offset in zip((self.probes_csv, self.regions_csv), marks):
            try:
                series.truncate(offset)
            except OSError:
                pass

    def _field(self, t: float, T) -> None:
        """Write the field of the last step; if that fails, the steps not in the field leave the CSVs."""
        try:
            self.field.write(t, T)
        except BaseException as exc:  # Ctrl-C included: no file may keep a step the others lack
            self._cut(self._unfielded[0])
            del self.times[len(self.times) - len(self._unfielded):]
            self._unfielded, self._pending = [], None
            if not isinstance(exc, (OSError, RuntimeError)):
                raise
            raise ResultsError(f"results folder {self.out_dir}: cannot write the field at t = {t:g} s "
                               f"({_reason(exc)}); results end at the step before") from None
        self._unfielded, self._pending = [], None

    def flush_field(self) -> bool:
        """Write the field of the last step if it was held back; True if one was written.

        ResultsError when it cannot be; the CSVs are then cut back to the field's last step."""
        if self._pending is None:
            return False
        self._field(*self._pending)
        return True

    def finish(self, summary: dict) -> dict:
        """Write a held-back field (:meth:`flush_field`), close the series, add the engineering
        note and write summary.json (steps and end time as in the files); returns the summary.

        A field that cannot be written turns the summary's status into "failed" with the reason
        in ``error``.
        """
        try:
            self.flush_field()
        except ResultsError as exc:
            summary = {**summary, "status": "failed", "error": str(exc)}
        self.close()
        summary = {**summary, "note": _NOTE, "steps": max(len(self.times) - 1, 0),
                   "end_time": self.times[-1] if self.times else 0.0}
        fields = [f"{FIELD_NAME}.xdmf", f"{FIELD_NAME}.h5"] if self.field is not None else []
        summary.setdefault("files", ["probes.csv", "regions.csv", *fields, "summary.json"])
        try:
            write_summary(self.summary_path, summary, self._reserve)
        except OSError as exc:
            raise ResultsError(f"{self.summary_path}: cannot write the summary ({_reason(exc)})") from None
        return summary

    def close(self) -> None:
        for series in (self.probes_csv, self.regions_csv, self.field):
            try:
                if series is not None:
                    series.close()
            except (OSError, RuntimeError):
                pass
