"""Turn a :class:`~heatsoak.core.problem.problem.Problem` into matrices, load terms
and the split into free and prescribed-temperature nodes.

The semi-discrete system is M dT/dt + (K + H) T = F(t), with

* M the heat capacity matrix (consistent, or lumped to a diagonal),
* K conduction and H convection (constant h per surface group),
* F(t) = sum_k s_k(t) v_k: heat flux, convection to ambient, sources, each a
  schedule s_k times a fixed vector v_k.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import scipy.sparse as sp
from heatsoak.core.errors import InputError
from heatsoak.core.fem.assembly import Assembler
from heatsoak.core.problem.problem import BOUNDARY_KINDS, MASS_KINDS, Problem


def as_schedule(value):
    """A schedule from a number or anything with ``__call__`` and ``breakpoints``."""
    if value is None:
        return None
    if hasattr(value, "breakpoints"):
        return value
    from heatsoak.core.problem.schedule import Constant

    return Constant(float(value))


def problem_schedules(problem: Problem) -> list:
    """Every schedule that drives ``problem``: prescribed temperatures, heat fluxes, ambient
    temperatures of convection and sources, as :func:`build_operators` applies them."""
    loads, fixed = input_schedules(problem)
    return [s for _, s in fixed + loads]


@dataclass
class Operators:
    """Assembled operators of one problem.

    Attributes
    ----------
    stiffness : csr (n, n)
        K + H [W/K].
    convection : csr (n, n)
        H alone [W/K] (for the energy balance).
    mass : csr (n, n) or (n,) array
        Consistent matrix, or the lumped diagonal [J/K].
    loads : list of (schedule, (n,) array, str)
        F(t) = sum of schedule(t) * vector; the str is "boundary" or "source".
    fixed : (n_fixed,) int
        Nodes with a prescribed temperature (sorted).
    fixed_schedules : list of schedules
        One per distinct prescribed-temperature group.
    fixed_which : (n_fixed,) int
        Index into ``fixed_schedules`` for each fixed node.
    free : (n_free,) int
        All other nodes (sorted).
    initial : (n,) array
        Initial temperature [degC] before prescribed values are applied.
    warnings : list of str
    """

    stiffness: sp.csr_matrix
    convection: sp.csr_matrix
    mass: object
    loads: list
    fixed: np.ndarray
    fixed_schedules: list
    fixed_which: np.ndarray
    free: np.ndarray
    initial: np.ndarray
    warnings: list = field(default_factory=list)

    @property
    def lumped(self) -> bool:
        return not sp.issparse(self.mass)

    def load(self, t: float, kind: str | None = None, start: float | None = None) -> np.ndarray:
        """F(t), (n,) [W]; only loads of ``kind`` when given.

        With ``start``, the limit from the left at ``t`` of a step from
        ``start`` (see :func:`left_value`); without, the value at ``t``.
        """
        f = np.zeros(self.stiffness.shape[0])
        for sched, vec, k in self.loads:
            if kind is None or k == kind:
                f += (float(sched(t)) if start is None else left_value(sched, start, t)) * vec
        return f

    def fixed_values(self, t: float, start: float | None = None) -> np.ndarray:
        """Prescribed temperatures at time t, (n_fixed,) [degC]; ``start`` as in :meth:`load`."""
        vals = np.array([float(s(t)) if start is None else left_value(s, start, t) for s in self.fixed_schedules])
        return vals[self.fixed_which] if vals.size else np.zeros(0)

    def mass_apply(self, x: np.ndarray) -> np.ndarray:
        """M @ x for either mass kind."""
        return self.mass * x if self.lumped else self.mass @ x

    def breakpoints(self) -> np.ndarray:
        """Sorted times [s] where any schedule has a corner or a jump."""
        scheds = [s for s, _, _ in self.loads] + list(self.fixed_schedules)
        pts = [np.asarray(s.breakpoints(), dtype=float) for s in scheds]
        return np.unique(np.concatenate(pts)) if pts else np.zeros(0)

    def jumps(self) -> np.ndarray:
        """Sorted times t > 0 [s] where any schedule's value jumps (not just its slope); found once."""
        if "_jumps" not in self.__dict__:  # a table of a million rows takes a tenth of a second
            scheds = [s for s, _, _ in self.loads] + list(self.fixed_schedules)
            self._jumps = np.unique(np.concatenate([jump_times(s) for s in scheds])) if scheds else np.zeros(0)
        return self._jumps.copy()


