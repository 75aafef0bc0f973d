"""Jobs a user starts: the ``heatsoak`` command (:mod:`~heatsoak.core.app.cli`), running a
case or a batch (:mod:`~heatsoak.core.app.runner`) and the benchmark.

May import every other core package; nothing in core imports this one.
"""
