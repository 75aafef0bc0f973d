"""Solving in time: linear solvers and preconditioners for one step's system, and the
time integrators (:mod:`heatsoak.core.solve.stepping`, a base class and one module a method).

May import: errors, mesh, problem, fem.
"""
