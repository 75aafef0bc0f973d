"""Finite-element matrices: the sparsity pattern of a mesh, vectorised assembly of
conductivity, heat capacity, convection and loads, and the operators of a problem
(free / prescribed node split, load terms as functions of time).

May import: :mod:`heatsoak.core.errors`, :mod:`heatsoak.core.mesh`, :mod:`heatsoak.core.problem`.
"""
