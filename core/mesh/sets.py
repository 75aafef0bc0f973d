"""Named cell sets -> per-cell labels: Abaqus element sets, gmsh groups, MED groups.

A set is given per cell block (meshio's layout: one index array or None per block).
Each cell goes to the smallest set holding it (the first listed of equal ones);
cells in no set get the label of the name "" (the caller names them).
"""

from __future__ import annotations

import numpy as np

#: Characters meshio joins cell set names with when it writes them as one cell array (its order).
JOIN_CHARS = ("-", "_", "#", "+", "/")


def named_sets(raw) -> dict:
    """The file's named cell sets with one entry per cell block (gmsh's own sets left out)."""
    return {name: per_block for name, per_block in raw.cell_sets.items()
            if not name.startswith("gmsh:") and len(per_block) == len(raw.cells)}


def family_sets(raw) -> dict:
    """MED groups as named sets: meshio reads a MED file's cell families into the cell array
    ``cell_tags`` and their group names into ``raw.cell_tags`` {family: [group, ...]}.
    Family 0 is "no group"; a family with no name is called "family-<number>"."""
    groups = getattr(raw, "cell_tags", None) or {}
    data = raw.cell_data.get("cell_tags")
    if data is None:
        return {}
    names = {}
    for family, listed in groups.items():
        for name in listed or [f"family-{int(family)}"]:
            names.setdefault(str(name), set()).add(int(family))
    for a in data:
        for family in np.unique(np.asarray(a, dtype=np.int64)).tolist():
            if family != 0 and not any(family in f for f in names.values()):
                names[f"family-{family}"] = {family}
    return {name: [np.flatnonzero(np.isin(np.asarray(a, dtype=np.int64), list(fam))) for a in data]
            for name, fam in names.items()}


def sets_overlap(sets: dict, raw, blocks) -> bool:
    """True when a cell of ``blocks`` is in two of the named ``sets``."""
    for i in blocks:
        count = np.zeros(len(raw.cells[i].data), dtype=np.int64)
        for per_block in sets.values():
            if per_block[i] is not None:
                idx = np.asarray(per_block[i], dtype=np.int64)
                np.add.at(count, idx[(idx >= 0) & (idx < len(count))], 1)
        if (count > 1).any():
            return True
    return False


def joined_set_names(raw, key: str) -> dict:
    """Names of the values of a cell array that meshio made from named cell sets, else {}.

    A format without cell sets (VTU, XDMF, ...) gets them from meshio as one integer array
    named by the set names joined with a character none of them holds; each cell holds its
    set's index, -1 when it is in none. The names are read back only when the values are
    exactly those indices, every set used, for one joining character only (two would make
    the names ambiguous).
    """
    values = set(np.unique(np.concatenate([np.asarray(a).ravel() for a in raw.cell_data[key]])).tolist())
    splits = [key.split(char) for char in JOIN_CHARS]
    fits = [parts for parts in splits if len(parts) > 1 and all(parts) and len(set(parts)) == len(parts)
            and values - {-1} == set(range(len(parts)))]
    return {**dict(enumerate(fits[0])), -1: ""} if len(fits) == 1 else {}


def _members(sets: dict, raw, blocks, offsets, notes):
    """Cell indices (into the concatenated ``blocks``) of each set; indices past a block's
    end (a reader's error) are dropped with a note."""
    members, bad = {}, {}
    for name, per_block in sets.items():
        idx = []
        for k, i in enumerate(blocks):
            if per_block[i] is None:
                continue
            a = np.asarray(per_block[i], dtype=np.int64).ravel()
            ok = (a >= 0) & (a < offsets[k + 1] - offsets[k])
            if not ok.all():
                bad[name] = bad.get(name, 0) + int((~ok).sum())
            idx.append(a[ok] + offsets[k])
        idx = np.unique(np.concatenate(idx)) if idx else np.empty(0, np.int64)
        if len(idx):
            members[name] = idx
    if bad:
        listed = ", ".join(f"{n} {c}" for n, c in bad.items())
        notes.append(f"element sets name elements the file does not hold (ignored): {listed}")
    return members


def set_labels(sets: dict, raw, blocks):
    """Per-cell labels of the cells of ``blocks`` from named ``sets``: smallest set wins.

    Returns
    -------
    labels : (n,) int array into ``names``, or None when no set holds a cell
    names : tuple of str; "" marks the label of cells in no set
    notes : list of str
    """
    sizes = [len(raw.cells[i].data) for i in blocks]
    offsets = np.concatenate([[0], np.cumsum(sizes)])
    notes = []
    members = _members(sets, raw, blocks, offsets, notes)
    if not members:
        return None, (), notes
    names = list(members)
    labels = np.full(offsets[-1], -1, dtype=np.int64)
    for k in sorted(range(len(names)), key=lambda k: (-len(members[names[k]]), -k)):
        labels[members[names[k]]] = k
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
