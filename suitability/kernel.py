"""The daily sun/shade canopy model of both pathways, fused per cell and compiled with numba.

:func:`monthly_canopy_assimilation` gives, for every cell and the representative day of every month of
the season, what :func:`suitability.physiology.daily_canopy_assimilation` gives for C3 and for C4 (net,
and for C3 gross and photorespiration), in one compiled pass over the cells. It is the production path of
:mod:`suitability.model` (``compute.engine: compiled``); the numpy physiology stays the reference
(``compute.engine: numpy``) and tests/test_kernel.py holds the two within 1e-4 relative.

Same equations, arranged for speed (each step keeps the numpy model's results to well under 1e-4):

* Per cell, the day's astronomy (FAO-56 eqs. 21-25, 34), the clearness and diffuse share (Spitters et al.
  1986 eq. 2), the daily radiation integrals and the air pressure (FAO-56 eq. 7) are computed once; per
  Gauss point the sun/shade light climate (de Pury & Farquhar 1997) and the temperature (the cosine of
  :func:`suitability.physiology.canopy.daily_temperature`) are computed once and shared by the sunlit and
  the shaded leaf of both pathways. The quadrature is exactly that of the numpy model
  (:data:`~suitability.physiology.canopy.DAY_GAUSS_POINTS` Gauss-Legendre points over daylight,
  :data:`~suitability.physiology.canopy.NIGHT_GAUSS_POINTS` at night).
* Temperature-only terms (Kc, Ko, Γ*/O, Vcmax, Jmax, Tp, Rd and the C4 enzyme terms) are tabulated
  every :data:`TABLE_STEP_C` °C from −60 to 60 °C by the numpy physiology functions themselves
  (``rubisco_constants``, ``capacity_temperature_factors``, the responses of ``c4``) with the resolved
  parameters, and interpolated linearly. The linear-interpolation error is at most h²/8 · max|f''/f|;
  the most curved term is the Collatz et al. (1992) respiration cut-off 1/(1 + e^{1.3 (T − 55)}) with
  |f''/f| ≤ 1.69 K⁻², so with h = 0.01 K the error is below 2.2e-5 relative (derived here), and below
  2e-7 for the Arrhenius terms. Every parameter set and override of :mod:`.physiology.params` is
  therefore supported: the kernel takes the numbers from ``resolve_params``.
* Arithmetic is float64 inside (inputs and outputs float32/float64 as given); no fast-math flags
  (nodata NaN must propagate, and a cell's numbers must not depend on where it sits in a block).

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
import numpy as np

from .physiology import canopy as _canopy
from .physiology import light as _light
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
C3_KC, C3_KO, C3_GAMMA_PER_O2, C3_VCMAX, C3_JMAX, C3_TPU, C3_RD = range(7)
COLLATZ_ENZYME, COLLATZ_RESPIRATION, COLLATZ_K = range(3)
VC_KC, VC_KO, VC_GAMMA_PER_O2, VC_KP, VC_VCMAX, VC_VPMAX, VC_VPR, VC_RD, VC_JMAX = range(9)

# Layout of the scalar parameter vectors.
# both pathways: 0 g1, 1 fixed Ci/Ca, 2 stomatal model is "fixed" (1.0) or Medlyn (0.0),
# 3 water stress also scales the carboxylation capacity (1.0 / 0.0), 4 model code (below).
# C3: 5 theta, 6 spectral correction f, 7 Jmax unlimited (1.0 / 0.0), 8 Tp unlimited (1.0 / 0.0).
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
    columns = [kc, ko, gamma_per_o2, p["vcmax25"] * vcmax_f,
               np.zeros_like(t) if jmax_unlimited else p["jmax25"] * jmax_f,
               np.zeros_like(t) if tpu_unlimited else p["tpu25"] * vcmax_f,
               p["rd25"] * rd_f]
    scalars = _stomatal_scalars(p) + [float(p["theta"]), float(p["spectral_correction"]),
                                      1.0 if jmax_unlimited else 0.0, 1.0 if tpu_unlimited else 0.0]
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
        array = np.asarray(values)
        if array.shape != shape + (12,):
            raise ValueError(f"{name}: expected shape {shape + (12,)}, got {array.shape}")
        return np.ascontiguousarray(array.reshape(n, 12))

    def cells(values, name, default):
        if values is None:
            return np.full(n, default, np.float64)
        array = np.broadcast_to(np.asarray(values), shape)
        return np.ascontiguousarray(array.reshape(n))

    if vpd_kpa is not None:
        humidity_kind, humidity = HUMIDITY_VPD, cells_by_month(vpd_kpa, "vpd_kpa")
    elif actual_vapour_pressure_kpa is not None:
        humidity_kind = HUMIDITY_VAPOUR_PRESSURE
        humidity = cells_by_month(actual_vapour_pressure_kpa, "actual_vapour_pressure_kpa")
    else:
        humidity_kind, humidity = HUMIDITY_FROM_TMIN, np.zeros((1, 12), np.float32)
    season = (np.ones((n, 12), np.bool_) if in_season is None
              else np.ascontiguousarray(np.broadcast_to(np.asarray(in_season, bool), shape + (12,)).reshape(n, 12)))
    days = np.asarray(day_of_year, np.float64).reshape(12)
    day_nodes, day_weights = np.polynomial.legendre.leggauss(_canopy.DAY_GAUSS_POINTS)
    night_nodes, night_weights = np.polynomial.legendre.leggauss(_canopy.NIGHT_GAUSS_POINTS)
    out = np.empty((5, n, 12), np.float64)
    _monthly_cells(
        cells_by_month(tmin_c, "tmin_c"), cells_by_month(tmax_c, "tmax_c"),
        cells_by_month(shortwave_mj, "shortwave_mj"), cells_by_month(water_availability, "water_availability"),
        humidity, humidity_kind, cells(latitude_deg, "latitude_deg", 0.0), cells(elevation_m, "elevation_m", 0.0),
        cells(lai, "lai", default_lai), season, days, float(co2_ppm), float(o2_percent),
        c3.scalars, c3.table, c4.scalars, c4.table, c3.start_c, 1.0 / c3.step_c,
        day_nodes, day_weights, night_nodes, night_weights, _constants(), out,
    )
    out = out.reshape((5,) + shape + (12,))
    return MonthlyCanopyAssimilation(*out)


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
# error_model="numpy": a division by zero gives inf/NaN as in numpy instead of raising.
# ---------------------------------------------------------------------------------------------------------
_JIT = dict(cache=True, nogil=True, error_model="numpy")


@numba.njit(inline="always", **_JIT)
def _non_negative(value):
    # np.maximum(value, 0.0): NaN stays NaN.
    return 0.0 if value < 0.0 else value


@numba.njit(inline="always", **_JIT)
def _hyperbola(rate_a, rate_b, curvature):
    # c3.non_rectangular_hyperbola: smaller root of θ x² − (a + b) x + a b = 0.
    total = rate_a + rate_b
    product = rate_a * rate_b
    denominator = total + math.sqrt(_non_negative(total * total - 4.0 * curvature * product))
    return 2.0 * product / denominator if denominator > 0.0 else 0.0


@numba.njit(inline="always", **_JIT)
def _smaller_root_monic(b, c):
    # c4._smaller_root_monic: smaller root of A² + bA + c = 0.
    denominator = math.sqrt(_non_negative(b * b - 4.0 * c)) - b
    return 2.0 * c / denominator if denominator != 0.0 else -b


@numba.njit(inline="always", **_JIT)
def _saturation_vapour_pressure(temperature):
    # atmosphere.saturation_vapour_pressure, FAO-56 eq. 11 (NaN outside −60..60 °C).
    if temperature >= -60.0 and temperature <= 60.0:
        return 0.6108 * math.exp(17.27 * temperature / (temperature + 237.3))
    return np.nan


@numba.njit(inline="always", **_JIT)
def _daily_course(daily_mj, sin_elevation, integral_s, atmospheric_factor):
    # light.shortwave_daily_course: Sg(t) = Sg,day sin β (1 + c sin β) / ∫ sin β (1 + c sin β) dt [W m-2].
    if not daily_mj >= 0.0:
        return np.nan
    if sin_elevation > 0.0 and integral_s > 0.0:
        return 1e6 * daily_mj * sin_elevation * (1.0 + atmospheric_factor * sin_elevation) / integral_s
    return 0.0


@numba.njit(inline="always", **_JIT)
def _diffuse_fraction_daily(clearness):
    # light.diffuse_fraction_daily, Spitters et al. (1986) eq. 2.
    if not clearness >= 0.0:
        return np.nan
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
    if scalars[2] == 1.0:
        return scalars[1]
    slope = scalars[0] * water
    denominator = slope + sqrt_vpd
    return slope / denominator if denominator > 0.0 else 0.0


@numba.njit(inline="always", **_JIT)
def _lerp(table, row, fraction, column):
    low = table[row, column]
    return low + fraction * (table[row + 1, column] - low)


# A leaf model is split in two: the part that depends on temperature and CO2 only (computed once per
# moment and shared by the sunlit and the shaded leaf) and the part that depends on the absorbed light.

@numba.njit(inline="always", **_JIT)
def _c3_state(table, row, fraction, co2_pa, o2_pa, capacity_scale):
    """c3.c3_assimilation / c3.fvcb_rates, light-independent terms [Pa, µmol m-2 s-1]."""
    kc = _lerp(table, row, fraction, C3_KC)
    ko = _lerp(table, row, fraction, C3_KO)
    gamma_star = _lerp(table, row, fraction, C3_GAMMA_PER_O2) * o2_pa
    vcmax = _lerp(table, row, fraction, C3_VCMAX) * capacity_scale
    rate_rubisco = vcmax / (co2_pa + kc * (1.0 + o2_pa / ko))
    light_denominator = 4.0 * co2_pa + 8.0 * gamma_star
    return (rate_rubisco, light_denominator, _lerp(table, row, fraction, C3_JMAX),
            3.0 * _lerp(table, row, fraction, C3_TPU), gamma_star, _lerp(table, row, fraction, C3_RD))


@numba.njit(inline="always", **_JIT)
def _c3_light(state, scalars, absorbed_par, co2_pa):
    """c3.fvcb_rates for one absorbed PAR [µmol m-2 s-1]: (net, gross, photorespiration)."""
    rate_rubisco, light_denominator, jmax, tpu3, gamma_star, rd = state
    i2 = absorbed_par * (1.0 - scalars[6]) / 2.0
    electron_transport = i2 if scalars[7] == 1.0 else _hyperbola(i2, jmax, scalars[5])
    rate_light = electron_transport / light_denominator if light_denominator > 0.0 else np.inf
    rate = rate_light if rate_light < rate_rubisco else rate_rubisco
    if scalars[8] != 1.0 and tpu3 < rate * co2_pa:
        rate = tpu3 / co2_pa
    gross = rate * (co2_pa - gamma_star)
    return gross - rd, gross, rate * gamma_star


@numba.njit(inline="always", **_JIT)
def _c4_state(table, row, fraction, scalars, co2_pa, o2_pa, capacity_scale):
    """Light-independent terms of c4.collatz_c4_rates or c4.caemmerer_c4_rates (six numbers)."""
    if scalars[4] == 1.0:  # Collatz et al. (1992)
        enzyme = _lerp(table, row, fraction, COLLATZ_ENZYME) * capacity_scale
        respiration = _lerp(table, row, fraction, COLLATZ_RESPIRATION)
        co2_limited = _lerp(table, row, fraction, COLLATZ_K) * co2_pa
        return enzyme, respiration, co2_limited, 0.0, 0.0, 0.0
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
    return enzyme_limited, rd, _lerp(table, row, fraction, VC_JMAX), -rm + gbs * co2_pa, gbs * gamma_star, 0.0


@numba.njit(inline="always", **_JIT)
def _c4_light(state, scalars, absorbed_par):
    """c4 rates for one absorbed PAR [µmol m-2 s-1]: (net, gross)."""
    if scalars[4] == 1.0:
        enzyme, respiration, co2_limited = state[0], state[1], state[2]
        enzyme_light = _hyperbola(enzyme, scalars[5] * absorbed_par, scalars[6])
        gross = _hyperbola(enzyme_light, co2_limited, scalars[7])
        return gross - respiration, gross
    enzyme_limited, rd, jmax, supply_without_light, gbs_gamma_star = state[0], state[1], state[2], state[3], state[4]
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
def _table_position(temperature, table_start, table_inverse_step, last_row):
    position = (temperature - table_start) * table_inverse_step
    row = min(max(int(math.floor(position)), 0), last_row)
    return row, position - row


@numba.njit(**_JIT)
def _monthly_cells(tmin, tmax, shortwave, water, humidity, humidity_kind, latitude, elevation, lai, season,
                   days, co2_ppm, o2_percent, c3_scalars, c3_table, c4_scalars, c4_table, table_start,
                   table_inverse_step, day_nodes, day_weights, night_nodes, night_weights, constants, out):
    """Fill out[0..4, cell, month] with C3 net, gross, photorespiration and C4 net, gross [g C m-2 d-1].

    The body follows canopy._prepare, canopy._gauss_integral and canopy._canopy_rates (see there for
    the equations and sources); comments name the numpy function each step mirrors. ``day_nodes`` are
    symmetric about 0 (as numpy's leggauss returns them): the two moments at ±x share the sun's
    elevation, so the light climate is computed once for both and only the temperature differs.
    """
    nan = np.nan
    par_per_shortwave = constants[0]
    atmospheric_factor = constants[1]
    scattering = constants[2]
    min_sin_elevation = constants[5]
    to_carbon = constants[7]
    # Temperature peaks at constants[6] h: cos(2π (t − t_peak)/24) = cos(θ − φ) with θ = π (t − 12)/12.
    peak_phase = 2.0 * math.pi * (constants[6] - 12.0) / 24.0
    cos_peak = math.cos(peak_phase)
    sin_peak = math.sin(peak_phase)
    # light.sun_shade_absorbed_par: kb' = kb √(1 − σ), kd' = kd √(1 − σ), ρh of canopy_beam_reflection.
    root = math.sqrt(1.0 - scattering)
    horizontal_reflection = (1.0 - root) / (1.0 + root)
    kd_scattered = constants[3] * root
    diffuse_transmitted = 1.0 - constants[4]
    last_row = c3_table.shape[0] - 2
    o2_ok = o2_percent >= 0.0 and o2_percent <= 100.0
    c3_water_on_capacity = c3_scalars[3] == 1.0
    c4_water_on_capacity = c4_scalars[3] == 1.0
    two_pi = 2.0 * math.pi
    n_day = day_nodes.shape[0]
    n_pairs = (n_day + 1) // 2
    n_night = night_nodes.shape[0]
    temperatures = np.empty(2)
    weights = np.empty(2)

    for cell in range(tmin.shape[0]):
        latitude_deg = latitude[cell]
        elevation_m = elevation[cell]
        leaf_area = lai[cell]
        # atmosphere.air_pressure_from_elevation, FAO-56 eq. 7
        if elevation_m >= -500.0 and elevation_m <= 9000.0:
            pressure = 101.3 * ((293.0 - 0.0065 * elevation_m) / 293.0) ** 5.26
        else:
            pressure = nan
        cell_ok = (latitude_deg >= -90.0 and latitude_deg <= 90.0 and leaf_area >= 0.0
                   and pressure > 0.0 and co2_ppm > 0.0 and o2_ok)
        o2_pa = o2_percent * pressure * 10.0  # rubisco.o2_partial_pressure_pa
        co2_pa_per_ratio = co2_ppm * pressure * 1e-3  # rubisco.co2_partial_pressure_pa of Ci = ratio · Ca
        phi = math.radians(latitude_deg)
        sin_phi = math.sin(phi)
        cos_phi = math.cos(phi)
        tan_phi = math.tan(phi)
        e_kd = -math.expm1(-kd_scattered * leaf_area)

        for month in range(12):
            t_low = tmin[cell, month]
            t_high = tmax[cell, month]
            daily_shortwave = shortwave[cell, month]
            w = water[cell, month]
            doy = days[month]
            ok = (season[cell, month] and cell_ok and math.isfinite(t_low) and math.isfinite(t_high)
                  and t_low <= t_high and daily_shortwave >= 0.0 and doy >= 1.0 and doy <= 366.0
                  and w >= 0.0 and w <= 1.0)
            if not ok:
                for q in range(5):
                    out[q, cell, month] = nan
                continue
            vpd_fixed = humidity[cell, month] if humidity_kind == 1 else nan
            if humidity_kind == 2:
                vapour_pressure = humidity[cell, month]
            else:
                vapour_pressure = _saturation_vapour_pressure(t_low)  # atmosphere.actual_vapour_pressure_from_tmin
            # light.solar_declination, inverse_relative_distance, sunset_hour_angle (FAO-56 eqs. 23-25)
            declination = 0.409 * math.sin(two_pi * doy / 365.0 - 1.39)
            relative_distance = 1.0 + 0.033 * math.cos(two_pi * doy / 365.0)
            omega_s = math.acos(min(max(-tan_phi * math.tan(declination), -1.0), 1.0))
            a = sin_phi * math.sin(declination)
            b = cos_phi * math.cos(declination)
            sin_omega = math.sin(omega_s)
            # light.extraterrestrial_radiation (FAO-56 eq. 21) and the daily clearness
            extraterrestrial = 24.0 * 60.0 / math.pi * 0.0820 * relative_distance * (omega_s * a + b * sin_omega)
            clearness = daily_shortwave / extraterrestrial if extraterrestrial > 0.0 else 0.0
            daily_diffuse = _diffuse_fraction_daily(clearness) * daily_shortwave
            # light.daylight_integral_of_sin_elevation, with and without the atmospheric factor
            integral_sin = 24.0 / math.pi * (a * omega_s + b * sin_omega)
            integral_sin2 = 12.0 / math.pi * (2.0 * a * a * omega_s + 4.0 * a * b * sin_omega
                                              + b * b * (omega_s + sin_omega * math.cos(omega_s)))
            integral_global_s = 3600.0 * (integral_sin + atmospheric_factor * integral_sin2)
            integral_diffuse_s = 3600.0 * integral_sin
            day_hours = 24.0 / math.pi * omega_s  # light.day_length, FAO-56 eq. 34
            mean_t = 0.5 * (t_high + t_low)
            amplitude_t = 0.5 * (t_high - t_low)
            c3_scale = w if c3_water_on_capacity else 1.0
            c4_scale = w if c4_water_on_capacity else 1.0
            c3_net = c3_gross = c3_photo = c4_net = c4_gross = 0.0

            # Daylight: Gauss-Legendre moments in pairs t = 12 ± (N/2) x (canopy._gauss_integral).
            half_day_s = 0.5 * day_hours * 3600.0
            for pair in range(n_pairs):
                node = day_nodes[n_day - 1 - pair]
                theta = math.pi * (0.5 * day_hours * node) / 12.0
                cos_theta = math.cos(theta)
                sin_theta = math.sin(theta)
                n_moments = 1 if n_day - 1 - pair == pair else 2
                weights[0] = day_weights[n_day - 1 - pair] * half_day_s
                weights[1] = day_weights[pair] * half_day_s
                # canopy.daily_temperature at t = 12 + ... (afternoon) and t = 12 − ... (morning)
                temperatures[0] = mean_t + amplitude_t * (cos_theta * cos_peak + sin_theta * sin_peak)
                temperatures[1] = mean_t + amplitude_t * (cos_theta * cos_peak - sin_theta * sin_peak)

                # canopy._canopy_rates: the light of both moments
                sin_b = a + b * cos_theta  # light.sin_solar_elevation
                global_w = _daily_course(daily_shortwave, sin_b, integral_global_s, atmospheric_factor)
                diffuse_w = _daily_course(daily_diffuse, sin_b, integral_diffuse_s, 0.0)
                if diffuse_w > global_w:
                    diffuse_w = global_w
                diffuse_par = diffuse_w * par_per_shortwave
                beam_par = global_w * par_per_shortwave - diffuse_par
                # light.sun_shade_absorbed_par (de Pury & Farquhar 1997); E(k) = 1 − exp(−k L), with
                # E(k1 + k2) = E1 + E2 − E1 E2 so that only two exponentials depend on the moment.
                kb = 0.5 / max(sin_b, min_sin_elevation)
                kb_scattered = kb * root
                beam_reflection = 1.0 - math.exp(-2.0 * horizontal_reflection * kb / (1.0 + kb))
                absorbed_beam = (1.0 - beam_reflection) * beam_par
                absorbed_diffuse = diffuse_transmitted * diffuse_par
                e_kb = -math.expm1(-kb * leaf_area)
                e_kbs = -math.expm1(-kb_scattered * leaf_area)
                e_2kb = e_kb * (2.0 - e_kb)
                diffuse_to_sunlit = kd_scattered / (kd_scattered + kb) * (e_kd + e_kb - e_kd * e_kb)
                scattered_to_sunlit = kb_scattered / (kb_scattered + kb) * (e_kbs + e_kb - e_kbs * e_kb)
                direct = beam_par * (1.0 - scattering)
                sunlit = (direct * e_kb + absorbed_diffuse * diffuse_to_sunlit
                          + absorbed_beam * scattered_to_sunlit - direct * e_2kb / 2.0)
                shaded = (absorbed_diffuse * (e_kd - diffuse_to_sunlit)
                          + absorbed_beam * (e_kbs - scattered_to_sunlit)
                          - direct * (e_kb - e_2kb / 2.0))
                sunlit_lai = e_kb / kb
                shaded_lai = _non_negative(leaf_area - sunlit_lai)
                sunlit_par = _non_negative(sunlit) / sunlit_lai if sunlit_lai > 0.0 else 0.0
                shaded_par = _non_negative(shaded) / shaded_lai if shaded_lai > 0.0 else 0.0
                if not (sunlit_par >= 0.0 and shaded_par >= 0.0 and sunlit_par < np.inf and shaded_par < np.inf):
                    ok = False

                for moment in range(n_moments):
                    temperature = temperatures[moment]
                    weight = weights[moment]
                    if not (temperature >= -60.0 and temperature <= 60.0):
                        ok = False
                        continue
                    vpd = vpd_fixed if humidity_kind == 1 else _non_negative(
                        _saturation_vapour_pressure(temperature) - vapour_pressure)  # atmosphere.vapour_pressure_deficit
                    if not (vpd >= 0.0 and vapour_pressure >= 0.0):
                        ok = False
                        continue
                    sqrt_vpd = math.sqrt(vpd)
                    row, fraction = _table_position(temperature, table_start, table_inverse_step, last_row)
                    c3_co2_pa = co2_pa_per_ratio * _ci_ratio(c3_scalars, sqrt_vpd, w)
                    c4_co2_pa = co2_pa_per_ratio * _ci_ratio(c4_scalars, sqrt_vpd, w)
                    state3 = _c3_state(c3_table, row, fraction, c3_co2_pa, o2_pa, c3_scale)
                    state4 = _c4_state(c4_table, row, fraction, c4_scalars, c4_co2_pa, o2_pa, c4_scale)
                    net_sun, gross_sun, photo_sun = _c3_light(state3, c3_scalars, sunlit_par, c3_co2_pa)
                    net_shade, gross_shade, photo_shade = _c3_light(state3, c3_scalars, shaded_par, c3_co2_pa)
                    c3_net += weight * (net_sun * sunlit_lai + net_shade * shaded_lai)
                    c3_gross += weight * (gross_sun * sunlit_lai + gross_shade * shaded_lai)
                    c3_photo += weight * (photo_sun * sunlit_lai + photo_shade * shaded_lai)
                    net_sun, gross_sun = _c4_light(state4, c4_scalars, sunlit_par)
                    net_shade, gross_shade = _c4_light(state4, c4_scalars, shaded_par)
                    c4_net += weight * (net_sun * sunlit_lai + net_shade * shaded_lai)
                    c4_gross += weight * (gross_sun * sunlit_lai + gross_shade * shaded_lai)

            # Night: every leaf dark (canopy._dark_canopy_net), t = ((24 − N)/2) x around midnight.
            half_night_h = 0.5 * (24.0 - day_hours)
            for point in range(n_night):
                hour = half_night_h * night_nodes[point]
                weight = night_weights[point] * half_night_h * 3600.0
                temperature = mean_t + amplitude_t * math.cos(two_pi * (hour - constants[6]) / 24.0)
                if not (temperature >= -60.0 and temperature <= 60.0):
                    ok = False
                    continue
                vpd = vpd_fixed if humidity_kind == 1 else _non_negative(
                    _saturation_vapour_pressure(temperature) - vapour_pressure)
                if not (vpd >= 0.0 and vapour_pressure >= 0.0):
                    ok = False
                    continue
                sqrt_vpd = math.sqrt(vpd)
                row, fraction = _table_position(temperature, table_start, table_inverse_step, last_row)
                c3_co2_pa = co2_pa_per_ratio * _ci_ratio(c3_scalars, sqrt_vpd, w)
                c4_co2_pa = co2_pa_per_ratio * _ci_ratio(c4_scalars, sqrt_vpd, w)
                state3 = _c3_state(c3_table, row, fraction, c3_co2_pa, o2_pa, c3_scale)
                state4 = _c4_state(c4_table, row, fraction, c4_scalars, c4_co2_pa, o2_pa, c4_scale)
                c3_net += weight * (_c3_light(state3, c3_scalars, 0.0, c3_co2_pa)[0] * leaf_area)
                c4_net += weight * (_c4_light(state4, c4_scalars, 0.0)[0] * leaf_area)

            if ok:
                out[0, cell, month] = c3_net * to_carbon
                out[1, cell, month] = c3_gross * to_carbon
                out[2, cell, month] = c3_photo * to_carbon
                out[3, cell, month] = c4_net * to_carbon
                out[4, cell, month] = c4_gross * to_carbon
            else:
                for q in range(5):
                    out[q, cell, month] = nan