def jump_times(schedule) -> np.ndarray:
    """Times t > 0 [s] where ``schedule``'s value jumps, vectorised over its breakpoints.

    Between breakpoints a schedule is linear, so its left limit at breakpoint
    b after the previous one a is 2 s((a + b)/2) - s(a) (as in :func:`left_value`).
    """
    bp = np.unique(np.asarray(schedule.breakpoints(), dtype=float))
    if not np.any(bp > 0):
        return np.zeros(0)
    # rounding in interpolation and extrapolation is relative to the schedule's largest value
    scale = max(float(np.abs(schedule(bp)).max()), 1e-300)
    prev = np.maximum(np.concatenate([[0.0], bp[:-1]]), 0.0)[bp > 0]
    bp = bp[bp > 0]
    after, mid, first = (np.asarray(schedule(x), dtype=float) for x in (bp, 0.5 * (prev + bp), prev))
    return bp[np.abs(after - (2.0 * mid - first)) > 1e-12 * scale]


def left_value(schedule, start: float, t: float) -> float:
    """Value of ``schedule`` as time rises to ``t`` within a step from ``start``.

    Schedules are right-continuous, so at a jump time ``t`` the value is the
    new one while a step ending at ``t`` must still see the old one. Steps
    land on every breakpoint, so a schedule is linear within a step and its
    left limit at a breakpoint is the extrapolation 2 s((start + t)/2) - s(start),
    exact for constants, ramps and tables; elsewhere it is s(t). The breakpoints
    are sorted, so finding ``t`` among them is a binary search (a table of a
    million rows costs no more per step than a ramp).
    """
    bp = np.asarray(schedule.breakpoints(), dtype=float)
    tol = 1e-12 * max(1.0, abs(t))
    i = int(np.searchsorted(bp, t - tol))
    if i >= bp.size or bp[i] > t + tol:
        return float(schedule(t))
    return 2.0 * float(schedule(0.5 * (start + t))) - float(schedule(start))


def cell_coefficients(problem: Problem):
    """Per-cell rho*c (n_cells,) [J/(m3 K)] and conductivity (n_cells,) or (n_cells, 3, 3) [W/(m K)]."""
    mesh = problem.mesh
    missing = [r for r in mesh.region_names if r not in problem.materials]
    if missing:
        raise InputError(f"no material for region(s) {missing}; regions are {list(mesh.region_names)}")
    mats = [problem.materials[r] for r in mesh.region_names]
    rhoc = np.array([m.heat_capacity for m in mats])[mesh.cell_region]
    kap = [np.asarray(m.conductivity, dtype=float) for m in mats]
    if all(k.ndim == 0 for k in kap):
        return rhoc, np.array([float(k) for k in kap])[mesh.cell_region]
    tensors = np.array([k * np.eye(3) if k.ndim == 0 else k for k in kap])
    return rhoc, tensors[mesh.cell_region]


def initial_field(problem: Problem) -> np.ndarray:
    """Nodal initial temperature (n,) [degC]; per-region values are averaged at shared nodes."""
    mesh, init = problem.mesh, problem.initial
    if isinstance(init, dict):
        vals = np.array([float(init.get(r, np.nan)) for r in mesh.region_names])
        if np.isnan(vals).any():
            missing = [r for r, v in zip(mesh.region_names, vals) if np.isnan(v)]
            raise InputError(f"initial temperature missing for region(s) {missing}")
        per_cell = np.repeat(vals[mesh.cell_region], mesh.cells.shape[1])
        s = np.bincount(mesh.cells.ravel(), weights=per_cell, minlength=mesh.n_nodes)
        return s / np.bincount(mesh.cells.ravel(), minlength=mesh.n_nodes)
    arr = np.asarray(init, dtype=float)
    if arr.ndim == 0:
        return np.full(mesh.n_nodes, float(arr))
    if arr.shape != (mesh.n_nodes,):
        raise InputError(f"initial temperature field has shape {arr.shape}, expected ({mesh.n_nodes},)")
    return arr.copy()


