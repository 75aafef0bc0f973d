"""Compressed mesh data is measured by what it declares before anything is unpacked: a few megabytes
declaring gigabytes (a zip bomb) are refused at once, by ``heatsoak inspect`` and in the UI alike;
honest compressed files read as before."""

from __future__ import annotations

import base64
import time
import zlib

import meshio
import numpy as np
import pytest
from heatsoak.core.app.cli import main
from heatsoak.core.errors import MeshError
from heatsoak.core.mesh.generate import box_mesh
from heatsoak.core.mesh.packed import check_unpacked_size
from heatsoak.core.mesh.read import read_mesh

#: A bomb's declared blocks: 3072 blocks of 1 MiB of zeros, 3 GiB once unpacked.
BLOCKS, BLOCK = 3072, 2**20


def bomb_vtu(path, layout: str, header_type: str = "UInt32"):
    """A VTU whose points array declares 3 GiB of zlib blocks; only the first block is really stored
    (a reader that trusted the header would try to allocate and unpack all of it)."""
    width = 8 if header_type == "UInt64" else 4
    block = zlib.compress(b"\0" * BLOCK)
    header = np.array([BLOCKS, BLOCK, BLOCK] + [len(block)] * BLOCKS, dtype=f"<u{width}").tobytes()
    head = (f'<?xml version="1.0"?>\n<VTKFile type="UnstructuredGrid" version="1.0" byte_order="LittleEndian" '
            f'header_type="{header_type}" compressor="vtkZLibDataCompressor">\n<UnstructuredGrid>\n'
            '<Piece NumberOfPoints="4" NumberOfCells="1">\n<Points>\n')
    encoded = base64.b64encode(header) + base64.b64encode(block)
    if layout == "binary":
        body = b'<DataArray type="Float64" NumberOfComponents="3" format="binary">\n' + encoded + \
            b"\n</DataArray>\n</Points>\n</Piece>\n</UnstructuredGrid>\n</VTKFile>\n"
    else:
        encoding = "raw" if layout == "raw" else "base64"
        data = header + block if layout == "raw" else encoded
        body = (b'<DataArray type="Float64" NumberOfComponents="3" format="appended" offset="0"/>\n'
                b'</Points>\n</Piece>\n</UnstructuredGrid>\n' + f'<AppendedData encoding="{encoding}">\n_'.encode()
                + data + b"\n</AppendedData>\n</VTKFile>\n")
    path.write_bytes(head.encode() + body)
    return path


@pytest.mark.parametrize("layout, header_type", [("binary", "UInt32"), ("binary", "UInt64"), ("raw", "UInt32"),
                                                 ("raw", "UInt64"), ("base64", "UInt64")])
def test_a_vtu_declaring_gigabytes_is_refused_before_unpacking(tmp_path, layout, header_type):
    path = bomb_vtu(tmp_path / "bomb.vtu", layout, header_type)
    assert path.stat().st_size < 5 * 2**20
    assert check_unpacked_size(path, limit=2**40) == BLOCKS * BLOCK
    start = time.perf_counter()
    with pytest.raises(MeshError, match=r"bomb.vtu: its compressed data declares 3072 MiB once unpacked, above "
                                        r"the limit of 2048 MiB; refused before unpacking it"):
        read_mesh(path)
    assert time.perf_counter() - start < 5  # nothing was unpacked (unpacking 3 GiB takes far longer)


def test_inspect_refuses_a_bomb_with_one_line_and_exit_2(tmp_path, capsys):
    assert main(["inspect", str(bomb_vtu(tmp_path / "bomb.vtu", "raw"))]) == 2
    err = capsys.readouterr().err
    assert "refused before unpacking it" in err and err.count("\n") == 1


@pytest.mark.parametrize("compression", ["zlib", "lzma", None])
def test_an_honest_vtu_reads_and_declares_what_it_holds(tmp_path, compression):
    box = box_mesh((2, 2, 2))
    path = tmp_path / "box.vtu"
    meshio.write(path, meshio.Mesh(box.points, [("tetra", box.cells)]), compression=compression)
    declared = check_unpacked_size(path)
    if compression:  # points (float64) and connectivity, offsets, types (meshio's integer widths)
        assert declared >= box.points.nbytes + 4 * box.cells.size
        assert declared < 2 * (box.points.nbytes + 8 * box.cells.size) + 4096
    else:
        assert declared == 0
    assert read_mesh(path).cells.shape == box.cells.shape


def test_hdf5_data_of_an_xdmf_mesh_is_measured_by_its_declared_shape(tmp_path):
    box = box_mesh((2, 2, 2))
    path = tmp_path / "box.xdmf"
    meshio.write(path, meshio.Mesh(box.points, [("tetra", box.cells)]))  # meshio compresses the HDF5 data
    declared = check_unpacked_size(path)
    assert declared >= box.points.nbytes + box.cells.size * 4
    with pytest.raises(MeshError, match="box.xdmf: its compressed data declares .* above the limit"):
        check_unpacked_size(path, limit=declared - 1)
    assert read_mesh(path).cells.shape == box.cells.shape
