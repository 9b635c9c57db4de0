"""The daily sun/shade canopy model of both pathways, fused per cell and compiled with numba.

:func:`monthly_canopy_assimilation` gives, for every cell and the representative day of every month of
the season, what :func:`suitability.physiology.daily_canopy_assimilation` gives for C3 and for C4 (net
and gross, and C3 photorespiration), in one compiled pass over the cells; :func:`season_canopy_assimilation`
gives the part of it that :mod:`suitability.model` uses (monthly nets, season totals of C3 gross and
photorespiration) without storing the rest. It is the production path of the model
(``compute.engine: compiled``); the numpy physiology is the other engine (``compute.engine: numpy``).

Both engines run the same equations: the compiled one is built from the definitions in
:mod:`suitability.physiology` (:mod:`suitability.physiology.elementwise`), for whichever registered leaf
models (:data:`suitability.physiology.models.LEAF_MODELS`) the parameter sets name. Layout:

- :mod:`.tables`: a parameter set's temperature tables and constants;
- :mod:`.compiled`: the loops (batches of cells, Gauss moments), calling the physiology's equations;
- this module: the public functions, input normalisation, one compiled entry point per pair of models.

Compilation: on first use the entry point of a pair of leaf models takes about 100 s and 2.4 GB to compile
on a 2-core machine, in a child process (:mod:`.ahead`, so that no run holds the compiler's memory);
numba keeps it in its on-disk cache (``__pycache__`` beside :mod:`.compiled`, or
numba's user cache directory when that is read-only), stamped with the content of every source file it
was built from, so later processes, dask workers included, load it in well under a second and a change
to any equation recompiles it. Every call is normalised to one type signature (:func:`_kernel_array`).

Arithmetic is float64 inside (inputs float32, outputs float64). Parallelism: the compiled function runs
with ``nogil`` and without numba threads; dask runs blocks in parallel (threads or worker processes),
which needs no numba threading layer and does not oversubscribe the cores (benchmarks/README.md).
"""

from __future__ import annotations

import threading
from dataclasses import dataclass
from functools import lru_cache
from typing import Any

import numpy as np

from ..physiology import canopy as _canopy
from ..physiology.elementwise import specialise
from ..physiology.models import LeafModel
from ..physiology.water import MAX_WATER_SUPPLY_MM_PER_DAY
from . import ahead
from . import compiled as _compiled
from .compiled import (
    A_C3_GROSS,
    A_C3_NET,
    A_C3_PHOTO,
    A_C4_GROSS,
    A_C4_NET,
    BATCH,
    HUMIDITY_FROM_TMIN,
    HUMIDITY_VAPOUR_PRESSURE,
    HUMIDITY_VPD,
)
from .tables import TABLE_RANGE_C, TABLE_STEP_C, PathwayTables, pathway_tables, saturation_table

__all__ = ["BATCH", "TABLE_RANGE_C", "TABLE_STEP_C", "MonthlyCanopyAssimilation", "PathwayTables",
           "SeasonCanopyAssimilation", "compiled_entry", "monthly_canopy_assimilation", "pathway_tables",
           "season_canopy_assimilation", "supports"]

_UMOL_CO2_TO_G_C = 1e-6 * _canopy.CARBON_G_PER_MOL


def supports(c3_params: Any = None, c4_params: Any = None) -> bool:
    """Whether the compiled engine runs the leaf models of both resolved parameter sets (every
    registered model with ``compiled=True``). Raises ValueError for parameters ``resolve_params`` rejects."""
    return all(pathway_tables(pathway, params).model.compiled
               for pathway, params in (("C3", c3_params), ("C4", c4_params)))


_ENTRY_LOCK = threading.Lock()


