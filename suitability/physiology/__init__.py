"""Leaf physiology of C3 and C4 plants: pure functions on arrays (scalars, numpy, xarray, dask).

Public API: ``leaf_assimilation`` and ``LeafAssimilation`` (``leaf``), ``resolve_params`` and
``PARAMETER_SETS`` (``params``), ``crossover_temperature`` and the light-limited quantum yields
(``crossover``). Nothing here imports from the rest of the package.
"""

from .leaf import LIMITATION_CODES, LeafAssimilation, leaf_assimilation
from .params import DEFAULT_SETS, PARAMETER_SETS, resolve_params

__all__ = [
    "DEFAULT_SETS",
    "LIMITATION_CODES",
    "LeafAssimilation",
    "PARAMETER_SETS",
    "leaf_assimilation",
    "resolve_params",
]
