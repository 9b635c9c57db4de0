"""Leaf and canopy physiology of C3 and C4 plants: pure functions on arrays (scalars, numpy, xarray, dask).

Public API: ``leaf_assimilation`` and ``LeafAssimilation`` (``leaf``), ``resolve_params``,
``PARAMETER_SETS`` and ``DEFAULT_SETS`` (``params``), ``quantum_yield_crossover`` and the light-limited
quantum yields ``c3_quantum_yield`` / ``c4_quantum_yield`` (``crossover``), and the daily canopy
integration ``daily_canopy_assimilation`` / ``CanopyAssimilation`` (``canopy``). Nothing here imports
from the rest of the package.
"""

from .canopy import CanopyAssimilation, daily_canopy_assimilation
from .crossover import c3_quantum_yield, c4_quantum_yield, quantum_yield_crossover
from .leaf import LIMITATION_CODES, LeafAssimilation, leaf_assimilation
from .params import DEFAULT_SETS, PARAMETER_SETS, resolve_params

__all__ = [
    "CanopyAssimilation",
    "DEFAULT_SETS",
    "LIMITATION_CODES",
    "LeafAssimilation",
    "PARAMETER_SETS",
    "c3_quantum_yield",
    "c4_quantum_yield",
    "quantum_yield_crossover",
    "daily_canopy_assimilation",
    "leaf_assimilation",
    "resolve_params",
]
