"""Mesh intake: any file meshio reads -> a checked :class:`~heatsoak.core.mesh.mesh.Mesh`.

:func:`read_mesh` reads the file and turns meshio's cell blocks and tags into
plain arrays (:mod:`heatsoak.core.mesh.tags`);
:func:`build_mesh` checks and repairs those arrays (duplicates, unused nodes,
inverted cells), finds the boundary, the interfaces between regions and the
surface groups. Problems the user must fix raise :class:`MeshError`; what was
repaired or ignored is listed in ``Mesh.warnings``.
"""

from __future__ import annotations

from dataclasses import replace
from pathlib import Path

import numpy as np
from heatsoak.core.errors import InputError, MeshError
from heatsoak.core.mesh.bounds import check_coordinates
from heatsoak.core.mesh.files import read_raw
from heatsoak.core.mesh.geometry import curved_cells, remember_volumes, sampled_jacobians
from heatsoak.core.mesh.mesh import TET_EDGES, Mesh
from heatsoak.core.mesh.surface import (
    REMAINDER,
    feature_groups,
    interface_faces,
    match_tagged_faces,
    pair_rows,
    split_remainder,
    unique_rows,
)
from heatsoak.core.mesh.tags import split_blocks
from heatsoak.core.mesh.topology import all_faces, reorient, signed_volumes
from scipy.sparse import coo_matrix
from scipy.sparse.csgraph import connected_components
from scipy.spatial import cKDTree

#: Length units a mesh file may be written in, and their size in metres.
UNITS = {"m": 1.0, "cm": 0.01, "mm": 0.001, "in": 0.0254}

#: Relative to the mean element volume: below ZERO an element is degenerate
#: (an error), below NEAR_ZERO it is reported.
ZERO_VOLUME = 1e-12
NEAR_ZERO_VOLUME = 1e-9

#: Nodes closer than this, relative to the bounding-box diagonal, coincide.
COINCIDENT = 1e-9

#: Distance of a mid-edge node from its edge's midpoint, per edge length, above which it is
#: checked for lying at another edge's midpoint (a different node order).
MID_NODE_OFFSET = 0.25


def unit_scale(unit: str) -> float:
    """Metres per ``unit``; InputError naming the allowed units otherwise."""
    try:
        return UNITS[unit]
    except (KeyError, TypeError):
        raise InputError(f"unknown length unit {unit!r}; allowed: {', '.join(UNITS)}") from None


#: Largest extents [m] of the parts a heat model is usually made of; outside them the unit is doubted.
PLAUSIBLE_EXTENT_M = (1e-3, 20.0)


def unit_doubt(extent_m: float, unit: str) -> str | None:
    """A note when a mesh ``extent_m`` [m] across (its largest bounding-box side) is an unlikely
    part size, as when millimetre coordinates are read as metres; None when it is plausible."""
    lo, hi = PLAUSIBLE_EXTENT_M
    if lo <= extent_m <= hi:
        return None
    sizes = {u: extent_m * UNITS[u] / UNITS[unit] for u in ("mm", "m", "in", "cm")}  # common mix-ups first
    other = [f"in {u!r} {e:.4g} m" for u, e in sizes.items() if lo <= e <= hi][:2]
    hint = f"; read {' or '.join(other)}" if other else ""
    return f"the mesh is {extent_m:.4g} m across read in {unit!r}: if the part is not that size, the unit is wrong{hint}"


def read_mesh(path, unit: str = "m", feature_angle: float = 30.0) -> Mesh:
    """Read a tetrahedral mesh file in any format meshio reads.

    Parameters
    ----------
    path : str or Path
    unit : {"m", "cm", "mm", "in"}
        Length unit of the coordinates in the file; points are scaled to metres.
    feature_angle : float
        Degrees; splits an untagged boundary into surface groups.

    Raises
    ------
    InputError
        Unknown unit.
    MeshError
        Unreadable file, no tetrahedra, broken elements; the message names the file.
    """
    scale = unit_scale(unit)
    path = Path(path)
    raw, notes = read_raw(path)
    points, cells, region, names, tagged, more, splits = split_blocks(raw, path)
    points = points * scale
    if len(points):
        doubt = unit_doubt(float(np.ptp(points, axis=0).max()), unit)
        more = (*more, doubt) if doubt else more
    return build_mesh(
        points,
        cells,
        region,
        names,
        tagged,
        feature_angle=feature_angle,
        source=str(path),
        unit=unit,
        warnings=(*notes, *more),
        splits=splits,
    )


