"""Write the demo meshes of heatsoak with gmsh (run from anywhere; deterministic).

* platen.msh (MSH 4.1, mm, linear tetrahedra): a round aluminium heater
  platen with a pressed-in steel sleeve around a central bore and four bolt
  holes. Regions "platen" and "sleeve"; surface groups "bore" (inside of
  the sleeve, where a cartridge heater sits), "rim" (outer cylinder, in air),
  "top" (the working face), "base" (clamped to a cold plate) and
  "bolt-holes".
* platen_p2.msh (MSH 2.2, mm, quadratic tetra10 with curved edges): the same
  part, coarser.
* lblock.vtu (m, linear tetrahedra, no tags at all): an L-shaped block, for
  surface groups found by feature angle.

Usage: ``python meshes/make_meshes.py``
"""

from __future__ import annotations

from pathlib import Path

import gmsh
import meshio
import numpy as np
from heatsoak.core.mesh.read import read_mesh

HERE = Path(__file__).resolve().parent
MAX_BYTES = 2_000_000

# Platen geometry [mm].
R_OUT, R_SLEEVE, R_BORE, HEIGHT = 60.0, 20.0, 12.0, 20.0
R_BOLT, R_BOLT_CIRCLE = 4.0, 42.0


def _start(name: str):
    gmsh.initialize(["", "-nopopup"])
    for key, value in {
        "General.Terminal": 0,
        "General.NumThreads": 1,
        "Mesh.Algorithm": 6,
        "Mesh.Algorithm3D": 1,
        "Mesh.Binary": 0,
    }.items():
        gmsh.option.setNumber(key, value)
    gmsh.model.add(name)


def _platen_geometry():
    """Build the platen and sleeve, return their volume tags."""
    occ = gmsh.model.occ
    disc = occ.addCylinder(0, 0, 0, 0, 0, HEIGHT, R_OUT)
    seat = occ.addCylinder(0, 0, 0, 0, 0, HEIGHT, R_SLEEVE)
    holes = []
    for k in range(4):
        a = np.pi / 4 + k * np.pi / 2
        holes.append(
            (
                3,
                occ.addCylinder(
                    R_BOLT_CIRCLE * np.cos(a), R_BOLT_CIRCLE * np.sin(a), 0, 0, 0, HEIGHT, R_BOLT
                ),
            )
        )
    platen, _ = occ.cut([(3, disc)], [(3, seat), *holes])
    sleeve_outer = occ.addCylinder(0, 0, 0, 0, 0, HEIGHT, R_SLEEVE)
    bore = occ.addCylinder(0, 0, 0, 0, 0, HEIGHT, R_BORE)
    sleeve, _ = occ.cut([(3, sleeve_outer)], [(3, bore)])
    occ.fragment(platen, sleeve)
    occ.synchronize()
    return platen[0][1], sleeve[0][1]


def _classify_surfaces():
    """Surface tags of each named group, from where each surface lies."""
    groups = {"bore": [], "rim": [], "top": [], "base": [], "bolt-holes": []}
    inner = []
    for _, tag in gmsh.model.getEntities(2):
        x0, y0, z0, x1, y1, z1 = gmsh.model.getBoundingBox(2, tag)
        cx, cy = 0.5 * (x0 + x1), 0.5 * (y0 + y1)
        radius = 0.5 * (x1 - x0)
        if z1 - z0 < 1e-6:
            groups["top" if z0 > 0.5 * HEIGHT else "base"].append(tag)
        elif abs(radius - R_BORE) < 1e-3 and np.hypot(cx, cy) < 1e-3:
            groups["bore"].append(tag)
        elif abs(radius - R_OUT) < 1e-3:
            groups["rim"].append(tag)
        elif abs(radius - R_BOLT) < 1e-3:
            groups["bolt-holes"].append(tag)
        else:
            inner.append(tag)  # the press fit between sleeve and platen
    return groups, inner


def _platen(order: int, size: float, path: Path, version: float):
    _start("platen")
    platen, sleeve = _platen_geometry()
    groups, inner = _classify_surfaces()
    assert len(inner) >= 1 and all(groups.values()), (groups, inner)
    gmsh.model.addPhysicalGroup(3, [platen], name="platen")
    gmsh.model.addPhysicalGroup(3, [sleeve], name="sleeve")
    for name, tags in groups.items():
        gmsh.model.addPhysicalGroup(2, tags, name=name)
    gmsh.option.setNumber("Mesh.MeshSizeMax", size)
    gmsh.option.setNumber("Mesh.MeshSizeFromCurvature", 12)
    gmsh.model.mesh.generate(3)
    if order == 2:
        gmsh.model.mesh.setOrder(2)
    gmsh.option.setNumber("Mesh.MshFileVersion", version)
    gmsh.write(str(path))
    gmsh.finalize()


def _lblock(path: Path):
    """An L-shaped block 0.10 x 0.06 x 0.04 m, written as VTU with no tags."""
    _start("lblock")
    occ = gmsh.model.occ
    block = occ.addBox(0, 0, 0, 0.10, 0.06, 0.04)
    notch = occ.addBox(0.05, 0.03, 0, 0.05, 0.03, 0.04)
    occ.cut([(3, block)], [(3, notch)])
    occ.synchronize()
    gmsh.option.setNumber("Mesh.MeshSizeMax", 0.006)
    gmsh.model.mesh.generate(3)
    tags, coords, _ = gmsh.model.mesh.getNodes()
    _, elem_nodes = gmsh.model.mesh.getElementsByType(4)
    gmsh.finalize()
    index = np.zeros(tags.max() + 1, dtype=np.int64)
    index[tags] = np.arange(len(tags))
    cells = index[elem_nodes.astype(np.int64)].reshape(-1, 4)
    meshio.write(path, meshio.Mesh(coords.reshape(-1, 3), [("tetra", cells)]))


def main():
    jobs = [
        (HERE / "platen.msh", lambda p: _platen(1, 5.0, p, 4.1)),
        (HERE / "platen_p2.msh", lambda p: _platen(2, 9.0, p, 2.2)),
        (HERE / "lblock.vtu", _lblock),
    ]
    for path, make in jobs:
        make(path)
        size = path.stat().st_size
        assert size < MAX_BYTES, f"{path.name} is {size} bytes, over {MAX_BYTES}"
        m = read_mesh(path, unit="m" if path.suffix == ".vtu" else "mm")
        print(
            f"{path.name}: {m.n_nodes} nodes, {m.n_cells} tetra{'10' if m.order == 2 else ''}, "
            f"{size / 1e6:.2f} MB, regions {', '.join(m.region_names)}; groups {', '.join(m.group_names)}"
        )


if __name__ == "__main__":
    main()
