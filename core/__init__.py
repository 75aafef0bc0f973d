"""heatsoak.core: numerics of transient heat diffusion on tetrahedral meshes.

Pure numerics: numpy, scipy and meshio only (pyamg and scikit-sparse when
installed). Nothing here imports a UI package; ``heatsoak.plugin`` calls
into this package, never the other way round.

Layers, lowest first; a package imports only packages before it (``core/README.md``,
checked by ``tests/test_package.py``)::

    errors -> mesh -> problem -> fem -> solve -> results -> case -> app

Units are SI throughout (m, s, kg, W, J) except temperatures, which are in
degrees Celsius (a linear problem: only differences enter the physics).
"""

__version__ = "0.1.0"

#: Subpackages in layer order: each may import only those before it (and ``errors``).
LAYERS = ("mesh", "problem", "fem", "solve", "results", "case", "app")
