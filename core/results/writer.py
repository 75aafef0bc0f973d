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
import json
import os
from pathlib import Path

import h5py
import numpy as np
from heatsoak.core.errors import InputError
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
        self._h5.create_dataset(name, data=np.asarray(T, dtype=np.float64).reshape(self._shape))
        self._h5.flush()
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
        self._xml.write(grid + self._tail)
        self._xml.flush()
        self._end += len(grid)
        self.times.append(float(t))

    def close(self) -> None:
        if not self._xml.closed:
            self._xml.close()
        if self._h5.id.valid:
            self._h5.close()


class CsvSeries:
    """A CSV file written row by row and flushed after each :meth:`rows` call."""

    def __init__(self, path, header):
        self.path = Path(path)
        self._f = open(self.path, "w", newline="", encoding="utf-8")  # noqa: SIM115 (open for the whole run)
        self._w = csv.writer(self._f)
        self._w.writerow(header)
        self._f.flush()

    def rows(self, rows) -> None:
        self._w.writerows([[f"{x:.10g}" if isinstance(x, (float, np.floating)) else x for x in r] for r in rows])
        self._f.flush()

    def close(self) -> None:
        self._f.close()


def write_summary(path, summary: dict) -> None:
    """Write ``summary`` as indented JSON (numpy scalars and arrays converted)."""
    def convert(x):
        if isinstance(x, np.ndarray):
            return x.tolist()
        if isinstance(x, np.generic):
            return x.item()
        raise TypeError(f"cannot write {type(x).__name__} to JSON")

    _atomic_write(Path(path), json.dumps(summary, indent=2, default=convert) + "\n")


class ResultFiles:
    """The four result files of one run in ``out_dir`` (created if needed).

    Parameters
    ----------
    out_dir : path
    mesh : Mesh
    probe_names : sequence of str
    field : bool
        Write the temperature field (``temperature.xdmf`` + ``.h5``); without it
        ``field`` is None and the field files are not listed.
    """

    def __init__(self, out_dir, mesh: Mesh, probe_names, field: bool = True):
        self.out_dir = Path(out_dir)
        try:
            self.out_dir.mkdir(parents=True, exist_ok=True)
        except OSError as exc:
            why = "a file of that name exists" if self.out_dir.is_file() else exc.strerror
            raise InputError(f"results folder {self.out_dir}: cannot create it ({why})") from None
        self.regions = tuple(mesh.region_names)
        self.probes_csv = CsvSeries(self.out_dir / "probes.csv", ["time", *probe_names])
        self.regions_csv = CsvSeries(self.out_dir / "regions.csv", ["time", "region", "mean", "min", "max"])
        self.field = XdmfSeries(self.out_dir / f"{FIELD_NAME}.xdmf", mesh) if field else None
        self.summary_path = self.out_dir / "summary.json"

    def step(self, t: float, probe_values: np.ndarray, region_stats: np.ndarray) -> None:
        """Append one row to probes.csv and one row per region to regions.csv."""
        self.probes_csv.rows([[float(t), *map(float, probe_values)]])
        self.regions_csv.rows([[float(t), name, *map(float, s)] for name, s in zip(self.regions, region_stats)])

    def finish(self, summary: dict) -> dict:
        """Close the series, add the engineering note and write summary.json; returns the summary."""
        self.close()
        summary = {**summary, "note": _NOTE}
        fields = [f"{FIELD_NAME}.xdmf", f"{FIELD_NAME}.h5"] if self.field is not None else []
        summary.setdefault("files", ["probes.csv", "regions.csv", *fields, "summary.json"])
        write_summary(self.summary_path, summary)
        return summary

    def close(self) -> None:
        self.probes_csv.close()
        self.regions_csv.close()
        if self.field is not None:
            self.field.close()
