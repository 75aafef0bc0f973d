"""What a run records: region statistics, probe histories, extremes, threshold crossings."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
from heatsoak.core.fem.assembly import Assembler
from heatsoak.core.mesh.mesh import Mesh

#: Cells per block when integrating shape functions (bounds memory on P2 meshes).
_BLOCK = 50_000


def node_integrals(mesh: Mesh) -> sp.csr_matrix:
    """Integrals of the shape functions over each region, (n_regions, n_nodes) [m^3].

    Row r is the row sum of the consistent mass matrix with unit capacity
    restricted to the cells of region r, so ``W @ T`` is the exact integral
    of the finite element field ``T`` over each region.
    """
    asm = Assembler(mesh)
    nb = mesh.cells.shape[1]
    w = np.empty((mesh.n_cells, nb))
    for s in range(0, mesh.n_cells, _BLOCK):
        e = min(mesh.n_cells, s + _BLOCK)
        w[s:e] = asm.element_mass(1.0, s, e).sum(axis=2)
    rows = np.repeat(mesh.cell_region, nb)
    shape = (len(mesh.region_names), mesh.n_nodes)
    return sp.coo_matrix((w.ravel(), (rows, mesh.cells.ravel())), shape=shape).tocsr()


class RegionStats:
    """Volume-weighted mean, minimum and maximum temperature of each region.

    Parameters
    ----------
    mesh : Mesh

    Attributes
    ----------
    names : tuple of str
    volumes : (n_regions,) region volumes [m^3]
    """

    def __init__(self, mesh: Mesh):
        self.names = tuple(mesh.region_names)
        self._w = node_integrals(mesh)
        self.volumes = np.asarray(self._w.sum(axis=1)).ravel()
        self._nodes = [np.unique(mesh.cells[mesh.cell_region == r]) for r in range(len(self.names))]

    def stats(self, T: np.ndarray) -> np.ndarray:
        """(n_regions, 3) array of [mean, min, max] [degC] of nodal temperatures ``T`` (n_nodes,).

        The mean is the integral of the field over the region divided by its
        volume; min and max are over the region's nodes.
        """
        T = np.asarray(T, dtype=float)
        out = np.empty((len(self.names), 3))
        out[:, 0] = (self._w @ T) / self.volumes
        for r, nodes in enumerate(self._nodes):
            out[r, 1], out[r, 2] = T[nodes].min(), T[nodes].max()
        return out


def first_crossing(times, values, threshold: float) -> float | None:
    """First time a sampled history reaches ``threshold``, or None.

    The history starts on one side of the threshold; the crossing is the
    first step that ends on the threshold or beyond it, and its time is
    found by linear interpolation within that step. It works for heating
    (crossing upwards) and cooling (downwards). A history that starts
    exactly at the threshold has reached it at ``times[0]``.

    Parameters
    ----------
    times : (n,) array [s]
    values : (n,) array [degC]
    threshold : float [degC]
    """
    t = np.asarray(times, dtype=float)
    v = np.asarray(values, dtype=float) - float(threshold)
    if v.size == 0:
        return None
    if v[0] == 0:
        return float(t[0])
    reached = np.flatnonzero(v * np.sign(v[0]) <= 0)
    if reached.size == 0:
        return None
    i = reached[0]
    return float(t[i - 1] + (t[i] - t[i - 1]) * v[i - 1] / (v[i - 1] - v[i]))


@dataclass
class Extreme:
    """Where and when the field took its lowest or highest nodal value.

    Attributes
    ----------
    value : float [degC]
    node : int
    where : (3,) array [m]
    when : float [s]
    """

    value: float
    node: int
    where: np.ndarray
    when: float

    def to_dict(self) -> dict:
        return {"value": self.value, "node": self.node, "where": [float(x) for x in self.where], "when": self.when}


class Recorder:
    """Consumes the (t, T) stream of a run and keeps what is reported.

    Parameters
    ----------
    mesh : Mesh
    probes : ProbeSet, optional
    thresholds : sequence of (float or None), optional
        One per probe; the first crossing time of each is reported.
    """

    def __init__(self, mesh: Mesh, probes=None, thresholds=None):
        self.mesh = mesh
        self.probes = probes
        self.regions = RegionStats(mesh)
        n = 0 if probes is None else len(probes)
        self.thresholds = list(thresholds) if thresholds is not None else [None] * n
        self._t, self._p, self._r = [], [], []
        self.minimum: Extreme | None = None
        self.maximum: Extreme | None = None

    def record(self, t: float, T: np.ndarray):
        """Record one step; returns (probe values (k,), region stats (n_regions, 3))."""
        pv = self.probes.values(T) if self.probes is not None else np.empty(0)
        rs = self.regions.stats(T)
        self._t.append(float(t))
        self._p.append(pv)
        self._r.append(rs)
        lo, hi = int(np.argmin(T)), int(np.argmax(T))
        if self.minimum is None or T[lo] < self.minimum.value:
            self.minimum = Extreme(float(T[lo]), lo, self.mesh.points[lo].copy(), float(t))
        if self.maximum is None or T[hi] > self.maximum.value:
            self.maximum = Extreme(float(T[hi]), hi, self.mesh.points[hi].copy(), float(t))
        return pv, rs

    @property
    def times(self) -> np.ndarray:
        """(n_steps,) recorded times [s]."""
        return np.asarray(self._t)

    @property
    def probe_history(self) -> np.ndarray:
        """(n_steps, k) probe temperatures [degC]."""
        k = 0 if self.probes is None else len(self.probes)
        return np.asarray(self._p).reshape(len(self._t), k)

    @property
    def region_history(self) -> np.ndarray:
        """(n_steps, n_regions, 3) region [mean, min, max] [degC]."""
        return np.asarray(self._r).reshape(len(self._t), len(self.regions.names), 3)

    def crossings(self) -> dict:
        """Probe name -> first time [s] its threshold is reached, None if never or no threshold."""
        if self.probes is None:
            return {}
        hist = self.probe_history
        return {name: (None if thr is None else first_crossing(self.times, hist[:, i], thr))
                for i, (name, thr) in enumerate(zip(self.probes.names, self.thresholds))}


def _schedule_range(schedule, end: float):
    """(min, max) of a piecewise-linear schedule over [0, end]."""
    bp = np.asarray(schedule.breakpoints(), dtype=float)
    t = np.concatenate([[0.0, end], bp[(bp > 0) & (bp < end)]])
    v = np.asarray(schedule(t), dtype=float)
    return v.min(), v.max()


def data_bounds(problem, end: float):
    """Bounds [degC] the exact temperature cannot leave, or None.

    Without heat flux or sources, the temperature of a body stays between the
    lowest and highest of its initial, prescribed and ambient temperatures
    (maximum principle of the heat equation; common practice, no source).
    A discrete solution outside these bounds shows a mesh or step that does
    not keep the principle (strongly anisotropic conductivity, obtuse
    elements, consistent mass with very small steps).

    Returns
    -------
    (lo, hi) or None when a heat flux or a source makes the bounds open.
    """
    from heatsoak.core.fem.operators import as_schedule, initial_field

    if any(m.source is not None for m in problem.materials.values()):
        return None
    init = initial_field(problem)
    lo, hi = float(init.min()), float(init.max())
    for bc in problem.boundaries.values():
        if bc.kind == "heat_flux":
            return None
        sched = bc.value if bc.kind == "temperature" else bc.ambient if bc.kind == "convection" else None
        if sched is not None:
            a, b = _schedule_range(as_schedule(sched), end)
            lo, hi = min(lo, a), max(hi, b)
    return lo, hi


def bound_warnings(problem, end: float, t_min: float, t_max: float) -> list:
    """Warnings when the computed range [t_min, t_max] leaves :func:`data_bounds`."""
    bounds = data_bounds(problem, end)
    if bounds is None:
        return []
    lo, hi = bounds
    tol = 1e-6 * max(hi - lo, 1.0)
    advice = ("the mesh or step does not keep the maximum principle here (strong anisotropy, flat or obtuse "
              "elements, or consistent mass with small steps): refine the mesh there or use lumped mass")
    out = []
    if t_max > hi + tol:
        out.append(f"computed temperature reaches {t_max:.4g} degC, above the highest initial, prescribed "
                   f"or ambient temperature {hi:.4g} degC: {advice}")
    if t_min < lo - tol:
        out.append(f"computed temperature falls to {t_min:.4g} degC, below the lowest initial, prescribed "
                   f"or ambient temperature {lo:.4g} degC: {advice}")
    return out