def build_mesh(
    points,
    cells,
    cell_region,
    region_names,
    tagged_faces: dict | None = None,
    feature_angle: float = 30.0,
    source: str = "",
    unit: str = "m",
    warnings=(),
    splits=(),
) -> Mesh:
    """Check and repair element arrays and find boundary, interfaces and groups.

    Parameters
    ----------
    points : (n_nodes, 3) float, already in metres
    cells : (n_cells, 4 or 10) int, VTK node order, any orientation
    cell_region : (n_cells,) int into ``region_names``
    region_names : sequence of str
    tagged_faces : dict name -> (k, 3 or 6) int triangles, optional
        Named surface triangles, matched to boundary faces by vertex set.
        Without them (or when none lies on the boundary) the boundary is split
        at edges sharper than ``feature_angle`` degrees.
    source : str, the file, for messages
    unit : str, the file's length unit, recorded only
    warnings : sequence of str, carried into ``Mesh.warnings``
    splits : sequence of str, what was split into tetrahedra, carried into ``Mesh.splits``

    Returns
    -------
    Mesh
        Duplicate elements and unused nodes removed, inverted elements
        reoriented, each repair listed in ``warnings``; regions without
        elements dropped.
    """
    where = source or "the mesh"
    points, cells, cell_region = _as_arrays(points, cells, cell_region, region_names, where)
    notes = list(warnings)
    cells, cell_region, original = _drop_duplicates(cells, cell_region, notes)
    points, cells, tagged_faces = _drop_unused(points, cells, tagged_faces, notes)
    check_coordinates(points, where)
    _check_solid(points, where)
    cells, volumes = _fix_volumes(points, cells, original, where, notes)
    if cells.shape[1] == 10:
        _check_mid_nodes(points, cells, original, where)
    used, cell_region = np.unique(cell_region, return_inverse=True)
    region_names = tuple(region_names[i] for i in used)

    local, keys = all_faces(cells)
    _, count, pairs = pair_rows(keys)
    if (count > 2).any():
        notes.append(
            f"{(count > 2).sum()} element faces are shared by more than two elements (overlapping elements)"
        )
    on_boundary = np.flatnonzero(count == 1)
    faces, face_cell = local[on_boundary], on_boundary // 4
    grouping = _surface_groups(points, faces, keys[on_boundary], keys[pairs[:, 0]], tagged_faces, feature_angle)
    notes += grouping.notes
    notes += _unmerged(points, faces)
    notes += _bodies(cells, len(points))
    mesh = Mesh(
        points=points,
        cells=cells,
        cell_region=cell_region.ravel().astype(np.int64),
        region_names=region_names,
        faces=faces,
        face_group=grouping.face_group,
        group_names=grouping.names,
        face_cell=face_cell,
        interfaces=interface_faces(local, pairs, cell_region.ravel()),
        warnings=tuple(notes),
        source=source,
        unit=unit,
        splits=tuple(splits),
    )
    if cells.shape[1] == 4:  # straight cells: the vertex tetrahedra's volumes are the cells' own
        remember_volumes(mesh, volumes)
    return mesh


def _surface_groups(points, faces, face_keys, interior_keys, tagged_faces, feature_angle):
    """Groups of the boundary faces: the tagged triangles' names, the rest split at sharp edges;
    an untagged boundary (or one no tagged triangle lies on) split at sharp edges."""
    if tagged_faces:
        grouping = match_tagged_faces(face_keys, tagged_faces, interior_keys)
        if grouping.names != (REMAINDER,):
            return split_remainder(points, faces, grouping, feature_angle)
        note = f"no tagged triangle lies on the boundary; surfaces split at {feature_angle:g} degree edges"
        return replace(feature_groups(points, faces, feature_angle), notes=(*grouping.notes, note))
    return feature_groups(points, faces, feature_angle)


