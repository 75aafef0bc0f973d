"""Cell blocks and tags of a meshio mesh -> tetrahedra, regions and named triangles.

Volume regions and surface groups come from the tags a file carries, chosen by
what the arrays mean, not by their names' alphabetical order: MED groups (meshio's
``cell_tags`` families with names in ``raw.cell_tags``); integer cell arrays
``gmsh:physical`` (names from ``field_data``), ``medit:ref``, ``CellEntityIds``;
other integer arrays whose name says "physical"; other integer arrays with few
distinct values; arrays of CAD entity numbers (``gmsh:geometrical`` or a name
saying "geometrical", "entity", "elementary") and of parallel partitions ("partition",
"ghost", "processor", "mpi") last, as they split a named side into pieces that mean
nothing to the user. Float arrays of whole numbers count as integer. Without
arrays, named cell sets (Abaqus element sets, ...); the set names meshio joins
into one array's name when it writes sets to VTU, XDMF, ... are read back.
Tags without a name are called "region-<tag>" / "group-<tag>".

gmsh's physical tag 0 and MED's family 0 mean "in no group": such cells are
untagged. gmsh writes a tag negative for an oriented group: -5 is group 5.

Linear hexahedra, wedges and pyramids are split into tetrahedra
(:mod:`heatsoak.core.mesh.split`) in their region; quadrilaterals among the
tagged faces are cut the same way. Quadratic cells other than tetra10, and solid
cells of other kinds, are refused with the share of the volume they hold.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
from heatsoak.core.errors import MeshError
from heatsoak.core.mesh.sets import family_sets, joined_set_names, named_sets, set_labels, sets_overlap
from heatsoak.core.mesh.split import (
    QUADRATIC_TYPES,
    SPLIT_TYPES,
    corner_volume,
    split_cells,
    split_quads,
    tet_volume,
)

#: Integer cell arrays used as tags, most trusted first; other integer
#: arrays with at most MAX_TAGS distinct values come after them.
TAG_KEYS = ("gmsh:physical", "medit:ref", "CellEntityIds")
LAST_TAG_KEYS = ("gmsh:geometrical",)
#: Words in an array name saying it holds groups (tried first) or CAD entities (tried last).
PHYSICAL_WORDS = ("phys",)
ENTITY_WORDS = ("geom", "entit", "elementar", "partition", "ghost", "processor", "mpi")
MAX_TAGS = 100
#: Arrays whose sign is an orientation, not a different group.
SIGNED_KEYS = ("gmsh:physical", "gmsh:geometrical")

VOLUME_TYPES = ("tetra", "tetra10", *SPLIT_TYPES)
FACE_TYPES = ("triangle", "triangle6", "quad")

#: Region of a file with no volume tags, and of cells outside every named set.
UNTAGGED_REGION = "region"
UNSET_REGION = "untagged"


def _census(blocks) -> str:
    """ "triangle 120, line 12" for a list of (type, count)."""
    total = {}
    for kind, n in blocks:
        total[kind] = total.get(kind, 0) + n
    return ", ".join(f"{k} {n}" for k, n in total.items()) or "no cells"


def _points(raw, path: Path) -> np.ndarray:
    """The file's points as (n, 3) floats (a z of 0 added to 2-D points)."""
    points = np.asarray(raw.points, dtype=float)
    if points.ndim != 2 or points.shape[1] not in (2, 3):
        raise MeshError(f"{path}: points have shape {points.shape}, expected (n, 3)")
    if points.shape[1] == 2:
        points = np.hstack([points, np.zeros((len(points), 1))])
    return points


def _is_solid(kind: str) -> bool:
    """True for meshio's three-dimensional cell types."""
    try:
        from meshio._mesh import topological_dimension  # meshio's own table; not exported by meshio 5.3
    except ImportError:
        topological_dimension = {}
    dim = topological_dimension.get(kind)
    if dim is None:
        return kind.startswith(("tetra", "hexahedron", "wedge", "pyramid", "polyhedron", "VTK_LAGRANGE_TETRA",
                                "VTK_LAGRANGE_HEX", "VTK_LAGRANGE_WEDGE", "VTK_LAGRANGE_PYRAMID"))
    return dim == 3


def _refuse_unusable_solids(raw, points, path: Path) -> None:
    """MeshError for solid cells heatsoak cannot use, with the share of the volume they hold:
    running on the rest would heat part of the body."""
    solid = [b for b in raw.cells if _is_solid(b.type) and len(b.data)]
    bad = [b for b in solid if b.type not in VOLUME_TYPES]
    if not bad:
        return
    odd = [b for b in bad if b.type not in QUADRATIC_TYPES]
    if odd:
        raise MeshError(f"{path} holds solid cells heatsoak cannot read ({_census([(b.type, len(b.data)) for b in odd])}); "
                        "export tetrahedra, hexahedra, wedges or pyramids")
    lost = sum(corner_volume(b.type, points, b.data) for b in bad)
    total = lost + sum(tet_volume(points, b.data) if b.type.startswith("tetra")
                       else corner_volume(b.type, points, b.data) for b in solid if b.type in VOLUME_TYPES)
    share = 100.0 * lost / total if total > 0 else 100.0
    raise MeshError(
        f"{path}: quadratic {_census([(b.type, len(b.data)) for b in bad])} cells hold {share:.3g}% of the volume; "
        "heatsoak reads quadratic cells only as 10-node tetrahedra: export these as linear cells "
        "(hexahedra, wedges and pyramids are split into tetrahedra) or mesh the body with tetra10"
    )


