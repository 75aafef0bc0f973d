"""Coordinates a mesh may have: finite and of a size arithmetic on them survives.

Volumes take cubes of coordinate differences and distances their squares; a
coordinate of 1e160 m overflows both, and a single stray node that far makes
every other element look flat. No part is larger than :data:`MAX_COORDINATE_M`
(a million kilometres), so a mesh beyond it is refused, naming the node.
"""

from __future__ import annotations

import numpy as np
from heatsoak.core.errors import MeshError

#: Largest coordinate magnitude [m] accepted (common practice, no source: far above any part,
#: far below where cubes of coordinates overflow, about 5e102).
MAX_COORDINATE_M = 1e9


def check_coordinates(points: np.ndarray, where: str) -> None:
    """MeshError naming the first node whose coordinates are not finite or exceed
    :data:`MAX_COORDINATE_M` in magnitude. ``points`` (n, 3) [m]."""
    pts = np.asarray(points, dtype=float)
    bad = ~np.isfinite(pts).all(axis=1)
    if bad.any():
        raise MeshError(f"{bad.sum()} nodes of {where} have NaN or infinite coordinates (first: node {np.argmax(bad)})")
    big = np.abs(pts).max(axis=1) > MAX_COORDINATE_M
    if big.any():
        i = int(np.argmax(big))
        raise MeshError(f"{big.sum()} nodes of {where} lie farther than {MAX_COORDINATE_M:g} m from the origin "
                        f"(first: node {i} at ({', '.join(f'{x:.4g}' for x in pts[i])}) m); no part is that large: "
                        "is the file's length unit right, or are these nodes broken?")
