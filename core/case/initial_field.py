"""Read a nodal temperature field from a file, to start a run from it.

Accepted: any file meshio reads with a point array (named ``temperature``,
or the only point array), and heatsoak's own ``temperature.xdmf`` results,
of which the last written step is used. Nodes are matched by position, so
the field may come from a file whose node numbering differs.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
from heatsoak.core.errors import InputError
from heatsoak.core.mesh.mesh import Mesh
from heatsoak.core.mesh.read import read_raw
from scipy.spatial import cKDTree

#: Largest node mismatch accepted, relative to the mesh's bounding-box diagonal.
MATCH_TOL = 1e-6


def _read_points_and_values(path: Path, name: str):
    import meshio

    if path.suffix.lower() in (".xdmf", ".xmf"):
        try:
            with meshio.xdmf.TimeSeriesReader(str(path)) as reader:
                points, _ = reader.read_points_cells()
                if reader.num_steps > 0:
                    _, point_data, _ = reader.read_data(reader.num_steps - 1)
                    return points, point_data
        except Exception:  # noqa: BLE001, S110 - not a time series: fall through to a plain read
            pass
    raw, _ = read_raw(path)
    return raw.points, raw.point_data


def read_nodal_field(path, mesh: Mesh, unit_scale: float = 1.0, name: str = "temperature") -> np.ndarray:
    """Nodal values (n_nodes,) of point array ``name`` in file ``path``, matched to ``mesh`` by position.

    Parameters
    ----------
    path : str or Path
    mesh : Mesh
        The mesh to map onto (points in metres).
    unit_scale : float
        Metres per length unit of the file, tried after metres.
    name : str
        Point array to read; if absent and the file has one point array, that one.
    """
    path = Path(path)
    if not path.is_file():
        raise InputError(f"initial field file {path} does not exist")
    try:
        points, data = _read_points_and_values(path, name)
    except InputError as exc:
        raise InputError(f"initial field file: {exc}") from None
    if name not in data and len(data) == 1:
        name = next(iter(data))
    if name not in data:
        raise InputError(f"initial field file {path} has no point array {name!r}; it has {sorted(data)}")
    values = np.asarray(data[name], dtype=float).reshape(len(points), -1)
    if values.shape[1] != 1:
        raise InputError(f"initial field file {path}: point array {name!r} has {values.shape[1]} components "
                         "per node; a temperature has one")
    values = values[:, 0]
    if not np.isfinite(values).all():
        raise InputError(f"initial field file {path}: array {name!r} holds NaN or infinite values")
    diag = float(np.linalg.norm(mesh.points.max(axis=0) - mesh.points.min(axis=0)))
    for scale in dict.fromkeys((1.0, float(unit_scale))):
        dist, idx = cKDTree(np.asarray(points, float)[:, :3] * scale).query(mesh.points)
        if dist.max() <= MATCH_TOL * diag:
            return values[idx]
    raise InputError(
        f"initial field file {path}: its nodes do not match the mesh (largest distance {dist.max():.3g} m "
        f"after scaling); the field must come from the same mesh"
    )
