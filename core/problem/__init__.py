"""The physics as plain data: the problem (mesh, materials, boundary conditions, initial
temperature, time settings), schedules of time and the small materials library.

May import: :mod:`heatsoak.core.errors`, :mod:`heatsoak.core.mesh`.
"""