def _as_arrays(points, cells, cell_region, region_names, where):
    """Arrays of the documented shapes, or MeshError naming what is wrong."""
    points = np.asarray(points, dtype=float)
    cells = np.asarray(cells)
    cell_region = np.asarray(cell_region).ravel()
    if points.ndim != 2 or points.shape[1] != 3:
        raise MeshError(f"{where}: points have shape {points.shape}, expected (n, 3)")
    if cells.ndim != 2 or cells.shape[1] not in (4, 10) or not np.issubdtype(cells.dtype, np.integer):
        raise MeshError(
            f"{where}: cells have shape {cells.shape} ({cells.dtype}), expected integers (n, 4) or (n, 10)"
        )
    if len(cells) == 0:
        raise MeshError(f"no tetrahedra in {where}")
    if cells.min() < 0:
        e = int(np.argmax((cells < 0).any(axis=1)))
        raise MeshError(f"{where}: element {e} refers to node index {cells.min()}: node indices cannot be "
                        "negative (a broken or hand-edited file)")
    if cells.max() >= len(points):
        raise MeshError(
            f"{where}: an element refers to node {cells.max()} but there are only {len(points)} nodes (truncated file?)"
        )
    if cell_region.shape != (len(cells),) or cell_region.min() < 0 or cell_region.max() >= len(region_names):
        raise MeshError(
            f"{where}: cell regions must be {len(cells)} indices into {len(region_names)} region names"
        )
    return points, cells.astype(np.int64), cell_region.astype(np.int64)


def _drop_duplicates(cells, cell_region, notes):
    """Keep one of elements with the same vertex set: the one in the smallest region, the first
    of equal ones (gmsh's msh 2.2 lists an element once per physical group it is in)."""
    size = np.bincount(cell_region)[cell_region]
    perm = np.lexsort((np.arange(len(cells)), size))
    first, inverse, _ = unique_rows(np.sort(cells[perm, :4], axis=1))
    keep = np.sort(perm[first])
    if len(keep) < len(cells):
        mixed = (cell_region[perm] != cell_region[perm[first]][inverse]).any()
        why = "; one listed in several regions is kept in the smallest" if mixed else ""
        notes.append(f"dropped {len(cells) - len(keep)} duplicate elements (same nodes as another element){why}")
    return cells[keep], cell_region[keep], keep


def _drop_unused(points, cells, tagged, notes):
    """Remove nodes no element uses and renumber the rest."""
    used = np.zeros(len(points), dtype=bool)
    used[cells] = True
    if used.all():
        return points, cells, tagged
    notes.append(f"dropped {(~used).sum()} nodes that no element uses")
    new = np.cumsum(used) - 1
    new[~used] = -1
    if tagged:
        tagged = {k: new[np.asarray(v)] for k, v in tagged.items()}
        tagged = {k: v[(v >= 0).all(axis=1)] for k, v in tagged.items()}
    return points[used], new[cells], tagged


def _check_solid(points, where):
    """MeshError when every node lies in one plane (a 2-D mesh, or points given as x, y only)."""
    centred = points - points.mean(axis=0)
    sv = np.linalg.svd(centred.T @ centred, compute_uv=False)
    if sv[2] <= 1e-24 * sv[0]:
        flat = [a for a, e in zip("xyz", np.ptp(points, axis=0)) if e == 0]
        which = f" (every {flat[0]} is {points[0, 'xyz'.index(flat[0])]:g})" if flat else ""
        raise MeshError(
            f"every node of {where} lies in one plane{which}: a 2-D mesh? tetrahedra need x, y and z coordinates"
        )


def _unmerged(points, faces):
    """A warning when boundary faces lie on top of each other on coincident, unmerged nodes.

    Such faces (an exported crack, or parts meshed apart and not merged) insulate
    the two sides from each other, which is rarely what the user meant.
    """
    nodes = np.unique(faces[:, :3])
    tol = COINCIDENT * float(np.linalg.norm(np.ptp(points, axis=0)))
    pairs = cKDTree(points[nodes]).query_pairs(tol, output_type="ndarray")
    if len(pairs) == 0:
        return []
    graph = coo_matrix((np.ones(len(pairs)), (pairs[:, 0], pairs[:, 1])), shape=(len(nodes),) * 2)
    rep = np.arange(len(points))
    rep[nodes] = nodes[connected_components(graph, directed=False)[1]]
    _, count, _ = pair_rows(np.sort(rep[faces[:, :3]], axis=1))
    stacked = np.flatnonzero(count > 1)
    if len(stacked) == 0:
        return []
    x, y, z = points[faces[stacked[0], :3]].mean(axis=0)
    return [
        f"{len(stacked)} boundary faces lie on top of other boundary faces on coincident but unmerged nodes "
        f"(first near ({x:.4g}, {y:.4g}, {z:.4g}) m): no heat flows across them, as across a crack; "
        "merge duplicate nodes in the mesher if the parts should conduct"
    ]