def input_schedules(problem: Problem):
    """The schedules of a problem in the order :func:`build_operators` gives them.

    Returns
    -------
    loads : list of (name, schedule)
        One per load vector of :attr:`Operators.loads`, named by its case key
        (``boundary.GROUP.value``, ``boundary.GROUP.ambient``, ``material.REGION.source``).
    fixed : list of (name, schedule)
        One per prescribed-temperature group (``boundary.GROUP.value``), in the
        order of :attr:`Operators.fixed_schedules`.
    """
    loads, fixed = [], []
    for name, bc in problem.boundaries.items():
        if bc.kind == "temperature":
            fixed.append((f"boundary.{name}.value", as_schedule(bc.value)))
        elif bc.kind == "heat_flux":
            loads.append((f"boundary.{name}.value", as_schedule(bc.value)))
        elif bc.kind == "convection":
            loads.append((f"boundary.{name}.ambient", as_schedule(bc.ambient)))
    for name in problem.mesh.region_names:
        mat = problem.materials.get(name)
        if mat is not None and mat.source is not None:
            loads.append((f"material.{name}.source", as_schedule(mat.source)))
    return loads, fixed


def build_operators(problem: Problem, mass: str = "consistent", assembler: Assembler | None = None) -> Operators:
    """Assemble everything the time stepper needs.

    Parameters
    ----------
    problem : Problem
    mass : "consistent" or "lumped"
    assembler : Assembler, optional
        Reuse a cached pattern and geometry for this mesh.
    """
    if mass not in MASS_KINDS:
        raise InputError(f"mass must be one of {list(MASS_KINDS)}, got {mass!r}")
    mesh = problem.mesh
    asm = assembler or Assembler(mesh)
    rhoc, kappa = cell_coefficients(problem)
    warnings = []
    h_face = np.zeros(mesh.n_faces)
    loads, fixed_sets, fixed_scheds = [], [], []
    for name, bc in problem.boundaries.items():
        g = mesh.group_index(name) if name in mesh.group_names else None
        if g is None:
            raise InputError(f"boundary {name!r}: no such surface group; groups are {list(mesh.group_names)}")
        if bc.kind not in BOUNDARY_KINDS:
            raise InputError(f"boundary {name!r}: kind {bc.kind!r} is not one of {list(BOUNDARY_KINDS)}")
        on = mesh.face_group == g
        if bc.kind == "temperature":
            fixed_sets.append(np.unique(mesh.faces[on]))
            fixed_scheds.append(as_schedule(bc.value))
        elif bc.kind == "heat_flux":
            loads.append((as_schedule(bc.value), asm.boundary_load(on * 1.0), "boundary"))
        elif bc.kind == "convection":
            h_face[on] = float(bc.h)
            loads.append((as_schedule(bc.ambient), asm.boundary_load(on * float(bc.h)), "boundary"))
    for r, name in enumerate(mesh.region_names):
        src = problem.materials[name].source
        if src is not None:
            loads.append((as_schedule(src), asm.source_load((mesh.cell_region == r) * 1.0), "source"))

    H = asm.boundary_mass(h_face)
    K = asm.stiffness(kappa)
    K = asm.pattern.matrix(K.data + H.data)
    M = asm.lumped_mass(rhoc) if mass == "lumped" else asm.mass(rhoc)

    which = np.full(mesh.n_nodes, -1)
    for i, nodes in enumerate(fixed_sets):
        clash = nodes[which[nodes] >= 0]
        if clash.size:
            names = [n for n, b in problem.boundaries.items() if b.kind == "temperature"]
            warnings.append(
                f"{clash.size} node(s) shared by temperature groups {names[int(which[clash[0]])]!r} and "
                f"{names[i]!r} take the value of {names[int(which[clash[0]])]!r}"
            )
        which[nodes[which[nodes] < 0]] = i
    fixed = np.flatnonzero(which >= 0)
    free = np.flatnonzero(which < 0)
    return Operators(
        stiffness=K,
        convection=H,
        mass=M,
        loads=loads,
        fixed=fixed,
        fixed_schedules=fixed_scheds,
        fixed_which=which[fixed],
        free=free,
        initial=initial_field(problem),
        warnings=warnings,
    )
