"""``heatsoak inspect``: what heatsoak understood of a mesh file.

:func:`summarize` turns a :class:`~heatsoak.core.mesh.mesh.Mesh` into plain data
(JSON-ready), :func:`format_summary` into an aligned text table.
"""

from __future__ import annotations

import json

import numpy as np
from heatsoak.core.mesh.geometry import face_areas, mesh_cell_volumes
from heatsoak.core.mesh.mesh import TET_EDGES, Mesh
from heatsoak.core.mesh.topology import signed_volumes

#: Elements whose shape ratio is below this are counted as poor.
POOR_SHAPE = 0.1


def shape_ratio(points: np.ndarray, cells: np.ndarray, volumes: np.ndarray | None = None) -> np.ndarray:
    """Normalised volume-to-edge ratio of the cells' vertex tetrahedra.

    ``6 sqrt(2) |V| / l_rms^3`` with ``l_rms`` the root mean square of the six
    edge lengths: 1 for a regular tetrahedron, 0 for a flat one.

    ``volumes`` (n_cells,), when given, are the vertex tetrahedra's volumes, not computed again.

    Returns
    -------
    (n_cells,) array in [0, 1]
    """
    corners = [points[cells[:, j]] for j in range(4)]  # one gather per vertex, no (n, 6, 3) temporaries
    l_sq = sum(np.einsum("ei,ei->e", corners[j] - corners[i], corners[j] - corners[i]) for i, j in TET_EDGES)
    l_rms = np.sqrt(l_sq / 6.0)
    vol = np.abs(signed_volumes(points, cells)) if volumes is None else volumes
    return 6.0 * np.sqrt(2.0) * vol / l_rms**3


def summarize(mesh: Mesh) -> dict:
    """The facts of a mesh as plain Python data (lengths in metres).

    Returns
    -------
    dict with keys file, unit, nodes, elements, element_order, regions
    [{name, elements, volume}], surface_groups [{name, faces, area}],
    interfaces, bounding_box {min, max}, volume, area, quality
    {measure, min, median, max, poor, poor_below}, split (cells of other shapes
    split into tetrahedra, "648 hexahedra split into 3240 tetrahedra"), warnings.
    """
    vol = mesh_cell_volumes(mesh)
    area = face_areas(mesh.points, mesh.faces)
    n_reg, n_grp = len(mesh.region_names), len(mesh.group_names)
    reg_count = np.bincount(mesh.cell_region, minlength=n_reg)
    reg_vol = np.bincount(mesh.cell_region, weights=vol, minlength=n_reg)
    grp_count = np.bincount(mesh.face_group, minlength=n_grp)
    grp_area = np.bincount(mesh.face_group, weights=area, minlength=n_grp)
    q = shape_ratio(mesh.points, mesh.cells, vol if mesh.order == 1 else None)
    return {
        "file": mesh.source,
        "unit": mesh.unit,
        "nodes": int(mesh.n_nodes),
        "elements": int(mesh.n_cells),
        "element_order": int(mesh.order),
        "regions": [
            {"name": n, "elements": int(c), "volume": float(v)}
            for n, c, v in zip(mesh.region_names, reg_count, reg_vol)
        ],
        "surface_groups": [
            {"name": n, "faces": int(c), "area": float(a)}
            for n, c, a in zip(mesh.group_names, grp_count, grp_area)
        ],
        "interfaces": len(mesh.interfaces),
        "bounding_box": {"min": mesh.points.min(axis=0).tolist(), "max": mesh.points.max(axis=0).tolist()},
        "volume": float(vol.sum()),
        "area": float(area.sum()),
        "quality": {
            "measure": "6*sqrt(2)*volume/rms_edge^3 (1 = regular tetrahedron)",
            "min": float(q.min()),
            "median": float(np.median(q)),
            "max": float(q.max()),
            "poor": int((q < POOR_SHAPE).sum()),
            "poor_below": POOR_SHAPE,
        },
        "split": list(mesh.splits),
        "warnings": list(mesh.warnings),
    }


def _table(title, header, rows):
    """Lines of a plain table, columns padded to their widest entry."""
    cols = [header, *rows]
    width = [max(len(r[i]) for r in cols) for i in range(len(header))]

    def line(r):
        return "  " + "  ".join(
            c.ljust(w) if i == 0 else c.rjust(w) for i, (c, w) in enumerate(zip(r, width))
        )

    return [title, line(header), *(line(r) for r in rows)]


def format_summary(d: dict) -> str:
    """Plain aligned text of a :func:`summarize` dict, lengths in metres."""
    lo, hi = d["bounding_box"]["min"], d["bounding_box"]["max"]
    q = d["quality"]
    out = [
        f"file           {d['file'] or '(generated)'}   (unit {d['unit']}, shown in metres)",
        f"nodes          {d['nodes']}",
        f"elements       {d['elements']} {'linear (tetra)' if d['element_order'] == 1 else 'quadratic (tetra10)'}",
        *(f"split          {s}" for s in d.get("split", ())),
        f"bounding box   [{', '.join(f'{v:.6g}' for v in lo)}] .. [{', '.join(f'{v:.6g}' for v in hi)}] m",
        f"volume         {d['volume']:.6g} m^3, boundary area {d['area']:.6g} m^2",
        f"interfaces     {d['interfaces']} faces between regions",
        (
            f"shape ratio    min {q['min']:.3g}, median {q['median']:.3g}, max {q['max']:.3g}; "
            f"{q['poor']} elements below {q['poor_below']:g}"
        ),
        "",
    ]
    regions = [(r["name"], str(r["elements"]), f"{r['volume']:.6g}") for r in d["regions"]]
    out += _table("regions", ("name", "elements", "volume m^3"), regions)
    groups = [(g["name"], str(g["faces"]), f"{g['area']:.6g}") for g in d["surface_groups"]]
    out += ["", *_table("surface groups", ("name", "faces", "area m^2"), groups)]
    if d["warnings"]:
        out += ["", "warnings", *(f"  - {w}" for w in d["warnings"])]
    return "\n".join(out)


def cmd_inspect(args) -> int:
    """``heatsoak inspect MESH [--unit U] [--feature-angle A] [--json]``."""
    from heatsoak.core.mesh.read import read_mesh

    mesh = read_mesh(args.mesh, unit=args.unit, feature_angle=args.feature_angle)
    d = summarize(mesh)
    print(json.dumps(d, indent=2) if args.json else format_summary(d))
    return 0