def _fix_volumes(points, cells, original, where, notes):
    """Raise on zero-volume elements, report tiny ones, reorient inverted ones; the cells and the
    volumes (n_cells,) of their vertex tetrahedra."""
    vol = signed_volumes(points, cells)
    size = np.abs(vol)
    mean = size.mean()
    zero = size <= ZERO_VOLUME * mean
    if zero.any() or mean == 0:
        i = int(np.argmin(size))
        x, y, z = points[cells[i, :4]].mean(axis=0)
        raise MeshError(
            f"{max(zero.sum(), 1)} elements of zero volume in {where} (worst: element {original[i]} "
            f"near ({x:.4g}, {y:.4g}, {z:.4g}) m, volume {size[i]:.3g} m^3, mean {mean:.3g} m^3)"
        )
    tiny = size < NEAR_ZERO_VOLUME * mean
    if tiny.any():
        i = int(np.argmin(size))
        notes.append(
            f"{tiny.sum()} elements of nearly zero volume (worst: element {original[i]}, "
            f"{size[i] / mean:.2g} of the mean volume)"
        )
    negative = vol < 0
    if negative.any():
        notes.append(f"reoriented {negative.sum()} inverted elements (negative volume)")
        cells = reorient(cells, negative)
    return cells, size


def _check_mid_nodes(points, cells, original, where):
    """MeshError for tetra10 cells that cannot be used: mid-edge nodes that sit at another edge's
    midpoint (a node order other than VTK's), or cells curved so far that the isoparametric map
    folds (det J <= 0 at a sample point)."""
    a, b = points[cells[:, TET_EDGES[:, 0]]], points[cells[:, TET_EDGES[:, 1]]]
    mid, length = 0.5 * (a + b), np.linalg.norm(b - a, axis=2)
    offset = np.linalg.norm(points[cells[:, 4:]] - mid, axis=2)
    far = np.flatnonzero((offset > MID_NODE_OFFSET * length).any(axis=1))
    if len(far):
        to_other = np.linalg.norm(points[cells[far, 4:]][:, :, None] - mid[far][:, None], axis=3)  # (n, node, edge)
        swapped = (to_other.min(axis=2) < 0.01 * length[far]) & (to_other.argmin(axis=2) != np.arange(6))
        if swapped.any(axis=1).any():
            raise MeshError(
                f"{swapped.any(axis=1).sum()} quadratic elements of {where} have mid-edge nodes at the midpoints "
                "of other edges: the file's tetra10 node order is not the one heatsoak reads (VTK order)"
            )
    curved = np.flatnonzero(curved_cells(points, cells))
    ratio, xi = sampled_jacobians(points, cells[curved])
    folded = np.flatnonzero(ratio <= 0)
    if len(folded):
        j = folded[np.argmin(ratio[folded])]
        i = curved[j]
        worst = float((offset[i] / length[i]).max())
        x, y, z = points[cells[i, :4]].mean(axis=0)
        raise MeshError(
            f"{len(folded)} curved quadratic elements of {where} have a negative Jacobian at a sample point "
            f"(the element folds over itself; worst: element {original[i]} near ({x:.4g}, {y:.4g}, {z:.4g}) m, at reference "
            f"point ({', '.join(f'{v:.3g}' for v in xi[j])}), a mid-edge node {worst:.2g} of its edge's "
            "length off the straight edge): move the mid-edge nodes nearer their edges, or refine there"
        )


def _bodies(cells, n_nodes):
    """A warning when the elements form more than one connected body."""
    v = cells[:, :4]
    graph = coo_matrix(
        (np.ones(3 * len(v)), (np.repeat(v[:, 0], 3), v[:, 1:].ravel())), shape=(n_nodes, n_nodes)
    )
    _, labels = connected_components(graph, directed=False)
    sizes = np.bincount(labels[v[:, 0]])
    sizes = np.sort(sizes[sizes > 0])[::-1]
    if len(sizes) < 2:
        return []
    listed = ", ".join(str(s) for s in sizes[:10]) + (", ..." if len(sizes) > 10 else "")
    return [f"{len(sizes)} disconnected bodies (elements per body: {listed}); no heat flows between them"]