def _volume_cells(raw, vol, path: Path):
    """Tetrahedra of the volume blocks, the original cell (over ``vol``) each came from, and what was split.

    A hexahedron, wedge or pyramid written with repeated nodes (a wedge, pyramid or tetrahedron
    collapsed into it, as some writers store them) keeps only its tetrahedra of four distinct
    nodes: those fill the true shape.
    """
    cells, source, counts, offset = [], [], {}, 0
    for i in vol:
        block = raw.cells[i]
        data = np.asarray(block.data, dtype=np.int64)
        tets, origin = data, np.arange(len(data))
        if block.type in SPLIT_TYPES:
            tets, origin = split_cells(block.type, data)
            ranked = np.sort(tets, axis=1)
            distinct = (ranked[:, 1:] != ranked[:, :-1]).all(axis=1)
            collapsed = len(np.unique(origin[~distinct]))
            tets, origin = tets[distinct], origin[distinct]
            if len(np.unique(origin)) < len(data):
                raise MeshError(f"{path}: {len(data) - len(np.unique(origin))} {block.type} cells have so many "
                                "repeated nodes that they hold no volume")
            counts[block.type] = counts.get(block.type, np.zeros(3, int)) + (len(data), len(tets), collapsed)
        cells.append(tets)
        source.append(origin + offset)
        offset += len(data)
    said = tuple(f"{n} {SPLIT_TYPES[k][1] if n > 1 else k} split into {m} tetrahedra"
                 + (f" ({c} of them with repeated nodes: collapsed shapes)" if c else "")
                 for k, (n, m, c) in counts.items())
    return np.vstack(cells), np.concatenate(source), said


def split_blocks(raw, path: Path):
    """Split meshio cell blocks into tetrahedra (with regions) and tagged triangles.

    Parameters
    ----------
    raw : meshio.Mesh
    path : Path, for messages

    Returns
    -------
    points : (n_nodes, 3) float, in the file's unit
    cells : (n_cells, 4 or 10) int
    region : (n_cells,) int into ``names``
    names : tuple of str, region names
    tagged : dict group name -> (k, 3) int vertex triangles, or None
    warnings : tuple of str
    splits : tuple of str, "N hexahedra split into M tetrahedra" per split cell type
    """
    census = [(b.type, len(b.data)) for b in raw.cells]
    points = _points(raw, path)
    _refuse_unusable_solids(raw, points, path)
    vol = [i for i, b in enumerate(raw.cells) if b.type in VOLUME_TYPES and len(b.data)]
    if not vol:
        hint = ""
        if path.suffix == ".msh":
            hint = " (gmsh saves only elements in physical groups: add a physical volume holding every volume)"
        raise MeshError(f"no tetrahedra in {path}; found: {_census(census)}{hint}")
    kinds = {raw.cells[i].type for i in vol}
    if "tetra10" in kinds and len(kinds) > 1:
        raise MeshError(
            f"{path} mixes linear and quadratic cells ({_census([c for c in census if c[0] in kinds])}); "
            "export all elements with one order"
        )
    faces = [i for i, b in enumerate(raw.cells) if b.type in FACE_TYPES and len(b.data)]
    ignored = [c for i, c in enumerate(census) if i not in vol and i not in faces and c[1]]
    warnings = []
    if ignored:
        warnings.append(f"ignored cells that are neither solid cells nor surface faces: {_census(ignored)}")
    cells, source, splits = _volume_cells(raw, vol, path)
    region, names, note = _block_labels(raw, vol, 3, "region")
    warnings += note
    tagged = None
    if faces:
        tagged, note = _tagged_triangles(raw, faces)
        warnings += note
    if region is None:
        region, names = np.zeros(len(cells), dtype=np.int64), (UNTAGGED_REGION,)
    else:
        region = region[source]
    warnings += _lost_physical_names(raw)
    names = tuple(n or UNSET_REGION for n in names)
    return points, cells, region, names, tagged, tuple(warnings), splits


