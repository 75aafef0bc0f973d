"""Sweeps: many variants of one case run on a distributed engine (dask), gathered in one table.

``plan`` makes the variants, ``worker`` runs one where a worker runs it,
``engine`` drives dask, ``table`` and ``plots`` write what came out and
``command`` is ``heatsoak sweep``.
"""
