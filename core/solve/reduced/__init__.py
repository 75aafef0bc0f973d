"""Reduced model of a case: answers any new schedule (temperature groups, heat flux,
ambient temperature, sources, initial temperature) at a cost independent of the mesh.

For a fixed mesh, materials, convection coefficients, mass choice and time
settings the temperature is linear in every schedule. The model projects the
free-node system M w' + K w = F(t) - (coupling to prescribed nodes) on a small
M-orthonormal basis: the static lifting of each temperature group (its steady
response to a unit value), the initial-field directions, and a rational Krylov
basis (K + s M)^-1 B at real shifts s spanning 1/end .. 1/step, added shift by
shift until the answer to the case's own schedules stops changing
(:mod:`.basis`). The small system is diagonalised once (modal form).

Public API (used by ``heatsoak whatif`` and the sweeps):

* :func:`build_reduced(problem, time, tol=...)` -> :class:`ReducedModel`
* :func:`stale_reasons(model, problem, time)` -> list of str (empty when the model fits)
* :func:`output_rows(model, problem, rows)` -> :class:`Outputs` (small output matrices)
* :func:`answer(model, problem, time, outputs, exact_time=False)` -> :class:`Answer`
* :func:`reconstruct(model, answer, steps, nodes=None)` -> nodal temperatures
* :func:`half_step_coordinates(model, problem, time)` -> the step-doubling companion (time error)
* :func:`save_model(model, path)`, :func:`load_model(path)`

May import: errors, mesh, problem, fem, solve.
"""

from heatsoak.core.solve.reduced.answer import Answer, Outputs, answer, half_step_coordinates, output_rows, reconstruct
from heatsoak.core.solve.reduced.fingerprint import fingerprint, stale_reasons
from heatsoak.core.solve.reduced.model import ReducedModel, build_reduced, load_model, save_model

__all__ = ["Answer", "Outputs", "ReducedModel", "answer", "build_reduced", "fingerprint", "half_step_coordinates",
           "load_model",
           "output_rows", "reconstruct", "save_model", "stale_reasons"]