def _tagged_triangles(raw, faces):
    """Named vertex triangles of the face blocks (quadrilaterals cut in two), or None, and notes."""
    labels, fnames, notes = _block_labels(raw, faces, 2, "group")
    tri, origin, offset = [], [], 0
    for i in faces:
        data = np.asarray(raw.cells[i].data, dtype=np.int64)
        if raw.cells[i].type == "quad":
            tri.append(split_quads(data))
            origin.append(np.repeat(np.arange(len(data)), 2) + offset)
        else:
            tri.append(data[:, :3])
            origin.append(np.arange(len(data)) + offset)
        offset += len(data)
    tri, origin = np.vstack(tri), np.concatenate(origin)
    if labels is None:
        return None, [*notes, f"ignored {offset} surface faces that carry no tag"]
    labels = labels[origin]
    return {n: tri[labels == k] for k, n in enumerate(fnames) if n}, notes


def _lost_physical_names(raw) -> list:
    """A warning when a gmsh file names physical groups that no element carries (tag 0 everywhere)."""
    tags = raw.cell_data.get("gmsh:physical")
    if not raw.field_data or tags is None or any(np.asarray(a).any() for a in tags):
        return []
    return [
        f"the file names physical groups ({', '.join(sorted(raw.field_data))}) but no element carries "
        "them (gmsh writes tag 0 with Mesh.SaveAll in msh 2.2): save without SaveAll to keep the names"
    ]


def _whole_numbers(a: np.ndarray) -> bool:
    """True for an integer array, or a float one holding only whole numbers
    (several writers store region ids as floats)."""
    if np.issubdtype(a.dtype, np.integer):
        return True
    if not np.issubdtype(a.dtype, np.floating) or not np.isfinite(a).all():
        return False
    return bool((a == np.round(a)).all() and (np.abs(a) < 2**53).all())


def _key_rank(key: str) -> int:
    """0 known group arrays, 1 named as physical groups, 2 other, 3 CAD entity numbers."""
    low = key.lower()
    if key in TAG_KEYS:
        return 0
    if key in LAST_TAG_KEYS or any(w in low for w in ENTITY_WORDS):
        return 3
    return 1 if any(w in low for w in PHYSICAL_WORDS) else 2


def _integer_key(raw, blocks):
    """The cell_data key to take tags from for ``blocks``, or None."""
    data = raw.cell_data

    def usable(key):
        arrays = [np.asarray(data[key][i]) for i in blocks]
        ok = all(a.ndim == 1 and _whole_numbers(a) for a in arrays)
        if ok and key in SIGNED_KEYS and not any(a.any() for a in arrays):
            return False  # tag 0 on every cell: a file without physical groups
        limit = MAX_TAGS if _key_rank(key) == 2 else None
        return ok and (limit is None or len(np.unique(np.concatenate(arrays))) <= limit)

    def rank(key):
        return _key_rank(key), TAG_KEYS.index(key) if key in TAG_KEYS else 0, key

    ranked = sorted((k for k in data if k != "cell_tags"), key=rank)
    return next((key for key in ranked if usable(key)), None)


def _tag_names(raw, key: str, dim: int) -> dict:
    """Names of the values of the tag array ``key``: gmsh's field_data or meshio's joined set names."""
    if key == "gmsh:physical":
        known = {}
        for name, value in raw.field_data.items():
            v = np.asarray(value).ravel()
            if len(v) == 2 and int(v[1]) == dim:
                known[abs(int(v[0]))] = name
        return known
    return {} if _key_rank(key) == 0 or key in LAST_TAG_KEYS else joined_set_names(raw, key)


def _block_labels(raw, blocks, dim, prefix):
    """Per-cell labels of the cells in ``blocks`` from integer tags or named sets.

    Returns
    -------
    labels : (n,) int array into ``names``, or None when the cells carry no tag
    names : tuple of str; "" marks the label of cells in no group
    notes : list of str
    """
    families = family_sets(raw)
    if families:
        return set_labels(families, raw, blocks)
    key = _integer_key(raw, blocks)
    if key == "gmsh:physical" and sets_overlap(named_sets(raw), raw, blocks):
        return set_labels(named_sets(raw), raw, blocks)  # meshio's gmsh:physical keeps only an entity's first group
    if key is None:
        return set_labels(named_sets(raw), raw, blocks)
    tags = np.concatenate([np.asarray(raw.cell_data[key][i], dtype=np.int64) for i in blocks])
    if key in SIGNED_KEYS:
        tags = np.abs(tags)  # gmsh writes a group negative to flip its orientation
    known = _tag_names(raw, key, dim)
    values, labels = np.unique(tags, return_inverse=True)
    names = [known.get(int(t), f"{prefix}-{t}") for t in values]
    if key in SIGNED_KEYS:  # gmsh writes tag 0 for cells in no physical group
        names = ["" if t == 0 else n for t, n in zip(values, names)]
    labels, names = _merge_same_names(labels.ravel(), names)
    return labels, names, []


def _merge_same_names(labels, names):
    """Give cells whose tags share a name one label; keep first-seen order."""
    unique, first, inverse = np.unique(names, return_index=True, return_inverse=True)
    order = np.argsort(first, kind="stable")
    rank = np.empty(len(unique), dtype=np.int64)
    rank[order] = np.arange(len(unique))
    return rank[inverse.ravel()][labels], tuple(unique[order].tolist())
