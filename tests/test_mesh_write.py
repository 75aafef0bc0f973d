"""A mesh written back to MSH 2.2 reads back the same: points, cells, regions, surface groups."""

import numpy as np
import pytest
from heatsoak.core.mesh.generate import box_mesh
from heatsoak.core.mesh.read import read_mesh
from heatsoak.core.mesh.write import write_msh22


@pytest.mark.parametrize("order", [1, 2])
def test_a_written_mesh_reads_back_with_its_regions_and_groups(tmp_path, order):
    mesh = box_mesh((3, 2, 2), size=(0.03, 0.02, 0.02), order=order,
                    regions=lambda c: ((c[:, 0] > 0.015).astype(int), ("cold", "hot")))
    back = read_mesh(write_msh22(mesh, tmp_path / "b.msh", scale=0.001), unit="mm")
    np.testing.assert_allclose(back.points, mesh.points, rtol=0, atol=1e-15)
    assert back.order == order and back.n_cells == mesh.n_cells
    assert sorted(back.region_names) == ["cold", "hot"] and sorted(back.group_names) == sorted(mesh.group_names)
    for name in mesh.region_names:  # the same cells in each region
        mine = np.sort(np.sort(mesh.cells[mesh.cell_region == mesh.region_names.index(name)], axis=1), axis=0)
        theirs = np.sort(np.sort(back.cells[back.cell_region == back.region_names.index(name)], axis=1), axis=0)
        np.testing.assert_array_equal(mine, theirs)
