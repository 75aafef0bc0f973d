"""Cell blocks and tags of a meshio mesh -> tetrahedra, regions and named triangles.

Volume regions and surface groups come from the tags a file carries, most
trusted first: integer cell arrays (``gmsh:physical`` with names from
``field_data``, ``medit:ref``, ``CellEntityIds``, then any other integer array
with few distinct values; float arrays of whole numbers count as integer),
else named cell sets (Abaqus element sets, ...); the set names meshio joins
into one array's name when it writes sets to VTU, XDMF, ... are read back.
Tags without a name are called "region-<tag>" / "group-<tag>". gmsh's
physical tag 0 means "in no physical group" (what gmsh writes to a msh 2.2
file without physical groups, or with ``Mesh.SaveAll``): such cells are untagged.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
from heatsoak.core.errors import MeshError

#: Integer cell arrays used as tags, most trusted first; other integer
#: arrays with at most MAX_TAGS distinct values come after them.
TAG_KEYS = ("gmsh:physical", "medit:ref", "CellEntityIds")
LAST_TAG_KEYS = ("gmsh:geometrical",)
MAX_TAGS = 100

VOLUME_TYPES = ("tetra", "tetra10")
FACE_TYPES = ("triangle", "triangle6")

#: Region of a file with no volume tags, and of cells outside every named set.
UNTAGGED_REGION = "region"
UNSET_REGION = "untagged"


def _census(blocks) -> str:
    """ "triangle 120, line 12" for a list of (type, count)."""
    total = {}
    for kind, n in blocks:
        total[kind] = total.get(kind, 0) + n
    return ", ".join(f"{k} {n}" for k, n in total.items()) or "no cells"


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
    """
    census = [(b.type, len(b.data)) for b in raw.cells]
    vol = [i for i, b in enumerate(raw.cells) if b.type in VOLUME_TYPES and len(b.data)]
    if not vol:
        hint = ""
        if path.suffix == ".msh":
            hint = (
                " (gmsh saves only elements in physical groups: add a physical volume holding every volume)"
            )
        raise MeshError(f"no tetrahedra in {path}; found: {_census(census)}{hint}")
    kinds = {raw.cells[i].type for i in vol}
    if len(kinds) > 1:
        raise MeshError(
            f"{path} mixes linear and quadratic tetrahedra ({_census([c for c in census if c[0] in kinds])}); "
            "export all elements with one order"
        )
    faces = [i for i, b in enumerate(raw.cells) if b.type in FACE_TYPES and len(b.data)]
    ignored = [c for i, c in enumerate(census) if i not in vol and i not in faces and c[1]]
    warnings = []
    if ignored:
        warnings.append(f"ignored cells that are neither tetrahedra nor triangles: {_census(ignored)}")

    points = np.asarray(raw.points, dtype=float)
    if points.ndim != 2 or points.shape[1] not in (2, 3):
        raise MeshError(f"{path}: points have shape {points.shape}, expected (n, 3)")
    if points.shape[1] == 2:
        points = np.hstack([points, np.zeros((len(points), 1))])
    cells = np.vstack([np.asarray(raw.cells[i].data, dtype=np.int64) for i in vol])
    region, names, note = _block_labels(raw, vol, 3, "region")
    warnings += note
    tagged = None
    if faces:
        labels, fnames, note = _block_labels(raw, faces, 2, "group")
        warnings += note
        tri = np.vstack([np.asarray(raw.cells[i].data, dtype=np.int64)[:, :3] for i in faces])
        if labels is None:
            warnings.append(f"ignored {len(tri)} triangles that carry no tag")
        else:
            tagged = {n: tri[labels == k] for k, n in enumerate(fnames) if n}
    if region is None:
        region, names = np.zeros(len(cells), dtype=np.int64), (UNTAGGED_REGION,)
    warnings += _lost_physical_names(raw)
    names = tuple(n or UNSET_REGION for n in names)
    return points, cells, region, names, tagged, tuple(warnings)


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


def _integer_key(raw, blocks):
    """The cell_data key to take tags from for ``blocks``, or None."""
    data = raw.cell_data

    def usable(key, limit=None):
        arrays = [np.asarray(data[key][i]) for i in blocks]
        ok = all(a.ndim == 1 and _whole_numbers(a) for a in arrays)
        if ok and key == "gmsh:physical" and not any(a.any() for a in arrays):
            return False  # physical tag 0 on every cell: a file without physical groups
        return ok and (limit is None or len(np.unique(np.concatenate(arrays))) <= limit)

    others = sorted(k for k in data if k not in TAG_KEYS + LAST_TAG_KEYS)
    for key in [k for k in TAG_KEYS if k in data]:
        if usable(key):
            return key
    for key in others:
        if usable(key, MAX_TAGS):
            return key
    for key in [k for k in LAST_TAG_KEYS if k in data]:
        if usable(key):
            return key
    return None


