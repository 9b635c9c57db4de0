"""The daily sun/shade canopy model of both pathways, fused per cell and compiled with numba.

:func:`monthly_canopy_assimilation` gives, for every cell and the representative day of every month of
the season, what :func:`suitability.physiology.daily_canopy_assimilation` gives for C3 and for C4 (net
and gross, and C3 photorespiration), in one compiled pass over the cells; :func:`season_canopy_assimilation`
gives the part of it that :mod:`suitability.model` uses (monthly nets, season totals of C3 gross and
photorespiration) without storing the rest. It is the production path of the model
(``compute.engine: compiled``); the numpy physiology stays the reference (``compute.engine: numpy``) and
tests/test_kernel.py holds the two within 1e-4 relative. Every leaf model of :mod:`.physiology.params`
is supported (:data:`SUPPORTED_MODELS`, :func:`supports`); the model falls back to numpy for others.

Compilation: on first use each of the two entry points (one per C4 model) takes about half a minute to
compile on a 2-core machine; numba then keeps it in its on-disk cache (``__pycache__`` beside this file,
or numba's user cache directory when that is read-only), so later processes, dask workers included, load
it in well under a second. Every call is normalised to one type signature (:func:`_kernel_array`), so
callers' dtypes or memory layouts never trigger another compilation.

Same equations, arranged for speed (each step keeps the numpy model's results to well under 1e-4):

* Per cell, the day's astronomy (FAO-56 eqs. 21-25, 34), the clearness and diffuse share (Spitters et al.
  1986 eq. 2), the daily radiation integrals and the air pressure (FAO-56 eq. 7) are computed once; per
  Gauss point the sun/shade light climate (de Pury & Farquhar 1997) and the temperature (the cosine of
  :func:`suitability.physiology.canopy.daily_temperature`) are computed once and shared by the sunlit and
  the shaded leaf of both pathways. The quadrature is exactly that of the numpy model
  (:data:`~suitability.physiology.canopy.DAY_GAUSS_POINTS` Gauss-Legendre points over daylight,
  :data:`~suitability.physiology.canopy.NIGHT_GAUSS_POINTS` at night).
* Temperature-only terms (Kc, Kc/Ko, Γ*/O, Vcmax, Jmax, Rd, e°(T) and the C4 enzyme terms) are tabulated
  every :data:`TABLE_STEP_C` °C from −60 to 60 °C by the numpy physiology functions themselves
  (``rubisco_constants``, ``capacity_temperature_factors``, the responses of ``c4``) with the resolved
  parameters, and interpolated linearly. The linear-interpolation error is at most h²/8 · max|f''/f|;
  the most curved term is the Collatz et al. (1992) respiration cut-off 1/(1 + e^{1.3 (T − 55)}) with
  |f''/f| ≤ 1.69 K⁻², so with h = 0.01 K the error is below 2.2e-5 relative (derived here), and below
  2e-7 for the Arrhenius terms. Every parameter set and override of :mod:`.physiology.params` is
  therefore supported: the kernel takes the numbers from ``resolve_params``.
* Arithmetic is float64 inside (inputs float32, outputs float64). Of the fast-math flags only
  "contract" (fused multiply-add) is used: nodata NaN must propagate, and a cell's numbers must not
  depend on where it sits in a block. The exponential, sine and cosine in the vectorised loops are
  polynomials accurate to a few 1e-16 (see :func:`_expm1`, :func:`_sincos`), not libm calls.

Each cell is computed independently, in a fixed order, with no reduction across cells: results are
bitwise identical whatever the block (chunk) size, the number of workers or the scheduler.

Parallelism: the compiled function runs with ``nogil`` and without numba threads; dask runs blocks in
parallel (threads or worker processes). This needs no numba threading layer at all, so it is safe under
any number of dask threads (numba's default "workqueue" layer is not), and avoids oversubscribing the
cores (benchmarks/README.md gives the measurements behind this choice).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache
from typing import Any, Mapping

import numba
import numba.extending
import numpy as np

from .physiology import canopy as _canopy
from .physiology import light as _light
from .physiology.atmosphere import saturation_vapour_pressure
from .physiology.c3 import capacity_temperature_factors
from .physiology.c4 import CAEMMERER_2021_ACTIVATION, PEPC_KINETICS
from .physiology.params import resolve_params
from .physiology.rubisco import STANDARD_PRESSURE_KPA, rubisco_constants
from .physiology.temperature import arrhenius, gaussian_response, q10_response

#: Step of the temperature tables [°C] (accuracy: module docstring).
TABLE_STEP_C = 0.01
#: Range of the tables [°C]: the leaf models' valid temperatures (outside them the numpy model gives NaN).
TABLE_RANGE_C = (-60.0, 60.0)

# Column layout of the temperature tables (one row per temperature).
# The C3 table also holds e°(T), the saturation vapour pressure [kPa] of the moment (both pathways).
C3_KC, C3_KC_OVER_KO, C3_GAMMA_PER_O2, C3_VCMAX, C3_JMAX, C3_RD, C3_SATURATION_VP = range(7)
COLLATZ_ENZYME, COLLATZ_RESPIRATION, COLLATZ_K = range(3)
VC_KC, VC_KO, VC_GAMMA_PER_O2, VC_KP, VC_VCMAX, VC_VPMAX, VC_VPR, VC_RD, VC_JMAX = range(9)

# Layout of the scalar parameter vectors.
# both pathways: 0 g1, 1 fixed Ci/Ca, 2 stomatal model is "fixed" (1.0) or Medlyn (0.0),
# 3 water stress also scales the carboxylation capacity (1.0 / 0.0), 4 model code (below).
# C3: 5 theta, 6 spectral correction f, 7 Jmax unlimited (1.0 / 0.0), 8 Tp unlimited (1.0 / 0.0),
# 9 Tp25 / Vcmax25 (Tp follows Vcmax's temperature response, c3.c3_assimilation).
# Collatz C4: 5 alpha, 6 theta, 7 beta.   von Caemmerer C4: 5 theta, 6 f, 7 gbs [µmol m-2 s-1 Pa-1],
# 8 x, 9 Rm/Rd.
MODEL_FVCB, MODEL_COLLATZ1992, MODEL_VC2000 = 0, 1, 2
_N_SCALARS = 10
_MODEL_CODES = {"fvcb": MODEL_FVCB, "collatz1992": MODEL_COLLATZ1992, "vc2000": MODEL_VC2000}

# Humidity input kinds.
HUMIDITY_FROM_TMIN, HUMIDITY_VPD, HUMIDITY_VAPOUR_PRESSURE = 0, 1, 2

_UMOL_CO2_TO_G_C = 1e-6 * _canopy.CARBON_G_PER_MOL


@dataclass(frozen=True)
class PathwayTables:
    """What the compiled kernel needs of one pathway's resolved parameters.

    scalars: float64 vector in the layout above. table: float64 (rows, columns), temperature-only terms
    every ``step_c`` from ``start_c``.
    """

    scalars: np.ndarray
    table: np.ndarray
    start_c: float
    step_c: float


#: Leaf models the kernel implements, per pathway (the names of ``params["model"]``).
SUPPORTED_MODELS = {"C3": ("fvcb",), "C4": ("collatz1992", "vc2000")}


def supports(c3_params: Any = None, c4_params: Any = None) -> bool:
    """Whether the kernel implements the leaf models of both resolved parameter sets.

    Temperature responses and kinetic sets need no support of their own: the kernel tabulates them
    with the numpy physiology functions. Raises ValueError for parameters ``resolve_params`` rejects.
    """
    return all(resolve_params(pathway, params)["model"] in SUPPORTED_MODELS[pathway]
               for pathway, params in (("C3", c3_params), ("C4", c4_params)))


def _table_temperatures() -> np.ndarray:
    low, high = TABLE_RANGE_C
    rows = int(round((high - low) / TABLE_STEP_C)) + 1
    return low + TABLE_STEP_C * np.arange(rows, dtype=np.float64)


def _stomatal_scalars(p: Mapping) -> list[float]:
    return [float(p["g1"]), float(p["ci_ratio"]), 1.0 if p["stomatal_model"] == "fixed" else 0.0,
            1.0 if p["water_stress_on_vcmax"] else 0.0, float(_MODEL_CODES[p["model"]])]


def _c3_tables(p: Mapping, t: np.ndarray) -> tuple[list[float], np.ndarray]:
    kc, ko, gamma_per_o2 = rubisco_constants(p["kinetics"], t, 1.0)  # Γ* is proportional to O: O = 1 Pa
    vcmax_f, jmax_f, rd_f = capacity_temperature_factors(t, p["vcmax_temperature_response"],
                                                         p["growth_temperature_c"])
    jmax_unlimited, tpu_unlimited = math.isinf(p["jmax25"]), math.isinf(p["tpu25"])
    columns = [kc, kc / ko, gamma_per_o2, p["vcmax25"] * vcmax_f,
               np.zeros_like(t) if jmax_unlimited else p["jmax25"] * jmax_f,
               p["rd25"] * rd_f, saturation_vapour_pressure(t)]
    # With Vcmax25 = 0 there is no carboxylation, so Tp never limits and the ratio does not matter.
    tpu_ratio = 0.0 if tpu_unlimited or p["vcmax25"] == 0 else p["tpu25"] / p["vcmax25"]
    scalars = _stomatal_scalars(p) + [float(p["theta"]), float(p["spectral_correction"]),
                                      1.0 if jmax_unlimited else 0.0, 1.0 if tpu_unlimited else 0.0, tpu_ratio]
    return scalars, np.stack([np.broadcast_to(np.asarray(c, np.float64), t.shape) for c in columns], axis=1)


def _collatz_tables(p: Mapping, t: np.ndarray) -> tuple[list[float], np.ndarray]:
    # The temperature terms of suitability.physiology.c4.collatz_c4_rates (Collatz et al. 1992).
    q10 = q10_response(t, p["q10"])
    enzyme = p["vmax25"] * q10 / ((1.0 + np.exp(0.3 * (p["low_temperature_c"] - t)))
                                  * (1.0 + np.exp(0.3 * (t - p["high_temperature_c"]))))
    respiration = p["rd25"] * q10 / (1.0 + np.exp(1.3 * (t - p["respiration_high_temperature_c"])))
    # k [mol m-2 s-1] times the CO2 mole fraction at standard pressure, per Pa of CO2, in µmol m-2 s-1.
    k = p["k25"] * q10 * (1e3 / STANDARD_PRESSURE_KPA)
    scalars = _stomatal_scalars(p) + [float(p["alpha"]), float(p["theta"]), float(p["beta"])]
    return scalars, np.stack([enzyme, respiration, k], axis=1)


def _caemmerer_tables(p: Mapping, t: np.ndarray) -> tuple[list[float], np.ndarray]:
    # The temperature terms of suitability.physiology.c4.caemmerer_c4_rates (von Caemmerer 2000, 2021).
    constants = CAEMMERER_2021_ACTIVATION
    kc, ko, gamma_per_o2 = rubisco_constants(p["kinetics"], t, 1.0)
    pepc = PEPC_KINETICS[p["kinetics"]]
    vp_factor = arrhenius(t, constants["vpmax_activation_energy"])
    columns = [
        kc, ko, gamma_per_o2,
        pepc["kp25_pa"] * arrhenius(t, pepc["kp_activation_energy"]),
        p["vcmax25"] * arrhenius(t, constants["vcmax_activation_energy"]),
        p["vpmax25"] * vp_factor,
        p["vpr25"] * vp_factor,
        p["rd25"] * arrhenius(t, constants["rd_activation_energy"]),
        p["jmax25"] * gaussian_response(t, p["jmax_optimum_c"], p["jmax_width_c"]),
    ]
    scalars = _stomatal_scalars(p) + [float(p["theta"]), float(p["spectral_correction"]),
                                      float(p["gbs"]) * 10.0,  # mol m-2 s-1 bar-1 -> µmol m-2 s-1 Pa-1
                                      float(p["x"]), float(p["rm_fraction"])]
    return scalars, np.stack(columns, axis=1)


def pathway_tables(pathway: str, params: Any = None) -> PathwayTables:
    """Tables and scalars of ``pathway`` ("C3"/"C4") for the kernel, from ``resolve_params(pathway, params)``.

    Raises ValueError (from ``resolve_params``) for unknown sets, keys or values.
    """
    resolved = resolve_params(pathway, params)
    return _cached_tables(resolved["parameter_set"], tuple(sorted((k, v) for k, v in resolved.items())))


@lru_cache(maxsize=32)
def _cached_tables(set_name: str, items: tuple) -> PathwayTables:
    p = dict(items)
    t = _table_temperatures()
    builder = {MODEL_FVCB: _c3_tables, MODEL_COLLATZ1992: _collatz_tables, MODEL_VC2000: _caemmerer_tables}
    scalars, table = builder[_MODEL_CODES[p["model"]]](p, t)
    vector = np.zeros(_N_SCALARS, np.float64)
    vector[:len(scalars)] = scalars
    table = np.ascontiguousarray(table, dtype=np.float64)
    table.setflags(write=False)
    vector.setflags(write=False)
    return PathwayTables(vector, table, float(t[0]), TABLE_STEP_C)


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
    day_of_year : the representative day of each month [day], 12 values.
    co2_ppm : ambient CO2 [µmol mol-1]; o2_percent : O2 [%] (scalars).
    elevation_m : elevation [m], (...); None = sea level.
    lai : leaf area index [m2 m-2], (...); None = ``default_lai`` everywhere.
    vpd_kpa : daytime vapour pressure deficit [kPa], (..., 12); or actual_vapour_pressure_kpa [kPa],
        (..., 12); neither: ea = e°(Tmin) (FAO-56 eq. 48). At most one of the two.
    in_season : bool (..., 12): months to compute (others NaN); None = all.
    c3_params, c4_params : as :func:`suitability.physiology.resolve_params` accepts.

    Returns :class:`MonthlyCanopyAssimilation` (float64 arrays of shape (..., 12)).
    References: as :func:`suitability.physiology.daily_canopy_assimilation`.
    """
    daily, _, shape = _run(5, np.ones(12), tmin_c=tmin_c, tmax_c=tmax_c, shortwave_mj=shortwave_mj,
                           water_availability=water_availability, latitude_deg=latitude_deg,
                           day_of_year=day_of_year, co2_ppm=co2_ppm, elevation_m=elevation_m, lai=lai,
                           default_lai=default_lai, vpd_kpa=vpd_kpa,
                           actual_vapour_pressure_kpa=actual_vapour_pressure_kpa, in_season=in_season,
                           o2_percent=o2_percent, c3_params=c3_params, c4_params=c4_params)
    daily = daily.reshape((5,) + shape + (12,))
    return MonthlyCanopyAssimilation(c3_net=daily[_A_C3_NET], c3_gross=daily[_A_C3_GROSS],
                                     c3_photorespiration=daily[_A_C3_PHOTO], c4_net=daily[_A_C4_NET],
                                     c4_gross=daily[_A_C4_GROSS])


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

    days_in_month : the 12 weights [day] of the season totals; every other argument as there.
    """
    weights = np.asarray(days_in_month, np.float64)
    if weights.shape != (12,):
        raise ValueError(f"days_in_month: expected 12 values, got {days_in_month!r}")
    daily, totals, shape = _run(2, weights, **inputs)
    daily = daily.reshape((2,) + shape + (12,))
    totals = totals.reshape((2,) + shape)
    return SeasonCanopyAssimilation(c3_net=daily[_A_C3_NET], c4_net=daily[_A_C4_NET],
                                    c3_gross_total=totals[0], c3_photorespiration_total=totals[1])


def _run(n_fields, weights, *, tmin_c, tmax_c, shortwave_mj, water_availability, latitude_deg, day_of_year,
         co2_ppm, elevation_m=None, lai=None, default_lai=3.0, vpd_kpa=None, actual_vapour_pressure_kpa=None,
         in_season=None, o2_percent=20.95, c3_params=None, c4_params=None):
    """Prepare the arrays and run the compiled kernel; returns (daily (n_fields, n, 12), totals (2, n), shape)."""
    if vpd_kpa is not None and actual_vapour_pressure_kpa is not None:
        raise ValueError("give vpd_kpa or actual_vapour_pressure_kpa, not both")
    c3 = pathway_tables("C3", c3_params)
    c4 = pathway_tables("C4", c4_params)
    monthly = np.asarray(tmin_c)
    if monthly.ndim < 1 or monthly.shape[-1] != 12:
        raise ValueError(f"monthly inputs need a last axis of 12 months, got shape {monthly.shape}")
    shape = monthly.shape[:-1]
    n = int(np.prod(shape, dtype=np.int64))

    def cells_by_month(values, name):
        return _kernel_array(values, np.float32, shape + (12,), (n, 12), name)

    def cells(values, name, default):
        return _kernel_array(default if values is None else values, np.float32, shape, (n,), name)

    if vpd_kpa is not None:
        humidity_kind, humidity = HUMIDITY_VPD, cells_by_month(vpd_kpa, "vpd_kpa")
    elif actual_vapour_pressure_kpa is not None:
        humidity_kind = HUMIDITY_VAPOUR_PRESSURE
        humidity = cells_by_month(actual_vapour_pressure_kpa, "actual_vapour_pressure_kpa")
    else:
        humidity_kind, humidity = HUMIDITY_FROM_TMIN, np.zeros((1, 12), np.float32)
    season = _kernel_array(True if in_season is None else in_season, np.bool_, shape + (12,), (n, 12), "in_season")
    days = np.asarray(day_of_year, np.float64)
    if days.shape != (12,) or not np.all(days == days.round()):
        raise ValueError(f"day_of_year: expected 12 whole days, got {day_of_year!r}")
    day_nodes, day_weights = np.polynomial.legendre.leggauss(_canopy.DAY_GAUSS_POINTS)
    night_nodes, night_weights = np.polynomial.legendre.leggauss(_canopy.NIGHT_GAUSS_POINTS)
    daily = np.empty((n_fields, n, 12), np.float64)
    totals = np.zeros((2, n), np.float64)
    entry = _monthly_cells_collatz if c4.scalars[4] == MODEL_COLLATZ1992 else _monthly_cells_caemmerer
    entry(
        cells_by_month(tmin_c, "tmin_c"), cells_by_month(tmax_c, "tmax_c"),
        cells_by_month(shortwave_mj, "shortwave_mj"), cells_by_month(water_availability, "water_availability"),
        humidity, humidity_kind, cells(latitude_deg, "latitude_deg", 0.0), cells(elevation_m, "elevation_m", 0.0),
        cells(lai, "lai", default_lai), season, days, float(co2_ppm), float(o2_percent),
        c3.scalars, c3.table, c4.scalars, c4.table, c3.start_c, 1.0 / c3.step_c,
        day_nodes, day_weights, night_nodes, night_weights, _constants(),
        np.require(weights, np.float64, ["C", "A", "W"]), daily, totals,
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


def _constants() -> np.ndarray:
    # Passed at run time rather than read as globals, so that numba's on-disk cache (keyed on this file)
    # can never hold numbers that were changed in the physiology modules since it was compiled.
    return np.array([
        _light.PAR_FRACTION_OF_SHORTWAVE * _light.PAR_PHOTONS_PER_JOULE,
        _light.DAILY_COURSE_ATMOSPHERIC_FACTOR,
        _light.LEAF_SCATTERING_PAR,
        _light.DIFFUSE_EXTINCTION_BLACK_LEAVES,
        _light.CANOPY_DIFFUSE_REFLECTION_PAR,
        _light.MIN_SIN_ELEVATION,
        _canopy.HOUR_OF_MAXIMUM_TEMPERATURE,
        _UMOL_CO2_TO_G_C,
    ], np.float64)


# ---------------------------------------------------------------------------------------------------------
# The compiled part. Every function mirrors a numpy function of suitability.physiology, named beside it.
#
# Layout for SIMD: cells are taken BATCH at a time; per batch and month the day's quantities are set up
# cell by cell (setup[field, lane]), then each Gauss moment runs as one loop over the lanes whose body
# has no calls and no data-dependent branches, so that LLVM vectorises it. The exponential, sine and
# cosine inside those loops are therefore polynomial (below) instead of libm calls. The last batch is
# padded with harmless lanes, so every cell runs through the same instructions wherever it sits.
#
# error_model="numpy": a division by zero gives inf/NaN as in numpy instead of raising. Of numba's
# fast-math flags only "contract" (a·b + c as one fused multiply-add): it keeps NaN and inf semantics
# ("nnan"/"ninf" would drop nodata), and every cell runs through the same instructions, so the results
# stay independent of the cell's place in a batch.
# ---------------------------------------------------------------------------------------------------------
_JIT = dict(cache=True, nogil=True, error_model="numpy", _nrt=False, fastmath={"contract"})
#: Cells per batch (a multiple of every SIMD width).
BATCH = 64
#: Below this argument exp() is taken as exp(−80) < 2e-35, nothing next to the 1 it is subtracted from.
_EXP_FLOOR = -80.0
_INV_FACTORIAL = tuple(1.0 / math.factorial(k) for k in range(23))

# setup[field, lane]
(_S_OMEGA, _S_A, _S_B, _S_INTEGRAL_GLOBAL, _S_INTEGRAL_DIFFUSE, _S_SHORTWAVE, _S_DIFFUSE, _S_MEAN_T,
 _S_AMPLITUDE_T, _S_HALF_DAY_S, _S_HALF_NIGHT_H, _S_LAI, _S_E_KD, _S_HUMIDITY, _S_WATER, _S_CO2_PER_RATIO,
 _S_O2, _S_C3_SCALE, _S_C4_SCALE) = range(19)
_N_SETUP = 19
# cells[field, lane]: what does not change with the month
(_C_VALID, _C_SIN_PHI, _C_COS_PHI, _C_TAN_PHI, _C_LAI, _C_E_KD, _C_CO2_PER_RATIO, _C_O2) = range(8)
_N_CELL = 8
# acc[field, lane]
# (the first fields are also the rows of the kernel's output, see _run)
_A_C3_NET, _A_C4_NET, _A_C3_GROSS, _A_C3_PHOTO, _A_C4_GROSS, _A_BAD = range(6)
_N_ACC = 6
# moment[field, lane]
(_M_TEMPERATURE_AFTER, _M_TEMPERATURE_BEFORE, _M_SUNLIT_PAR, _M_SHADED_PAR, _M_SUNLIT_LAI,
 _M_SHADED_LAI) = range(6)
_N_MOMENT = 6


def _stack_array(rows: int):
    """A compiled-only helper returning a (rows, BATCH) float64 array on the stack of the caller.

    Stack memory cannot alias the tables or the outputs, so LLVM needs no run-time alias checks to
    vectorise the lane loops (with heap arrays it gives up: the table reads have no known bounds).
    """
    array_type = numba.types.Array(numba.types.float64, 2, "C")

    @numba.extending.intrinsic
    def stack_array(typingctx):
        def codegen(context, builder, signature, args):
            from numba.core import cgutils
            from numba.np.arrayobj import make_array, populate_array

            data = cgutils.alloca_once(builder, context.get_value_type(numba.types.float64), size=rows * BATCH)
            array = make_array(array_type)(context, builder)
            intp = context.get_value_type(numba.types.intp)
            populate_array(array, data=data, shape=cgutils.pack_array(builder, [intp(rows), intp(BATCH)]),
                           strides=cgutils.pack_array(builder, [intp(8 * BATCH), intp(8)]), itemsize=intp(8),
                           meminfo=None)
            return array._getvalue()

        return array_type(), codegen

    return stack_array


_setup_array = _stack_array(_N_SETUP)
_cell_array = _stack_array(_N_CELL)
_acc_array = _stack_array(_N_ACC)
_moment_array = _stack_array(_N_MOMENT)


@numba.njit(inline="always", **_JIT)
def _non_negative(value):
    # np.maximum(value, 0.0): NaN stays NaN.
    return 0.0 if value < 0.0 else value


@numba.njit(inline="always", **_JIT)
def _expm1(x):
    """exp(x) − 1 with a relative error of a few 1e-16 for −80 <= x <= 4 (derived here).

    z = x / 2¹², expm1(z) by its Taylor series to z⁷ (truncation < 1e-18 relative for |z| < 0.02), then
    twelve doublings expm1(2z) = expm1(z) (expm1(z) + 2), which keep the relative error of small results
    and shrink it for large negative x. Arguments below −80 are taken as −80 (see _EXP_FLOOR).
    """
    z = (_EXP_FLOOR if x < _EXP_FLOOR else x) * (1.0 / 4096.0)
    f = _INV_FACTORIAL
    m = z * (1.0 + z * (f[2] + z * (f[3] + z * (f[4] + z * (f[5] + z * (f[6] + z * f[7]))))))
    # Twelve doublings, written out: a loop here would be an inner loop and stop LLVM vectorising.
    m = m * (m + 2.0)
    m = m * (m + 2.0)
    m = m * (m + 2.0)
    m = m * (m + 2.0)
    m = m * (m + 2.0)
    m = m * (m + 2.0)
    m = m * (m + 2.0)
    m = m * (m + 2.0)
    m = m * (m + 2.0)
    m = m * (m + 2.0)
    m = m * (m + 2.0)
    m = m * (m + 2.0)
    return m


@numba.njit(inline="always", **_JIT)
def _sincos(angle):
    """(sin, cos) of an angle in [−π, π] [rad], to about 1e-16 (derived here).

    Taylor series of the half angle h (|h| <= π/2) to h¹⁹ and h²⁰ (next terms < 3e-16), then
    sin = 2 sin(h) cos(h), cos = (cos h − sin h)(cos h + sin h).
    """
    h = 0.5 * angle
    q = h * h
    f = _INV_FACTORIAL
    s = h * (1.0 - q * (f[3] - q * (f[5] - q * (f[7] - q * (f[9] - q * (f[11] - q * (f[13] - q * (f[15] - q * (
        f[17] - q * f[19])))))))))
    c = 1.0 - q * (f[2] - q * (f[4] - q * (f[6] - q * (f[8] - q * (f[10] - q * (f[12] - q * (f[14] - q * (
        f[16] - q * (f[18] - q * f[20])))))))))
    return 2.0 * s * c, (c - s) * (c + s)


@numba.njit(inline="always", **_JIT)
def _hyperbola(rate_a, rate_b, curvature):
    # c3.non_rectangular_hyperbola: smaller root of θ x² − (a + b) x + a b = 0.
    total = rate_a + rate_b
    product = rate_a * rate_b
    denominator = total + math.sqrt(_non_negative(total * total - 4.0 * curvature * product))
    positive = denominator > 0.0
    return 2.0 * product / (denominator if positive else 1.0) if positive else 0.0


@numba.njit(inline="always", **_JIT)
def _smaller_root_monic(b, c):
    # c4._smaller_root_monic: smaller root of A² + bA + c = 0.
    denominator = math.sqrt(_non_negative(b * b - 4.0 * c)) - b
    nonzero = denominator != 0.0
    return 2.0 * c / (denominator if nonzero else 1.0) if nonzero else -b


@numba.njit(inline="always", **_JIT)
def _diffuse_fraction_daily(clearness):
    # light.diffuse_fraction_daily, Spitters et al. (1986) eq. 2 (clearness >= 0 here).
    if clearness < 0.07:
        return 1.0
    if clearness < 0.35:
        return 1.0 - 2.3 * (clearness - 0.07) ** 2
    if clearness < 0.75:
        return 1.33 - 1.46 * clearness
    return 0.23


@numba.njit(inline="always", **_JIT)
def _ci_ratio(scalars, sqrt_vpd, water):
    # stomata.intercellular_co2_ratio: Medlyn et al. (2011) Ci/Ca = g1 W / (g1 W + √D), or a fixed ratio.
    slope = scalars[0] * water
    denominator = slope + sqrt_vpd
    positive = denominator > 0.0
    medlyn = slope / (denominator if positive else 1.0) if positive else 0.0
    return scalars[1] if scalars[2] == 1.0 else medlyn


@numba.njit(inline="always", **_JIT)
def _lerp(table, row, fraction, column):
    low = table[row, column]
    return low + fraction * (table[row + 1, column] - low)


# A leaf model is split in two: the part that depends on temperature and CO2 only (computed once per
# moment and shared by the sunlit and the shaded leaf) and the part that depends on the absorbed light.

@numba.njit(inline="always", **_JIT)
def _c3_state(table, row, fraction, scalars, co2_pa, o2_pa, capacity_scale):
    """c3.c3_assimilation / c3.fvcb_rates, light-independent terms [Pa, µmol m-2 s-1]. Divisions are
    done once here and shared by the sunlit and shaded leaf (they limit the vectorised loop's speed)."""
    vcmax_unscaled = _lerp(table, row, fraction, C3_VCMAX)
    gamma_star = _lerp(table, row, fraction, C3_GAMMA_PER_O2) * o2_pa
    # Km = Kc (1 + O/Ko) = Kc + O · Kc/Ko (rubisco.effective_michaelis_constant)
    km = _lerp(table, row, fraction, C3_KC) + o2_pa * _lerp(table, row, fraction, C3_KC_OVER_KO)
    rate_rubisco = vcmax_unscaled * capacity_scale / (co2_pa + km)
    light_denominator = 4.0 * co2_pa + 8.0 * gamma_star
    positive = light_denominator > 0.0
    inverse_light_denominator = 1.0 / (light_denominator if positive else 1.0) if positive else np.inf
    inverse_co2 = 1.0 / (co2_pa if co2_pa > 0.0 else 1.0)
    tpu3 = 3.0 * scalars[9] * vcmax_unscaled
    return (rate_rubisco, inverse_light_denominator, _lerp(table, row, fraction, C3_JMAX), tpu3, gamma_star,
            _lerp(table, row, fraction, C3_RD), inverse_co2)


@numba.njit(inline="always", **_JIT)
def _c3_light(state, scalars, absorbed_par, co2_pa):
    """c3.fvcb_rates for one absorbed PAR [µmol m-2 s-1]: (net, gross, photorespiration)."""
    rate_rubisco, inverse_light_denominator, jmax, tpu3, gamma_star, rd, inverse_co2 = state
    i2 = absorbed_par * (1.0 - scalars[6]) / 2.0
    saturating = _hyperbola(i2, jmax, scalars[5])
    electron_transport = i2 if scalars[7] == 1.0 else saturating
    # J / (4C + 8Γ*), or inf where 4C + 8Γ* = 0 (c3.fvcb_rates)
    rate_light = electron_transport * inverse_light_denominator if inverse_light_denominator < np.inf else np.inf
    rate = rate_light if rate_light < rate_rubisco else rate_rubisco
    tpu_limited = scalars[8] != 1.0 and tpu3 < rate * co2_pa
    rate = tpu3 * inverse_co2 if tpu_limited else rate
    gross = rate * (co2_pa - gamma_star)
    return gross - rd, gross, rate * gamma_star


@numba.njit(inline="always", **_JIT)
def _c4_state(model, table, row, fraction, scalars, co2_pa, o2_pa, capacity_scale):
    """Light-independent terms of c4.collatz_c4_rates or c4.caemmerer_c4_rates (five numbers)."""
    if model == MODEL_COLLATZ1992:
        enzyme = _lerp(table, row, fraction, COLLATZ_ENZYME) * capacity_scale
        respiration = _lerp(table, row, fraction, COLLATZ_RESPIRATION)
        co2_limited = _lerp(table, row, fraction, COLLATZ_K) * co2_pa
        return enzyme, respiration, co2_limited, 0.0, 0.0
    # von Caemmerer (2000): the enzyme-limited rate does not depend on light.
    kc = _lerp(table, row, fraction, VC_KC)
    ko = _lerp(table, row, fraction, VC_KO)
    gamma_star = _lerp(table, row, fraction, VC_GAMMA_PER_O2) * o2_pa
    kp = _lerp(table, row, fraction, VC_KP)
    vcmax = _lerp(table, row, fraction, VC_VCMAX) * capacity_scale
    vpmax = _lerp(table, row, fraction, VC_VPMAX) * capacity_scale
    vpr = _lerp(table, row, fraction, VC_VPR)
    rd = _lerp(table, row, fraction, VC_RD)
    rm = scalars[9] * rd
    gbs = scalars[7]
    km = kc * (1.0 + o2_pa / ko)
    pepc_co2_limited = co2_pa * vpmax / (co2_pa + kp)
    vp_enzyme = vpr if vpr < pepc_co2_limited else pepc_co2_limited
    mesophyll_supply = vp_enzyme - rm + gbs * co2_pa
    enzyme_limited = _smaller_root_monic(
        -(mesophyll_supply + vcmax - rd + gbs * km),
        (vcmax - rd) * mesophyll_supply - (vcmax * gbs * gamma_star + rd * gbs * km))
    return enzyme_limited, rd, _lerp(table, row, fraction, VC_JMAX), -rm + gbs * co2_pa, gbs * gamma_star


@numba.njit(inline="always", **_JIT)
def _c4_light(model, state, scalars, absorbed_par):
    """c4 rates for one absorbed PAR [µmol m-2 s-1]: (net, gross)."""
    if model == MODEL_COLLATZ1992:
        enzyme, respiration, co2_limited = state[0], state[1], state[2]
        enzyme_light = _hyperbola(enzyme, scalars[5] * absorbed_par, scalars[6])
        gross = _hyperbola(enzyme_light, co2_limited, scalars[7])
        return gross - respiration, gross
    enzyme_limited, rd, jmax, supply_without_light, gbs_gamma_star = state
    x = scalars[8]
    electron_transport = _hyperbola(absorbed_par * (1.0 - scalars[6]) / 2.0, jmax, scalars[5])
    vp_light = x * electron_transport / 2.0
    bundle_sheath_electron = (1.0 - x) * electron_transport / 3.0
    light_supply = vp_light + supply_without_light
    light_limited = _smaller_root_monic(
        -(light_supply + bundle_sheath_electron - rd + 7.0 * gbs_gamma_star / 3.0),
        (bundle_sheath_electron - rd) * light_supply - gbs_gamma_star * (bundle_sheath_electron + 7.0 * rd / 3.0))
    net = light_limited if light_limited < enzyme_limited else enzyme_limited
    return net, net + rd


@numba.njit(inline="always", **_JIT)
def _moment(c4_model, setup, lane, temperature, sunlit_par, shaded_par, sunlit_lai, shaded_lai, humidity_kind,
            c3_scalars, c3_table, c4_scalars, c4_table, table_start, table_inverse_step, last_row):
    """Canopy rates of both pathways at one moment [µmol m-2 s-1]: C3 net, gross, photorespiration, C4
    net, gross, and 1.0 where the moment is invalid (temperature outside −60..60 °C) else 0.0."""
    valid = temperature >= -60.0 and temperature <= 60.0
    t = temperature if valid else 25.0
    # atmosphere.vapour_pressure_deficit with e° of FAO-56 eq. 11, or the given VPD
    position = (t - table_start) * table_inverse_step
    row = min(max(int(math.floor(position)), 0), last_row)
    fraction = position - row
    saturation = _lerp(c3_table, row, fraction, C3_SATURATION_VP)  # atmosphere.saturation_vapour_pressure
    vpd = setup[_S_HUMIDITY, lane] if humidity_kind == HUMIDITY_VPD else _non_negative(
        saturation - setup[_S_HUMIDITY, lane])
    sqrt_vpd = math.sqrt(vpd)
    water = setup[_S_WATER, lane]
    co2_per_ratio = setup[_S_CO2_PER_RATIO, lane]
    o2_pa = setup[_S_O2, lane]
    c3_co2_pa = co2_per_ratio * _ci_ratio(c3_scalars, sqrt_vpd, water)
    c4_co2_pa = co2_per_ratio * _ci_ratio(c4_scalars, sqrt_vpd, water)
    state3 = _c3_state(c3_table, row, fraction, c3_scalars, c3_co2_pa, o2_pa, setup[_S_C3_SCALE, lane])
    state4 = _c4_state(c4_model, c4_table, row, fraction, c4_scalars, c4_co2_pa, o2_pa, setup[_S_C4_SCALE, lane])
    net_sun, gross_sun, photo_sun = _c3_light(state3, c3_scalars, sunlit_par, c3_co2_pa)
    net_shade, gross_shade, photo_shade = _c3_light(state3, c3_scalars, shaded_par, c3_co2_pa)
    net4_sun, gross4_sun = _c4_light(c4_model, state4, c4_scalars, sunlit_par)
    net4_shade, gross4_shade = _c4_light(c4_model, state4, c4_scalars, shaded_par)
    return (net_sun * sunlit_lai + net_shade * shaded_lai,
            gross_sun * sunlit_lai + gross_shade * shaded_lai,
            photo_sun * sunlit_lai + photo_shade * shaded_lai,
            net4_sun * sunlit_lai + net4_shade * shaded_lai,
            gross4_sun * sunlit_lai + gross4_shade * shaded_lai,
            0.0 if valid else 1.0)


@numba.njit(inline="always", **_JIT)
def _light_of_pair(setup, moment, node, constants):
    """Absorbed PAR per leaf and leaf areas of the sunlit and shaded leaves at t = 12 ± (N/2) x, and the
    temperatures of both moments (canopy._canopy_rates, canopy.daily_temperature), for every lane."""
    par_per_shortwave = constants[0]
    atmospheric_factor = constants[1]
    scattering = constants[2]
    min_sin_elevation = constants[5]
    # Temperature peaks at constants[6] h: cos(2π (t − t_peak)/24) = cos(θ − φ) with θ = π (t − 12)/12.
    peak_phase = 2.0 * math.pi * (constants[6] - 12.0) / 24.0
    cos_peak = math.cos(peak_phase)
    sin_peak = math.sin(peak_phase)
    # light.sun_shade_absorbed_par: kb' = kb √(1 − σ), kd' = kd √(1 − σ), ρh of canopy_beam_reflection.
    root = math.sqrt(1.0 - scattering)
    horizontal_reflection = (1.0 - root) / (1.0 + root)
    kd_scattered = constants[3] * root
    diffuse_transmitted = 1.0 - constants[4]
    scattered_share = root / (root + 1.0)
    for lane in range(BATCH):
        # θ = π (t − 12) / 12 = ωs x, as N = 24 ωs / π (light.day_length)
        sin_theta, cos_theta = _sincos(setup[_S_OMEGA, lane] * node)
        sin_b = setup[_S_A, lane] + setup[_S_B, lane] * cos_theta  # light.sin_solar_elevation
        # light.shortwave_daily_course, global (c = 0.4) and diffuse (c = 0) [W m-2]
        sun_up = sin_b > 0.0
        sb = sin_b if sun_up else 0.0
        # setup holds 1 / ∫ (0 where the integral is 0: no daylight, no radiation)
        global_w = (1e6 * setup[_S_SHORTWAVE, lane] * sb * (1.0 + atmospheric_factor * sb)
                    * setup[_S_INTEGRAL_GLOBAL, lane])
        diffuse_w = 1e6 * setup[_S_DIFFUSE, lane] * sb * setup[_S_INTEGRAL_DIFFUSE, lane]
        diffuse_w = global_w if diffuse_w > global_w else diffuse_w
        diffuse_par = diffuse_w * par_per_shortwave
        beam_par = global_w * par_per_shortwave - diffuse_par
        # light.sun_shade_absorbed_par (de Pury & Farquhar 1997); E(k) = 1 − exp(−k L) and
        # E(k1 + k2) = E1 + E2 − E1 E2, so only two exponentials depend on the moment.
        leaf_area = setup[_S_LAI, lane]
        e_kd = setup[_S_E_KD, lane]
        sin_floor = sin_b if sin_b > min_sin_elevation else min_sin_elevation
        kb = 0.5 / sin_floor
        kb_scattered = kb * root
        beam_reflection = -_expm1(-2.0 * horizontal_reflection * kb / (1.0 + kb))
        absorbed_beam = (1.0 - beam_reflection) * beam_par
        absorbed_diffuse = diffuse_transmitted * diffuse_par
        e_kb = -_expm1(-kb * leaf_area)
        e_kbs = -_expm1(-kb_scattered * leaf_area)
        e_2kb = e_kb * (2.0 - e_kb)
        diffuse_to_sunlit = kd_scattered / (kd_scattered + kb) * (e_kd + e_kb - e_kd * e_kb)
        scattered_to_sunlit = scattered_share * (e_kbs + e_kb - e_kbs * e_kb)  # kb'/(kb' + kb), a constant
        direct = beam_par * (1.0 - scattering)
        sunlit = (direct * e_kb + absorbed_diffuse * diffuse_to_sunlit
                  + absorbed_beam * scattered_to_sunlit - direct * e_2kb / 2.0)
        shaded = (absorbed_diffuse * (e_kd - diffuse_to_sunlit)
                  + absorbed_beam * (e_kbs - scattered_to_sunlit)
                  - direct * (e_kb - e_2kb / 2.0))
        sunlit_lai = e_kb * (2.0 * sin_floor)  # E(kb) / kb
        shaded_lai = _non_negative(leaf_area - sunlit_lai)
        sunlit_par = _non_negative(sunlit) / (sunlit_lai if sunlit_lai > 0.0 else 1.0)
        shaded_par = _non_negative(shaded) / (shaded_lai if shaded_lai > 0.0 else 1.0)
        moment[_M_SUNLIT_PAR, lane] = sunlit_par if sunlit_lai > 0.0 else 0.0
        moment[_M_SHADED_PAR, lane] = shaded_par if shaded_lai > 0.0 else 0.0
        moment[_M_SUNLIT_LAI, lane] = sunlit_lai
        moment[_M_SHADED_LAI, lane] = shaded_lai
        # canopy.daily_temperature at t = 12 + (N/2) x (afternoon) and 12 − (N/2) x (morning)
        mean_t = setup[_S_MEAN_T, lane]
        amplitude_t = setup[_S_AMPLITUDE_T, lane]
        moment[_M_TEMPERATURE_AFTER, lane] = mean_t + amplitude_t * (cos_theta * cos_peak + sin_theta * sin_peak)
        moment[_M_TEMPERATURE_BEFORE, lane] = mean_t + amplitude_t * (cos_theta * cos_peak - sin_theta * sin_peak)


@numba.njit(inline="always", **_JIT)
def _dark_night(setup, moment, node, constants):
    """Temperature at t = ((24 − N)/2) x around midnight, with every leaf dark (canopy._dark_canopy_net):
    the dark leaf counts with the whole LAI."""
    midnight_phase = 2.0 * math.pi * (0.0 - constants[6]) / 24.0
    cos_midnight = math.cos(midnight_phase)
    sin_midnight = math.sin(midnight_phase)
    for lane in range(BATCH):
        # cos(2π (t − t_peak)/24) = cos(α + ψ), α = 2π t / 24, ψ the phase at midnight
        sin_alpha, cos_alpha = _sincos(2.0 * math.pi * setup[_S_HALF_NIGHT_H, lane] * node / 24.0)
        moment[_M_TEMPERATURE_AFTER, lane] = setup[_S_MEAN_T, lane] + setup[_S_AMPLITUDE_T, lane] * (
            cos_alpha * cos_midnight - sin_alpha * sin_midnight)
        moment[_M_SUNLIT_PAR, lane] = 0.0
        moment[_M_SHADED_PAR, lane] = 0.0
        moment[_M_SUNLIT_LAI, lane] = setup[_S_LAI, lane]
        moment[_M_SHADED_LAI, lane] = 0.0


@numba.njit(inline="always", **_JIT)
def _integrate_batch(c4_model, setup, moment, acc, humidity_kind, c3_scalars, c3_table, c4_scalars, c4_table,
                     table_start, table_inverse_step, day_nodes, day_weights, night_nodes, night_weights,
                     constants):
    """Add every Gauss moment of the day and the night to acc (canopy._gauss_integral).

    Daylight moments t = 12 ± (N/2) x come in pairs that see the same sun elevation (sin β is even in
    t − 12), so the light is computed once per pair; each moment then runs the same lane loop.
    """
    last_row = c3_table.shape[0] - 2
    n_day = day_nodes.shape[0]
    n_pairs = (n_day + 1) // 2
    n_day_moments = 2 * n_pairs
    for k in range(n_day_moments + night_nodes.shape[0]):
        daylight = k < n_day_moments
        if daylight:
            pair = k // 2
            afternoon = k % 2 == 0
            if afternoon:
                _light_of_pair(setup, moment, day_nodes[n_day - 1 - pair], constants)
            if afternoon:
                node_weight = day_weights[n_day - 1 - pair]
            else:  # an odd middle node (x = 0) is counted once
                node_weight = 0.0 if n_day - 1 - pair == pair else day_weights[pair]
            temperature_row = _M_TEMPERATURE_AFTER if afternoon else _M_TEMPERATURE_BEFORE
        else:
            point = k - n_day_moments
            _dark_night(setup, moment, night_nodes[point], constants)
            node_weight = night_weights[point]
            temperature_row = _M_TEMPERATURE_AFTER
        gross_share = 1.0 if daylight else 0.0  # gross and photorespiration count in daylight only
        for lane in range(BATCH):
            seconds = node_weight * (setup[_S_HALF_DAY_S, lane] if daylight else setup[_S_HALF_NIGHT_H, lane] * 3600.0)
            rates = _moment(c4_model, setup, lane, moment[temperature_row, lane], moment[_M_SUNLIT_PAR, lane],
                            moment[_M_SHADED_PAR, lane], moment[_M_SUNLIT_LAI, lane], moment[_M_SHADED_LAI, lane],
                            humidity_kind, c3_scalars, c3_table, c4_scalars, c4_table, table_start,
                            table_inverse_step, last_row)
            acc[_A_C3_NET, lane] += seconds * rates[0]
            acc[_A_C3_GROSS, lane] += gross_share * (seconds * rates[1])
            acc[_A_C3_PHOTO, lane] += gross_share * (seconds * rates[2])
            acc[_A_C4_NET, lane] += seconds * rates[3]
            acc[_A_C4_GROSS, lane] += gross_share * (seconds * rates[4])
            acc[_A_BAD, lane] += rates[5]


@numba.njit(inline="always", **_JIT)
def _fill_harmless(setup, lane, constants):
    # A valid, finite day for lanes whose cell is invalid or beyond the last cell (result discarded).
    for field in range(_N_SETUP):
        setup[field, lane] = 1.0
    setup[_S_OMEGA, lane] = 0.5 * math.pi
    setup[_S_A, lane] = 0.0
    setup[_S_SHORTWAVE, lane] = 0.0
    setup[_S_DIFFUSE, lane] = 0.0
    setup[_S_MEAN_T, lane] = 20.0
    setup[_S_AMPLITUDE_T, lane] = 0.0
    setup[_S_HALF_DAY_S, lane] = 21600.0
    setup[_S_HALF_NIGHT_H, lane] = 6.0
    setup[_S_E_KD, lane] = 0.5
    setup[_S_CO2_PER_RATIO, lane] = 40.0
    setup[_S_O2, lane] = 21000.0


@numba.njit(inline="always", **_JIT)
def _setup_cell(cells, lane, cell, latitude, elevation, lai, co2_ppm, o2_percent, constants):
    """The quantities of one cell that do not change with the month (canopy._prepare)."""
    latitude_deg = latitude[cell]
    elevation_m = elevation[cell]
    leaf_area = lai[cell]
    valid = (elevation_m >= -500.0 and elevation_m <= 9000.0 and latitude_deg >= -90.0 and latitude_deg <= 90.0
             and leaf_area >= 0.0 and leaf_area < np.inf and co2_ppm > 0.0 and o2_percent >= 0.0
             and o2_percent <= 100.0)
    if not valid:
        latitude_deg = elevation_m = 0.0
        leaf_area = 1.0
    pressure = 101.3 * ((293.0 - 0.0065 * elevation_m) / 293.0) ** 5.26  # FAO-56 eq. 7
    phi = math.radians(latitude_deg)
    kd_scattered = constants[3] * math.sqrt(1.0 - constants[2])
    cells[_C_VALID, lane] = 1.0 if valid else 0.0
    cells[_C_SIN_PHI, lane] = math.sin(phi)
    cells[_C_COS_PHI, lane] = math.cos(phi)
    cells[_C_TAN_PHI, lane] = math.tan(phi)
    cells[_C_LAI, lane] = leaf_area
    cells[_C_E_KD, lane] = -math.expm1(-kd_scattered * leaf_area)
    cells[_C_CO2_PER_RATIO, lane] = co2_ppm * pressure * 1e-3  # rubisco.co2_partial_pressure_pa, Ci = ratio Ca
    cells[_C_O2, lane] = o2_percent * pressure * 10.0  # rubisco.o2_partial_pressure_pa


@numba.njit(inline="always", **_JIT)
def _setup_lane(setup, cells, lane, cell, month, tmin, tmax, shortwave, water, humidity, humidity_kind, season,
                sin_declination, cos_declination, tan_declination, relative_distance, c3_scalars, c4_scalars,
                constants):
    """The day's quantities of one cell and month (canopy._prepare); False where the result is NaN."""
    t_low = tmin[cell, month]
    t_high = tmax[cell, month]
    daily_shortwave = shortwave[cell, month]
    w = water[cell, month]
    if not (cells[_C_VALID, lane] == 1.0 and season[cell, month] and t_low >= -60.0 and t_high <= 60.0
            and t_low <= t_high and daily_shortwave >= 0.0 and daily_shortwave < np.inf and w >= 0.0 and w <= 1.0):
        return False
    if humidity_kind == HUMIDITY_VPD or humidity_kind == HUMIDITY_VAPOUR_PRESSURE:
        given = humidity[cell, month]
        if not (given >= 0.0 and given < np.inf):
            return False
        setup[_S_HUMIDITY, lane] = given
    else:  # atmosphere.actual_vapour_pressure_from_tmin, FAO-56 eqs. 11, 48
        setup[_S_HUMIDITY, lane] = 0.6108 * math.exp(17.27 * t_low / (t_low + 237.3))
    # light.sunset_hour_angle (FAO-56 eq. 25); sin β = a + b cos ω
    omega_s = math.acos(min(max(-cells[_C_TAN_PHI, lane] * tan_declination, -1.0), 1.0))
    a = cells[_C_SIN_PHI, lane] * sin_declination
    b = cells[_C_COS_PHI, lane] * cos_declination
    sin_omega = math.sin(omega_s)
    # light.extraterrestrial_radiation (FAO-56 eq. 21), the daily clearness and diffuse share
    extraterrestrial = 24.0 * 60.0 / math.pi * 0.0820 * relative_distance * (omega_s * a + b * sin_omega)
    clearness = daily_shortwave / extraterrestrial if extraterrestrial > 0.0 else 0.0
    # light.daylight_integral_of_sin_elevation, with and without the atmospheric factor
    integral_sin = 24.0 / math.pi * (a * omega_s + b * sin_omega)
    integral_sin2 = 12.0 / math.pi * (2.0 * a * a * omega_s + 4.0 * a * b * sin_omega
                                      + b * b * (omega_s + sin_omega * math.cos(omega_s)))
    day_hours = 24.0 / math.pi * omega_s  # light.day_length, FAO-56 eq. 34
    setup[_S_OMEGA, lane] = omega_s
    setup[_S_A, lane] = a
    setup[_S_B, lane] = b
    integral_global = 3600.0 * (integral_sin + constants[1] * integral_sin2)
    integral_diffuse = 3600.0 * integral_sin
    # Stored as inverses, 0 where the integral is not positive (light.shortwave_daily_course gives 0 there).
    setup[_S_INTEGRAL_GLOBAL, lane] = 1.0 / integral_global if integral_global > 0.0 else 0.0
    setup[_S_INTEGRAL_DIFFUSE, lane] = 1.0 / integral_diffuse if integral_diffuse > 0.0 else 0.0
    setup[_S_SHORTWAVE, lane] = daily_shortwave
    setup[_S_DIFFUSE, lane] = _diffuse_fraction_daily(clearness) * daily_shortwave
    setup[_S_MEAN_T, lane] = 0.5 * (t_high + t_low)
    setup[_S_AMPLITUDE_T, lane] = 0.5 * (t_high - t_low)
    setup[_S_HALF_DAY_S, lane] = 0.5 * day_hours * 3600.0
    setup[_S_HALF_NIGHT_H, lane] = 0.5 * (24.0 - day_hours)
    setup[_S_LAI, lane] = cells[_C_LAI, lane]
    setup[_S_E_KD, lane] = cells[_C_E_KD, lane]
    setup[_S_WATER, lane] = w
    setup[_S_CO2_PER_RATIO, lane] = cells[_C_CO2_PER_RATIO, lane]
    setup[_S_O2, lane] = cells[_C_O2, lane]
    setup[_S_C3_SCALE, lane] = w if c3_scalars[3] == 1.0 else 1.0  # stomata.capacity_scale
    setup[_S_C4_SCALE, lane] = w if c4_scalars[3] == 1.0 else 1.0
    return True


@numba.njit(inline="always", **_JIT)
def _monthly_cells(c4_model, tmin, tmax, shortwave, water, humidity, humidity_kind, latitude, elevation, lai,
                   season, days, co2_ppm, o2_percent, c3_scalars, c3_table, c4_scalars, c4_table, table_start,
                   table_inverse_step, day_nodes, day_weights, night_nodes, night_weights, constants, weights, out,
                   totals):
    """Fill out[field, cell, month] with the first out.shape[0] of C3 net, C4 net, C3 gross, C3
    photorespiration, C4 gross [g C m-2 d-1], and add weights[month] x C3 gross and photorespiration of
    the season months to totals[0, cell] and totals[1, cell] [g C m-2].

    Follows canopy._prepare, canopy._gauss_integral and canopy._canopy_rates (see there for the
    equations and sources). ``day_nodes`` must be symmetric about 0, as numpy's leggauss returns them.
    """
    n = tmin.shape[0]
    setup = _setup_array()
    cells = _cell_array()
    moment = _moment_array()
    acc = _acc_array()
    to_carbon = constants[7]
    two_pi = 2.0 * math.pi
    for start in range(0, n, BATCH):
        for lane in range(BATCH):
            if start + lane < n:
                _setup_cell(cells, lane, start + lane, latitude, elevation, lai, co2_ppm, o2_percent, constants)
            else:
                cells[_C_VALID, lane] = 0.0
        for month in range(12):
            # light.solar_declination, inverse_relative_distance (FAO-56 eqs. 23, 24)
            doy = days[month]
            doy_valid = doy >= 1.0 and doy <= 366.0
            declination = 0.409 * math.sin(two_pi * doy / 365.0 - 1.39)
            relative_distance = 1.0 + 0.033 * math.cos(two_pi * doy / 365.0)
            sin_declination = math.sin(declination)
            cos_declination = math.cos(declination)
            tan_declination = math.tan(declination)
            any_valid = False
            for lane in range(BATCH):
                cell = start + lane
                valid = doy_valid and cells[_C_VALID, lane] == 1.0 and _setup_lane(
                    setup, cells, lane, cell, month, tmin, tmax, shortwave, water, humidity, humidity_kind, season,
                    sin_declination, cos_declination, tan_declination, relative_distance, c3_scalars, c4_scalars,
                    constants)
                if not valid:
                    _fill_harmless(setup, lane, constants)
                for field in range(_N_ACC):
                    acc[field, lane] = 0.0
                acc[_A_BAD, lane] = 0.0 if valid else 1.0
                any_valid = any_valid or valid
            if any_valid:  # a batch of nodata or out-of-season cells is not computed at all
                _integrate_batch(c4_model, setup, moment, acc, humidity_kind, c3_scalars, c3_table, c4_scalars,
                                 c4_table, table_start, table_inverse_step, day_nodes, day_weights, night_nodes,
                                 night_weights, constants)
            for lane in range(min(BATCH, n - start)):
                cell = start + lane
                good = acc[_A_BAD, lane] == 0.0
                for field in range(out.shape[0]):
                    out[field, cell, month] = acc[field, lane] * to_carbon if good else np.nan
                if season[cell, month]:  # as np.where(in_season, days * daily, 0).sum(): NaN propagates
                    totals[0, cell] += weights[month] * (acc[_A_C3_GROSS, lane] * to_carbon if good else np.nan)
                    totals[1, cell] += weights[month] * (acc[_A_C3_PHOTO, lane] * to_carbon if good else np.nan)


# One compiled entry point per C4 model, so that a run compiles (once, then numba's cache) only its own.
@numba.njit(**_JIT)
def _monthly_cells_collatz(
        tmin, tmax, shortwave, water, humidity, humidity_kind, latitude, elevation, lai, season, days, co2_ppm,
        o2_percent, c3_scalars, c3_table, c4_scalars, c4_table, table_start, table_inverse_step, day_nodes,
        day_weights, night_nodes, night_weights, constants, weights, out, totals):
    _monthly_cells(
        MODEL_COLLATZ1992,
        tmin, tmax, shortwave, water, humidity, humidity_kind, latitude, elevation, lai, season, days, co2_ppm,
        o2_percent, c3_scalars, c3_table, c4_scalars, c4_table, table_start, table_inverse_step, day_nodes,
        day_weights, night_nodes, night_weights, constants, weights, out, totals)


@numba.njit(**_JIT)
def _monthly_cells_caemmerer(
        tmin, tmax, shortwave, water, humidity, humidity_kind, latitude, elevation, lai, season, days, co2_ppm,
        o2_percent, c3_scalars, c3_table, c4_scalars, c4_table, table_start, table_inverse_step, day_nodes,
        day_weights, night_nodes, night_weights, constants, weights, out, totals):
    _monthly_cells(
        MODEL_VC2000,
        tmin, tmax, shortwave, water, humidity, humidity_kind, latitude, elevation, lai, season, days, co2_ppm,
        o2_percent, c3_scalars, c3_table, c4_scalars, c4_table, table_start, table_inverse_step, day_nodes,
        day_weights, night_nodes, night_weights, constants, weights, out, totals)
