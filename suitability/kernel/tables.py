"""What the compiled kernel needs of a resolved parameter set: temperature tables and constants.

The temperature terms of a leaf model (``LeafModel.temperature_terms``, :mod:`suitability.physiology.models`)
are tabulated every :data:`TABLE_STEP_C` °C over the leaf models' valid temperatures by the physiology
functions themselves and interpolated linearly in the kernel. The interpolation error is at most
h²/8 · max|f''/f|; the most curved term is the Collatz et al. (1992) respiration cut-off
1/(1 + e^{1.3 (T − 55)}) with |f''/f| <= 1.69 K⁻², so with h = 0.01 K the error is below 2.2e-5 relative
(derived here), and below 2e-7 for the Arrhenius terms (including the deactivation factor fArr(T; Hd) of
the peaked responses, |f''/f| = (Hd/(R Tk²))² − 2 Hd/(R Tk³) <= 0.28 K⁻² above -60 °C for Hd = 200 kJ
mol-1: below 3.5e-6, derived here). The
saturation vapour pressure e°(T) (FAO-56 eq. 11) is tabulated alike, for the hourly vapour pressure deficit.

Terms that depend on the growth temperature (acclimation) are not tabulated: the tables hold only
leaf-temperature terms, and the leaf model's ``acclimate`` equation completes them for the cell's growth
temperature inside the kernel (:mod:`suitability.physiology.models`), so acclimation adds no
interpolation error.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache
from typing import Any

import numpy as np

from ..physiology.atmosphere import TEMPERATURE_RANGE_C, saturation_vapour_pressure
from ..physiology.models import MAX_TERMS, LeafModel, leaf_model
from ..physiology.params import resolve_params
from ..physiology.stomata import stomatal_constants

#: Step of the temperature tables [°C] (accuracy: module docstring).
TABLE_STEP_C = 0.01


@dataclass(frozen=True)
class PathwayTables:
    """One pathway's resolved parameters as the kernel takes them.

    model: the registered leaf model. columns: float64 (MAX_TERMS, rows), C-contiguous, the model's
    temperature terms every ``step_c`` from ``start_c`` (unused terms 0), one term per row, as the
    kernel reads them: the two table rows a lookup interpolates between are neighbours in memory (mostly
    one cache line), and a term the model does not use is never loaded (measured: with (rows, MAX_TERMS)
    rows of 96 bytes the kernel's gathers ran slower). table: the same values as a (rows, MAX_TERMS)
    view. constants: float64 (MAX_TERMS,), the model's constants. stomatal: float64 vector of
    :func:`~suitability.physiology.stomata.stomatal_constants`.
    """

    model: LeafModel
    columns: np.ndarray
    constants: np.ndarray
    stomatal: np.ndarray
    start_c: float
    step_c: float
    growth_temperature_c: float = float("nan")

    @property
    def table(self) -> np.ndarray:
        return self.columns.T


def table_temperatures() -> np.ndarray:
    """The temperatures of every table row [°C]."""
    low, high = TABLE_RANGE_C
    rows = int(round((high - low) / TABLE_STEP_C)) + 1
    return low + TABLE_STEP_C * np.arange(rows, dtype=np.float64)


#: Range of the tables [°C]: the leaf models' valid temperatures (outside them the result is NaN).
TABLE_RANGE_C = TEMPERATURE_RANGE_C


@lru_cache(maxsize=1)
def saturation_table() -> np.ndarray:
    """e°(T) [kPa] at :func:`table_temperatures` (FAO-56 eq. 11), read-only."""
    table = np.ascontiguousarray(saturation_vapour_pressure(table_temperatures()), dtype=np.float64)
    table.setflags(write=False)
    return table


def pathway_tables(pathway: str, params: Any = None) -> PathwayTables:
    """Tables and constants of ``pathway`` ("C3"/"C4") for the kernel, from ``resolve_params(pathway, params)``.

    Raises ValueError (from ``resolve_params``) for unknown sets, keys or values.
    """
    resolved = resolve_params(pathway, params)
    return _cached_tables(pathway, tuple(sorted(resolved.items())))


def _padded(values, name: str, model: LeafModel) -> list:
    values = list(values)
    if len(values) > MAX_TERMS:
        raise ValueError(f"leaf model {model.name!r} has {len(values)} {name}; the compiled engine takes at most "
                         f"{MAX_TERMS}")
    return values + [0.0] * (MAX_TERMS - len(values))


@lru_cache(maxsize=32)
def _cached_tables(pathway: str, items: tuple) -> PathwayTables:
    params = dict(items)
    model = leaf_model(params["model"], pathway)
    t = table_temperatures()
    columns = _padded(model.temperature_terms(t, params), "temperature terms", model)
    by_term = np.ascontiguousarray(
        np.stack([np.broadcast_to(np.asarray(c, np.float64), t.shape) for c in columns], axis=0))
    constants = np.array(_padded(model.constants(params), "constants", model), np.float64)
    stomatal = np.array(stomatal_constants(params), np.float64)
    for array in (by_term, constants, stomatal):
        array.setflags(write=False)
    return PathwayTables(model, by_term, constants, stomatal, float(t[0]), TABLE_STEP_C,
                         float(params.get("growth_temperature_c", np.nan)))