def _block_labels(raw, blocks, dim, prefix):
    """Per-cell labels of the cells in ``blocks`` from integer tags or named sets.

    Returns
    -------
    labels : (n,) int array into ``names``, or None when the cells carry no tag
    names : tuple of str; "" marks the label of cells in no set
    notes : list of str
    """
    key = _integer_key(raw, blocks)
    if key == "gmsh:physical" and _sets_overlap(raw, blocks):
        return _set_labels(raw, blocks)  # meshio's gmsh:physical keeps only an entity's first group
    if key is not None:
        tags = np.concatenate([np.asarray(raw.cell_data[key][i], dtype=np.int64) for i in blocks])
        known = _joined_set_names(raw, key)
        if key == "gmsh:physical":
            for name, value in raw.field_data.items():
                v = np.asarray(value).ravel()
                if len(v) == 2 and int(v[1]) == dim:
                    known[int(v[0])] = name
        values, labels = np.unique(tags, return_inverse=True)
        names = [known.get(int(t), f"{prefix}-{t}") for t in values]
        if key == "gmsh:physical":  # gmsh writes tag 0 for cells in no physical group
            names = ["" if t == 0 else n for t, n in zip(values, names)]
        labels, names = _merge_same_names(labels.ravel(), names)
        return labels, names, []
    return _set_labels(raw, blocks)


def _named_sets(raw):
    """The file's named cell sets with one entry per cell block (gmsh's own sets left out)."""
    return {name: per_block for name, per_block in raw.cell_sets.items()
            if not name.startswith("gmsh:") and len(per_block) == len(raw.cells)}


def _sets_overlap(raw, blocks) -> bool:
    """True when a cell of ``blocks`` is in two named cell sets (gmsh groups sharing an entity)."""
    for i in blocks:
        count = np.zeros(len(raw.cells[i].data), dtype=np.int64)
        for per_block in _named_sets(raw).values():
            if per_block[i] is not None:
                np.add.at(count, np.asarray(per_block[i], dtype=np.int64), 1)
        if (count > 1).any():
            return True
    return False


#: Characters meshio joins cell set names with when it writes them as one cell array (its order).
JOIN_CHARS = ("-", "_", "#", "+", "/")


def _joined_set_names(raw, key: str) -> dict:
    """Names of the values of a cell array that meshio made from named cell sets, else {}.

    A format without cell sets (VTU, XDMF, ...) gets them from meshio as one integer array
    named by the set names joined with a character none of them holds; each cell holds its
    set's index, -1 when it is in none. The names are read back only when the values are
    exactly those indices, every set used, for one joining character only (two would make
    the names ambiguous).
    """
    if key in TAG_KEYS + LAST_TAG_KEYS:
        return {}
    values = set(np.unique(np.concatenate([np.asarray(a).ravel() for a in raw.cell_data[key]])).tolist())
    splits = [key.split(char) for char in JOIN_CHARS]
    fits = [parts for parts in splits if len(parts) > 1 and all(parts) and len(set(parts)) == len(parts)
            and values - {-1} == set(range(len(parts)))]
    return {**dict(enumerate(fits[0])), -1: ""} if len(fits) == 1 else {}


def _merge_same_names(labels, names):
    """Give cells whose tags share a name one label; keep first-seen order."""
    unique, first, inverse = np.unique(names, return_index=True, return_inverse=True)
    order = np.argsort(first, kind="stable")
    rank = np.empty(len(unique), dtype=np.int64)
    rank[order] = np.arange(len(unique))
    return rank[inverse.ravel()][labels], tuple(unique[order].tolist())


def _set_labels(raw, blocks):
    """Labels from meshio cell_sets (Abaqus element sets, ...): smallest set wins."""
    sizes = [len(blocks_data) for blocks_data in (raw.cells[i].data for i in blocks)]
    offsets = np.concatenate([[0], np.cumsum(sizes)])
    members = {}
    for name, per_block in _named_sets(raw).items():
        idx = [
            np.asarray(per_block[i], dtype=np.int64) + offsets[k]
            for k, i in enumerate(blocks)
            if per_block[i] is not None
        ]
        idx = np.unique(np.concatenate(idx)) if idx else np.empty(0, np.int64)
        if len(idx):
            members[name] = idx
    if not members:
        return None, (), []
    names = list(members)
    labels = np.full(offsets[-1], -1, dtype=np.int64)
    for k in sorted(range(len(names)), key=lambda k: (-len(members[names[k]]), -k)):
        labels[members[names[k]]] = k
    notes = []
    if sum(len(m) for m in members.values()) > len(np.unique(np.concatenate(list(members.values())))):
        notes.append(f"element sets overlap ({', '.join(names)}); each element is put in the smallest set "
                     "(the first listed of equal ones)")
    kept = np.unique(labels[labels >= 0])
    emptied = [n for k, n in enumerate(names) if k not in set(kept.tolist())]
    if emptied:
        notes.append(f"sets left with no element of their own by smaller ones (not used): {', '.join(emptied)}")
    if (labels < 0).any():
        labels[labels < 0] = len(names)
        names.append("")
        kept = np.append(kept, len(names) - 1)
    remap = np.full(len(names), -1, dtype=np.int64)
    remap[kept] = np.arange(len(kept))
    return remap[labels], tuple(names[k] for k in kept), notes
