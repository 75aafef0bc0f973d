"""What a run produces: probes (points located in cells), the run record (region statistics,
probe histories, threshold crossings, energy balance), the result files written as a run goes
(:mod:`~heatsoak.core.results.writer`) and reading a run's field file back
(:mod:`~heatsoak.core.results.result_field`).

May import: errors, mesh, problem, fem, solve.
"""
