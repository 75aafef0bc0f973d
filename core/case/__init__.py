"""The case file: a TOML what-if read into a problem, checked with every problem listed at
once (:mod:`~heatsoak.core.case.check`), written back (:mod:`~heatsoak.core.case.casefile`),
the files it names resolved and confined (:mod:`~heatsoak.core.case.paths`), and the
initial field a case may read from another file (:mod:`~heatsoak.core.case.initial_field`).

May import: errors, mesh, problem, fem, solve, results.
"""
