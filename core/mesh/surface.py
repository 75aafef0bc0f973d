"""Surface groups of a tetrahedral mesh's boundary.

Two ways to put every boundary face into exactly one named group:

* :func:`match_tagged_faces` keeps the names of the triangles a mesh file
  carries, matched to the boundary faces by their vertex node sets;
* :func:`feature_groups` splits an untagged boundary at sharp edges: faces
  whose normals differ by less than a feature angle across a shared edge
  belong to the same group.

Also :func:`interface_faces`, the internal faces between two volume regions.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.sparse import coo_matrix
from scipy.sparse.csgraph import connected_components

#: Name of the group holding the boundary faces no tag covers.
REMAINDER = "untagged"


@dataclass(frozen=True)
class Grouping:
    """Surface groups of the boundary faces.

    Attributes
    ----------
    face_group : (n_faces,) int array, index into ``names``
    names : tuple of str, every one used by at least one face
    notes : tuple of str, what the user should know (tags not used, ...)
    """

    face_group: np.ndarray
    names: tuple
    notes: tuple = ()


def _packed_words(keys: np.ndarray) -> list:
    """The rows of a non-negative integer array packed into as few int64 words as hold them
    (at most 62 bits each), most significant word first: equal rows have equal words, and the
    words sort as the rows do."""
    n, k = keys.shape
    bits = max(int(keys.max()).bit_length(), 1)
    per_word = max(62 // bits, 1)
    words = []
    for first in range(0, k, per_word):
        word = np.zeros(n, dtype=np.int64)
        for j in range(first, min(first + per_word, k)):
            word = (word << bits) | keys[:, j]
        words.append(word)
    return words


def _sorted_runs(keys: np.ndarray):
    """Stable sort order of the rows of an integer array and where runs of equal rows start.

    Rows of non-negative integers are packed into one int64 per 62 bits (a
    million rows of four node numbers below 2^31 make two words), then sorted by
    those words (``lexsort`` of as many keys as words, not as columns); other
    rows are sorted column by column. Both are several times faster than
    ``np.unique(axis=0)``, which compares rows as raw bytes.

    Returns
    -------
    order : (n,) row indices in sorted order, equal rows in their original order
    starts : (n_unique,) positions in ``order`` where a new distinct row begins
    """
    keys = np.asarray(keys, dtype=np.int64)
    n, k = keys.shape
    if n == 0:
        return np.empty(0, dtype=np.int64), np.empty(0, dtype=np.int64)
    words = _packed_words(keys) if keys.min() >= 0 and int(keys.max()).bit_length() <= 62 else list(keys.T)
    if len(words) == 1:
        order = np.argsort(words[0], kind="stable")
        new = np.diff(words[0][order]) != 0
    else:
        order = np.lexsort(words[::-1])
        new = np.zeros(n - 1, dtype=bool)
        for word in words:
            new |= np.diff(word[order]) != 0
    return order, np.flatnonzero(np.concatenate([[True], new]))


def unique_rows(keys: np.ndarray):
    """First index, inverse and count of the distinct rows of an integer array.

    Returns
    -------
    first : (n_unique,) index of each distinct row's first occurrence
    inverse : (n,) index of each row's distinct value
    counts : (n_unique,) occurrences of each distinct row
    """
    order, starts = _sorted_runs(keys)
    counts = np.diff(np.append(starts, len(order)))
    inverse = np.empty(len(order), dtype=np.int64)
    inverse[order] = np.repeat(np.arange(len(starts)), counts)
    return order[starts], inverse, counts


def pair_rows(keys: np.ndarray):
    """Indices of equal rows of ``keys`` taken two at a time.

    Returns
    -------
    inverse : (n,) index of each row's unique value
    count : (n,) how many rows share each row's value
    pairs : (m, 2) indices of the rows whose value occurs exactly twice, in the
        order of their value, each pair in row order
    """
    order, starts = _sorted_runs(keys)
    counts = np.diff(np.append(starts, len(order)))
    inverse = np.empty(len(order), dtype=np.int64)
    inverse[order] = np.repeat(np.arange(len(starts)), counts)
    two = starts[counts == 2]
    return inverse, counts[inverse], np.stack([order[two], order[two + 1]], axis=1)


def interface_faces(local_faces: np.ndarray, pairs: np.ndarray, cell_region: np.ndarray) -> np.ndarray:
    """Internal faces whose two cells lie in different regions.

    Parameters
    ----------
    local_faces : (4 * n_cells, nb) int, every local face, cell-major
        (:func:`heatsoak.core.mesh.topology.all_faces`).
    pairs : (m, 2) int, rows of ``local_faces`` that are the same face
        (:func:`pair_rows` of their sorted vertex sets).
    cell_region : (n_cells,) int

    Returns
    -------
    (n_interfaces, nb) int array, each oriented out of its first cell.
    """
    region = cell_region[pairs // 4]
    return local_faces[pairs[region[:, 0] != region[:, 1], 0]]


def face_normals(points: np.ndarray, faces: np.ndarray):
    """Unit normals and areas of the straight triangles on the face vertices.

    Returns
    -------
    normals : (n_faces, 3), right-hand rule of the node order
    areas : (n_faces,) [unit**2]
    """
    p = points[faces[:, :3]]
    n = np.cross(p[:, 1] - p[:, 0], p[:, 2] - p[:, 0])
    twice_area = np.linalg.norm(n, axis=1)
    return n / np.where(twice_area > 0, twice_area, 1.0)[:, None], 0.5 * twice_area


def _stable_order(points, faces, labels, n_labels):
    """Order of the labels by descending area, then centroid (x, y, z).

    Areas and centroids are rounded so that floating-point noise cannot
    swap two groups from one run to the next.
    """
    _, area = face_normals(points, faces)
    total = np.bincount(labels, weights=area, minlength=n_labels)
    centroid = points[faces[:, :3]].mean(axis=1) * area[:, None]
    c = np.stack([np.bincount(labels, weights=centroid[:, a], minlength=n_labels) for a in range(3)], axis=1)
    c /= np.where(total > 0, total, 1.0)[:, None]
    scale = max(np.ptp(points, axis=0).max(), np.finfo(float).tiny)
    area_r = np.round(total / max(total.sum(), np.finfo(float).tiny), 9)
    c_r = np.round(c / scale, 9)
    return np.lexsort((c_r[:, 2], c_r[:, 1], c_r[:, 0], -area_r))


def feature_groups(points: np.ndarray, faces: np.ndarray, feature_angle: float = 30.0) -> Grouping:
    """Split boundary faces into groups at edges sharper than ``feature_angle``.

    Two faces sharing an edge (and no third face sharing it) are joined when
    their normals differ by less than ``feature_angle``; the groups are the
    connected components, named "surface-1", "surface-2", ... by descending
    area, ties broken by centroid, so names are the same on every run.

    Parameters
    ----------
    points : (n_nodes, 3)
    faces : (n_faces, 3 or 6) int, outward oriented
    feature_angle : float, degrees in (0, 180]
    """
    if not 0.0 < feature_angle <= 180.0:
        raise ValueError(f"feature angle must be in (0, 180] degrees, got {feature_angle!r}")
    n_faces = len(faces)
    normals, _ = face_normals(points, faces)
    edges = np.sort(faces[:, [[0, 1], [1, 2], [2, 0]]].reshape(-1, 2), axis=1)
    _, _, pairs = pair_rows(edges)
    fa, fb = pairs[:, 0] // 3, pairs[:, 1] // 3
    smooth = np.einsum("ij,ij->i", normals[fa], normals[fb]) > np.cos(np.radians(feature_angle))
    graph = coo_matrix((np.ones(smooth.sum()), (fa[smooth], fb[smooth])), shape=(n_faces, n_faces))
    n_comp, labels = connected_components(graph, directed=False)
    order = _stable_order(points, faces, labels, n_comp)
    rank = np.empty(n_comp, dtype=np.int64)
    rank[order] = np.arange(n_comp)
    return Grouping(rank[labels], tuple(f"surface-{i + 1}" for i in range(n_comp)))


def match_tagged_faces(
    face_keys: np.ndarray, tagged: dict, interior_keys: np.ndarray | None = None
) -> Grouping:
    """Groups of the boundary faces from named triangles, matched by vertex set.

    Parameters
    ----------
    face_keys : (n_faces, 3) int, sorted vertex indices of the boundary faces
    tagged : dict name -> (k, >=3) int array of triangles (vertex nodes first);
        a triangle in several groups goes to the smallest (fewest triangles; the
        first listed of equal ones), and ``notes`` says the groups overlap.
    interior_keys : (m, 3) int, sorted vertex sets of internal faces, only to
        tell the user which unmatched triangles lie inside the body.

    Returns
    -------
    Grouping
        Faces no triangle covers go to :data:`REMAINDER`; groups with no
        boundary face are dropped and mentioned in ``notes``.
    """
    names = list(tagged)
    tri = [np.sort(np.asarray(tagged[n])[:, :3].astype(np.int64), axis=1).reshape(-1, 3) for n in names]
    tri_label = np.repeat(np.arange(len(names)), [len(t) for t in tri])
    all_keys = np.vstack([face_keys, *tri, np.empty((0, 3), np.int64)])
    _, inverse, _ = unique_rows(all_keys)
    n_faces = len(face_keys)
    n_keys = inverse.max() + 1 if len(inverse) else 0
    order = np.lexsort((np.arange(len(names)), [len(t) for t in tri]))  # smallest group first
    priority = np.empty(len(names), dtype=np.int64)
    priority[order] = np.arange(len(names))
    best = np.full(n_keys, len(names), dtype=np.int64)
    np.minimum.at(best, inverse[n_faces:], priority[tri_label])
    label_of_key = np.append(order, -1)[best]
    face_group = label_of_key[inverse[:n_faces]]
    on_boundary = np.zeros(label_of_key.shape, dtype=bool)
    on_boundary[inverse[:n_faces]] = True
    off = ~on_boundary[inverse[n_faces:]]
    notes = list(_unmatched_notes(tri, tri_label, off, names, interior_keys))
    shared = label_of_key[inverse[n_faces:]] != tri_label
    if shared.any():
        listed = ", ".join(names[i] for i in np.unique(np.append(tri_label[shared], label_of_key[inverse[n_faces:]][shared])))
        notes.append(f"surface groups overlap ({listed}); each shared face is put in the smallest group "
                     "(the first listed of equal ones)")

    used = np.unique(face_group[face_group >= 0])
    dropped = [names[i] for i in range(len(names)) if i not in set(used.tolist())]
    if dropped:
        notes.append(f"surface groups with no boundary face (not used): {', '.join(dropped)}")
    new_index = np.full(len(names) + 1, -1, dtype=np.int64)
    new_index[used] = np.arange(len(used))
    out_names = [names[i] for i in used]
    if (face_group < 0).any():
        new_index[-1] = len(out_names)
        out_names.append(REMAINDER)
    return Grouping(new_index[face_group], tuple(out_names), tuple(notes))


def _unmatched_notes(tri, tri_label, off, names, interior_keys):
    """Messages about tagged triangles that are not boundary faces."""
    if not off.any():
        return
    keys = np.vstack([*tri, np.empty((0, 3), np.int64)])[off]
    inside = np.zeros(len(keys), dtype=bool)
    if interior_keys is not None and len(interior_keys):
        both = np.vstack([keys, interior_keys])
        _, inv, cnt = unique_rows(both)
        inside = cnt[inv[: len(keys)]] > 1
    label = tri_label[off]
    for what, mask in (("lie inside the body", inside), ("are not faces of any tetrahedron", ~inside)):
        counts = np.bincount(label[mask], minlength=len(names))
        listed = ", ".join(f"{names[i]} {c}" for i, c in enumerate(counts) if c)
        if listed:
            yield f"tagged triangles that {what} were not used as boundary faces: {listed}"


def split_remainder(points: np.ndarray, faces: np.ndarray, grouping: Grouping, feature_angle: float) -> Grouping:
    """Split the :data:`REMAINDER` group of a partly tagged boundary at sharp edges, as an
    untagged boundary is (:func:`feature_groups`): "untagged-1", "untagged-2", ... by
    descending area; one piece keeps the name "untagged".

    Parameters
    ----------
    points : (n_nodes, 3)
    faces : (n_faces, 3 or 6) int, the boundary faces ``grouping`` labels
    grouping : Grouping of those faces
    feature_angle : float, degrees
    """
    if REMAINDER not in grouping.names:
        return grouping
    rest = grouping.names.index(REMAINDER)
    mine = np.flatnonzero(grouping.face_group == rest)
    pieces = feature_groups(points, faces[mine], feature_angle)
    if len(pieces.names) == 1:
        return grouping
    kept = [n for n in grouping.names if n != REMAINDER]
    names = (*kept, *(f"{REMAINDER}-{i + 1}" for i in range(len(pieces.names))))
    label = grouping.face_group - (grouping.face_group > rest)
    label[mine] = len(kept) + pieces.face_group
    return Grouping(label, names, grouping.notes)