def compiled_entry(c3_model: LeafModel, c4_model: LeafModel):
    """The compiled entry point for a pair of registered leaf models (compiled or loaded from the cache).

    Built under a lock: the first blocks of a run arrive on several dask threads at once, and without it
    each built its own dispatcher and compiled the kernel again (a fresh install's first run: about 140 s
    more and a peak of 2.7 GB instead of 1.1 GB, 1000² cells, measured 2026-12-03)."""
    with _ENTRY_LOCK:
        return _compiled_entry(c3_model, c4_model)


@lru_cache(maxsize=None)
def _compiled_entry(c3_model: LeafModel, c4_model: LeafModel):
    for model in (c3_model, c4_model):
        if not model.compiled:
            raise ValueError(f"leaf model {model.name!r} is not available in the compiled engine; use "
                             "compute.engine: numpy")
    entry = specialise(_compiled.monthly_cells, {"C3_RATES": c3_model.rates, "C4_RATES": c4_model.rates,
                                                 "C3_ACCLIMATE": c3_model.acclimate, "C4_ACCLIMATE": c4_model.acclimate},
                       key=f"{c3_model.name}_{c4_model.name}")
    ahead.compile_ahead(entry, c3_model, c4_model)  # else the first call compiles it here
    return entry


@dataclass(frozen=True)
class MonthlyCanopyAssimilation:
    """Daily canopy CO2 exchange on the representative day of each month [g C m-2 d-1], shape (..., 12).

    c3_net, c3_gross, c3_photorespiration, c4_net, c4_gross: as the fields of
    :class:`suitability.physiology.CanopyAssimilation` for each pathway. NaN for months outside the
    season and for invalid cells.
    """

    c3_net: np.ndarray
    c3_gross: np.ndarray
    c3_photorespiration: np.ndarray
    c4_net: np.ndarray
    c4_gross: np.ndarray


def monthly_canopy_assimilation(
    *, tmin_c, tmax_c, shortwave_mj, water_availability, latitude_deg, day_of_year, co2_ppm,
    elevation_m=None, lai=None, default_lai=3.0, vpd_kpa=None, actual_vapour_pressure_kpa=None,
    in_season=None, o2_percent=20.95, c3_params=None, c4_params=None,
    max_water_supply_mm=MAX_WATER_SUPPLY_MM_PER_DAY, growth_temperature_c=None,
) -> MonthlyCanopyAssimilation:
    """Daily C3 and C4 canopy assimilation on 12 representative days per cell, by the compiled kernel.

    The same model and quadrature as :func:`suitability.physiology.daily_canopy_assimilation` (see the
    module docstring for what is arranged differently), run for both pathways in one pass.

    Parameters
    ----------
    tmin_c, tmax_c : daily minimum and maximum temperature [°C], shape (..., 12).
    shortwave_mj : daily global shortwave radiation [MJ m-2 d-1], (..., 12).
    water_availability : 0..1 [-], (..., 12).
    latitude_deg : latitude [degrees north], (...).
    day_of_year : the representative day of each month [day], 12 values (or those of some months: the
        monthly arrays' last axis then holds those months).
    co2_ppm : ambient CO2 [µmol mol-1]; o2_percent : O2 [%] (scalars).
    elevation_m : elevation [m], (...); None = sea level.
    lai : leaf area index [m2 m-2], (...); None = ``default_lai`` everywhere.
    vpd_kpa : daytime vapour pressure deficit [kPa], (..., 12); or actual_vapour_pressure_kpa [kPa],
        (..., 12); neither: ea = e°(Tmin) (FAO-56 eq. 48). At most one of the two.
    in_season : bool (..., 12): months to compute (others NaN); None = all.
    c3_params, c4_params : as :func:`suitability.physiology.resolve_params` accepts.
    max_water_supply_mm : the soil's daily water supply at field capacity [mm d-1]
        (:mod:`suitability.physiology.water`).
    growth_temperature_c : growth temperature Tg [°C] of the leaves of both pathways, (..., 12), e.g. the
        month's mean air temperature (acclimation, ``LeafModel.acclimate``); None = each parameter set's
        own ``growth_temperature_c``. NaN gives NaN in a pathway whose model acclimates.

    Returns :class:`MonthlyCanopyAssimilation` (float64 arrays of shape (..., 12)).
    References: as :func:`suitability.physiology.daily_canopy_assimilation`.
    """
    daily, _, shape = _run(5, np.ones(np.size(day_of_year)), tmin_c=tmin_c, tmax_c=tmax_c,
                           shortwave_mj=shortwave_mj,
                           water_availability=water_availability, latitude_deg=latitude_deg,
                           day_of_year=day_of_year, co2_ppm=co2_ppm, elevation_m=elevation_m, lai=lai,
                           default_lai=default_lai, vpd_kpa=vpd_kpa,
                           actual_vapour_pressure_kpa=actual_vapour_pressure_kpa, in_season=in_season,
                           o2_percent=o2_percent, c3_params=c3_params, c4_params=c4_params,
                           max_water_supply_mm=max_water_supply_mm, growth_temperature_c=growth_temperature_c)
    daily = daily.reshape((5,) + shape + (-1,))
    return MonthlyCanopyAssimilation(c3_net=daily[A_C3_NET], c3_gross=daily[A_C3_GROSS],
                                     c3_photorespiration=daily[A_C3_PHOTO], c4_net=daily[A_C4_NET],
                                     c4_gross=daily[A_C4_GROSS])


@dataclass(frozen=True)
class SeasonCanopyAssimilation:
    """What the model needs of :func:`monthly_canopy_assimilation`, without storing the rest.

    c3_net, c4_net : daily net assimilation on the representative day of each month [g C m-2 d-1],
        (..., 12), NaN outside the season and for invalid cells.
    c3_gross_total, c3_photorespiration_total : Σ over the season months of days x the daily C3 gross
        assimilation and photorespiration [g C m-2], (...); NaN where a season month is invalid.
    """

    c3_net: np.ndarray
    c4_net: np.ndarray
    c3_gross_total: np.ndarray
    c3_photorespiration_total: np.ndarray


def season_canopy_assimilation(*, days_in_month, **inputs) -> SeasonCanopyAssimilation:
    """:func:`monthly_canopy_assimilation` reduced to what :mod:`suitability.model` uses.

    days_in_month : the weights [day] of the season totals, one per month of ``day_of_year``; every
        other argument as there. The months need not be all 12: the last axis of the monthly inputs holds
        the months of ``day_of_year`` (e.g. one month, as the canopy crossover asks for).
    """
    weights = np.asarray(days_in_month, np.float64)
    if weights.shape != np.shape(inputs.get("day_of_year")):
        raise ValueError(f"days_in_month: expected one value per day of day_of_year, got {days_in_month!r}")
    daily, totals, shape = _run(2, weights, **inputs)
    daily = daily.reshape((2,) + shape + (-1,))
    totals = totals.reshape((2,) + shape)
    return SeasonCanopyAssimilation(c3_net=daily[A_C3_NET], c4_net=daily[A_C4_NET],
                                    c3_gross_total=totals[0], c3_photorespiration_total=totals[1])


def _run(n_fields, weights, *, tmin_c, tmax_c, shortwave_mj, water_availability, latitude_deg, day_of_year,
         co2_ppm, elevation_m=None, lai=None, default_lai=3.0, vpd_kpa=None, actual_vapour_pressure_kpa=None,
         in_season=None, o2_percent=20.95, c3_params=None, c4_params=None,
         max_water_supply_mm=MAX_WATER_SUPPLY_MM_PER_DAY, growth_temperature_c=None):
    """Prepare the arrays and run the compiled kernel; returns (daily (n_fields, n, months), totals (2, n),
    shape), months = the days of ``day_of_year`` (12 for a year)."""
    if vpd_kpa is not None and actual_vapour_pressure_kpa is not None:
        raise ValueError("give vpd_kpa or actual_vapour_pressure_kpa, not both")
    c3 = pathway_tables("C3", c3_params)
    c4 = pathway_tables("C4", c4_params)
    entry = compiled_entry(c3.model, c4.model)
    days = np.asarray(day_of_year, np.float64)
    if days.ndim != 1 or days.size == 0 or not np.all(days == days.round()):
        raise ValueError(f"day_of_year: expected whole days, one per month (12 for a year), got {day_of_year!r}")
    months = days.size
    monthly = np.asarray(tmin_c)
    if monthly.ndim < 1 or monthly.shape[-1] != months:
        raise ValueError(f"monthly inputs need a last axis of {months} months, got shape {monthly.shape}")
    shape = monthly.shape[:-1]
    n = int(np.prod(shape, dtype=np.int64))

    def cells_by_month(values, name):
        return _kernel_array(values, np.float32, shape + (months,), (n, months), name)

    def cells(values, name, default):
        return _kernel_array(default if values is None else values, np.float32, shape, (n,), name)

    if vpd_kpa is not None:
        humidity_kind, humidity = HUMIDITY_VPD, cells_by_month(vpd_kpa, "vpd_kpa")
    elif actual_vapour_pressure_kpa is not None:
        humidity_kind = HUMIDITY_VAPOUR_PRESSURE
        humidity = cells_by_month(actual_vapour_pressure_kpa, "actual_vapour_pressure_kpa")
    else:
        humidity_kind, humidity = HUMIDITY_FROM_TMIN, np.zeros((1, months), np.float32)
    if growth_temperature_c is None:
        growth = np.zeros((0, months), np.float32)
    else:
        growth = cells_by_month(growth_temperature_c, "growth_temperature_c")
    growth_defaults = np.array([c3.growth_temperature_c, c4.growth_temperature_c], np.float64)
    season = _kernel_array(True if in_season is None else in_season, np.bool_, shape + (months,), (n, months), "in_season")
    day_nodes, day_weights = np.polynomial.legendre.leggauss(_canopy.DAY_GAUSS_POINTS)
    night_nodes, night_weights = np.polynomial.legendre.leggauss(_canopy.NIGHT_GAUSS_POINTS)
    daily = np.empty((n_fields, n, months), np.float64)
    totals = np.zeros((2, n), np.float64)
    entry(
        cells_by_month(tmin_c, "tmin_c"), cells_by_month(tmax_c, "tmax_c"),
        cells_by_month(shortwave_mj, "shortwave_mj"), cells_by_month(water_availability, "water_availability"),
        humidity, humidity_kind, cells(latitude_deg, "latitude_deg", 0.0), cells(elevation_m, "elevation_m", 0.0),
        cells(lai, "lai", default_lai), season, days, float(co2_ppm), float(o2_percent),
        c3.stomatal, c3.constants, c3.columns, c4.stomatal, c4.constants, c4.columns, saturation_table(),
        c3.start_c, 1.0 / c3.step_c, day_nodes, day_weights, night_nodes, night_weights, _UMOL_CO2_TO_G_C,
        float(max_water_supply_mm), np.require(weights, np.float64, ["C", "A", "W"]), growth, growth_defaults,
        daily, totals,
    )
    return daily, totals, shape


def _kernel_array(values, dtype, shape, flat_shape, name) -> np.ndarray:
    """``values`` broadcast to ``shape``, as a writeable C-contiguous array of ``dtype`` and ``flat_shape``.

    Every call then has the same numba type signature, so the kernel is compiled (or loaded from the
    cache) once, whatever dtype, memory layout or read-only flag the caller's arrays have.
    """
    array = np.asarray(values)
    try:
        array = np.broadcast_to(array, shape)
    except ValueError:
        raise ValueError(f"{name}: expected shape {shape} (or one that broadcasts to it), got {array.shape}") from None
    return np.require(array.reshape(flat_shape), dtype=dtype, requirements=["C", "A", "W"])


