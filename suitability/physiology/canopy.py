"""Daily canopy assimilation of a sun/shade canopy on a representative day.

The leaf model (:func:`suitability.physiology.leaf.leaf_assimilation`) is run for the sunlit and the
shaded leaves (de Pury & Farquhar 1997) at a few moments of the day and integrated over time with
Gauss-Legendre quadrature (Goudriaan 1986, Agric For Meteorol 38:249-254; Goudriaan & van Laar 1994,
Modelling Potential Crop Growth Processes, Kluwer).

Choices made here, each documented where it is used:

* Time: daylight (sunrise to sunset, FAO-56 eqs. 24, 25, 34) is integrated with
  :data:`DAY_GAUSS_POINTS` = 14 Gauss-Legendre points, the night with :data:`NIGHT_GAUSS_POINTS` = 3.
  The leaf models switch between limitations with a min() (a kink in time where sunlit leaves pass from
  light to Rubisco limitation), so Gaussian quadrature converges only as about 1/n² here, not as fast
  as for smooth integrands. Over 1000 realistic days (Tmin 0-25, Tmax 10-40 °C, 5-30 MJ m-2 d-1,
  latitudes ±40°, LAI 0.5-6, 400 ppm, with and without water availability 0.3-1 and elevations up to
  3000 m) the largest difference in daily gross assimilation from a 96-step integration of the same
  model was, with 9 / 12 / 14 points: C3 bernacchi2001 0.49 / 0.48 / 0.32 %, C3 collatz1991
  1.1 / 0.90 / 0.31 %, C4 collatz1992 0.18 / 0.17 / 0.15 %, C4 vc2000 (well watered) 0.30 / 0.30 /
  0.15 %; the 96-step reference itself is within 0.1-0.2 % of a 1440-step one. 0.5 % is the target
  (tests/physiology/test_canopy.py checks it). Goudriaan's (1986) three points per half day are far
  cheaper but 1-2 % off with these leaf models. Three points suffice at night, where only the smooth
  temperature course varies.
* Radiation: the daily total is spread as sin β (1 + 0.4 sin β); the daily diffuse total, from the daily
  clearness Sg/Ra (Spitters et al. 1986 eq. 2), is spread as sin β, i.e. as a fixed share of the
  extraterrestrial flux, and capped at the global flux (Spitters et al. 1986; Goudriaan & van Laar
  1994). Both courses are smooth in time, which suits the quadrature better than applying an
  instantaneous diffuse relation to a synthetic course. PAR is 0.5 of shortwave at 4.57 µmol J-1 and
  has the diffuse share of shortwave (see :mod:`.light`).
* Temperature: T(t) = (Tmax + Tmin)/2 + (Tmax − Tmin)/2 · cos(2π (t − 14) / 24), peaking at 14:00
  solar time (common practice, no source; the same cosine is used by Goudriaan & van Laar 1994,
  from memory). It is smooth, so day and night quadratures both integrate it well.
* Humidity: VPD is ``vpd_kpa`` when given (held for the whole day), else e°(T(t)) − ea with ea given or
  taken as e°(Tmin) (FAO-56 eq. 48).
* Leaf capacity does not decline through the canopy: sunlit and shaded leaves share the same parameters
  and differ only in absorbed PAR. This over-states the capacity of deep shaded leaves compared with a
  nitrogen profile (de Pury & Farquhar 1997 scale Vcmax with kn ≈ 0.7, from memory), mainly for
  LAI > 4; it is a potential-assimilation estimate for both pathways alike.
* Night: every leaf is dark; the leaf model with zero absorbed PAR gives −Rd at the night temperature,
  so night respiration of the whole canopy (LAI × Rd(T(t))) enters the daily net through the night
  quadrature. Gross and photorespiration are zero at night.
* Air pressure from elevation (FAO-56 eq. 7) sets the partial pressures inside the leaf model.

Everything is elementwise with a fixed small Python loop over quadrature points, so it works on
scalars and numpy arrays directly. Dask-backed inputs (xarray or plain dask) are run block by block
through ``xarray.apply_ufunc`` / ``dask.array.apply_gufunc``: the result stays lazy and its graph has one
task per block, instead of one per arithmetic step (about 3700 steps per day). Invalid elements give
NaN.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from . import array_ops as ops
from .array_ops import in_range, where_valid
from .array_ops import is_xarray as _is_xarray
from .atmosphere import (
    actual_vapour_pressure_from_deficit,
    actual_vapour_pressure_from_tmin,
    air_pressure_from_elevation,
    vapour_pressure_deficit,
)
from .elementwise import equation
from .energy import energy_limited_transpiration_mm
from .leaf import leaf_assimilation
from .light import (
    daily_clearness,
    daily_course_amplitude,
    day_length,
    daylight_integral_of_sin_elevation,
    diffuse_absorption,
    diffuse_fraction_daily,
    extraterrestrial_radiation,
    hour_angle,
    par_from_shortwave,
    shortwave_course_given_amplitude,
    sin_solar_elevation,
    sin_solar_elevation_given_hour_angle,
    solar_declination,
    sun_shade_absorbed_par_given,
)
from .params import resolve_params
from .water import MAX_WATER_SUPPLY_MM_PER_DAY, leaf_transpiration, supply_limited_day, transpiration_mm

#: Gauss-Legendre points over the daylight period (see the module docstring for the accuracy).
DAY_GAUSS_POINTS = 14
#: Gauss-Legendre points over the night.
NIGHT_GAUSS_POINTS = 3
#: Solar hour of the daily maximum temperature [h] (common practice, no source).
HOUR_OF_MAXIMUM_TEMPERATURE = 14.0
#: Molar mass of carbon [g mol-1] (IUPAC standard atomic weight 12.011).
CARBON_G_PER_MOL = 12.011

_SECONDS_PER_HOUR = 3600.0
_UMOL_CO2_TO_G_C = 1e-6 * CARBON_G_PER_MOL


@dataclass(frozen=True)
class CanopyAssimilation:
    """Daily canopy CO2 exchange per ground area, as carbon mass.

    Fields
    ------
    net : net canopy assimilation over 24 h, day minus night respiration [g C m-2 d-1].
    gross : gross assimilation in daylight, as the leaf model defines it (net + day respiration)
        [g C m-2 d-1].
    photorespiration : CO2 released by photorespiration in daylight [g C m-2 d-1].
    transpiration : water the canopy transpires, its demand capped at the radiation's limit and then at
        the soil's supply [mm d-1].

    All four are after the soil's water supply has limited the day (:mod:`.water`).
    """

    net: Any
    gross: Any
    photorespiration: Any
    transpiration: Any = None


@equation
def daily_temperature(tmin_c, tmax_c, solar_hour):
    """Air temperature through the day, a cosine between Tmin and Tmax peaking at 14:00 solar time.

    T(t) = (Tmax + Tmin)/2 + (Tmax − Tmin)/2 · cos(2π (t − 14) / 24)

    Parameters
    ----------
    tmin_c, tmax_c : daily minimum and maximum air temperature [°C].
    solar_hour : local apparent solar time [h].

    Returns
    -------
    T(t) [°C].

    Reference: common practice, no source (the form of Goudriaan & van Laar 1994, from memory).
    """
    phase = hour_angle(solar_hour) - hour_angle(HOUR_OF_MAXIMUM_TEMPERATURE)  # 2π (t − 14) / 24
    return daily_temperature_given_phase(tmin_c, tmax_c, ops.cos(phase))


@equation
def daily_temperature_given_phase(tmin_c, tmax_c, cos_phase):
    """T = (Tmax + Tmin)/2 + (Tmax − Tmin)/2 · cos φ [°C] with cos φ = cos(2π (t − 14) / 24) given
    (:func:`daily_temperature`); Tmin, Tmax [°C], cos φ [-]."""
    return 0.5 * (tmax_c + tmin_c) + 0.5 * (tmax_c - tmin_c) * cos_phase


@equation
def symmetric_moments(a, b, tmin_c, tmax_c, solar_hour):
    """sin β at t and the air temperatures at t and at 24 − t [°C], for a pair of moments symmetric
    about solar noon (hour angles ±ω; sin β is even in ω).

    One sine and one cosine of ω serve all three, by angle addition:
    cos(±ω − ω₁₄) = cos ω cos ω₁₄ ± sin ω sin ω₁₄, ω₁₄ the hour angle of 14:00 (the temperature peak).

    Parameters
    ----------
    a, b : sin φ sin δ and cos φ cos δ (:func:`~.light.solar_elevation_terms`) [-].
    tmin_c, tmax_c : daily minimum and maximum temperature [°C].
    solar_hour : t [h], the afternoon moment of the pair.

    Returns (sin β [-], T(t) [°C], T(24 − t) [°C]); as :func:`~.light.sin_solar_elevation_from_terms`
    and :func:`daily_temperature` at each moment, to rounding.
    """
    omega = hour_angle(solar_hour)
    sin_omega = ops.sin(omega)
    cos_omega = ops.cos(omega)
    peak = hour_angle(HOUR_OF_MAXIMUM_TEMPERATURE)
    cos_part = cos_omega * ops.cos(peak)
    sin_part = sin_omega * ops.sin(peak)
    return (sin_solar_elevation_given_hour_angle(a, b, cos_omega),
            daily_temperature_given_phase(tmin_c, tmax_c, cos_part + sin_part),
            daily_temperature_given_phase(tmin_c, tmax_c, cos_part - sin_part))


@equation
def valid_day_inputs(tmin_c, tmax_c, shortwave_mj, latitude_deg, day_of_year, lai, pressure_kpa):
    """True where a day's inputs can be computed: finite Tmin <= Tmax [°C], shortwave >= 0 and finite
    [MJ m-2 d-1], latitude −90..90 [°], day 1-366, LAI >= 0 and finite [m2 m-2], a finite air pressure
    [kPa] (NaN from an elevation out of range). The leaf model checks its own inputs per moment."""
    return (ops.in_range(tmin_c, -1e300, tmax_c) & ops.in_range(tmax_c, tmin_c, 1e300)
            & ops.in_range(shortwave_mj, 0.0, 1e300) & ops.in_range(latitude_deg, -90.0, 90.0)
            & ops.in_range(day_of_year, 1.0, 366.0) & ops.in_range(lai, 0.0, 1e300)
            & ops.in_range(pressure_kpa, 0.0, 1e300))


@equation
def daylight_moment(day_length_h, node, weight):
    """Solar hour [h] and quadrature weight [s] of the Gauss-Legendre ``node`` x (weight w) over the
    daylight period of N = ``day_length_h`` hours: t = 12 + (N/2) x, weight w (N/2) 3600."""
    return 12.0 + 0.5 * day_length_h * node, weight * 0.5 * day_length_h * _SECONDS_PER_HOUR


@equation
def night_moment(day_length_h, node, weight):
    """Solar hour [h] (negative hours are evening) and quadrature weight [s] of the Gauss-Legendre
    ``node`` over the night around midnight: t = ((24 − N)/2) x, weight w ((24 − N)/2) 3600."""
    half_night_h = 0.5 * (24.0 - day_length_h)
    return half_night_h * node, weight * half_night_h * _SECONDS_PER_HOUR


@equation
def canopy_light(global_amplitude_w, diffuse_amplitude_w, sin_elevation, lai, diffuse_absorbed_share):
    """Sun/shade absorbed PAR of the canopy at one moment (:class:`~.light.SunShadeLight`).

    The daily global radiation is spread over the day as sin β (1 + 0.4 sin β) and the daily diffuse
    radiation as sin β, the diffuse flux capped at the global one (module docstring), each through its
    day's amplitude (:func:`~.light.daily_course_amplitude` of the daily total [MJ m-2 d-1] and the
    daylight integral with c = 0.4, resp. c = 0) [W m-2]; both become PAR
    (:func:`~.light.par_from_shortwave`), split into beam and diffuse, and are absorbed by the sunlit and
    shaded leaves (de Pury & Farquhar 1997). ``sin_elevation`` [-]; ``lai`` [m2 m-2];
    ``diffuse_absorbed_share`` from :func:`~.light.diffuse_absorption` of ``lai`` [-].
    """
    shortwave_w = shortwave_course_given_amplitude(global_amplitude_w, sin_elevation)
    diffuse_w = ops.minimum(shortwave_course_given_amplitude(diffuse_amplitude_w, sin_elevation, 0.0), shortwave_w)
    par = par_from_shortwave(shortwave_w)
    diffuse_par = par_from_shortwave(diffuse_w)
    return sun_shade_absorbed_par_given(par - diffuse_par, diffuse_par, lai, sin_elevation, diffuse_absorbed_share)


@dataclass(frozen=True)
class _Day:
    """Everything about the day and the place that does not change with the hour."""

    pathway: str
    tmin_c: Any
    tmax_c: Any
    shortwave_mj: Any
    latitude_deg: Any
    declination: Any
    global_amplitude_w: Any
    diffuse_amplitude_w: Any
    day_length_h: Any
    co2_ppm: Any
    pressure_kpa: Any
    vpd_kpa: Any
    actual_vapour_pressure_kpa: Any
    water_availability: Any
    lai: Any
    o2_percent: Any
    max_water_supply_mm: Any
    energy_limit_mm: Any
    params: Any
    growth_temperature_c: Any = None


def _leaf(day: _Day, temperature_c, absorbed_par):
    """The leaf model at one moment, and that leaf's transpiration [mol H2O m-2 s-1] (:mod:`.water`)."""
    vpd = day.vpd_kpa
    if vpd is None:
        vpd = vapour_pressure_deficit(temperature_c, day.actual_vapour_pressure_kpa)
    leaf = leaf_assimilation(day.pathway, temperature_c, absorbed_par, day.co2_ppm,
                             o2_percent=day.o2_percent, pressure_kpa=day.pressure_kpa, vpd_kpa=vpd,
                             water_availability=day.water_availability, params=day.params,
                             growth_temperature_c=day.growth_temperature_c)
    return leaf, leaf_transpiration(leaf.net, day.co2_ppm, leaf.intercellular_co2, vpd, day.pressure_kpa)


def _canopy_rates(day: _Day, solar_hour):
    """Net, gross and photorespiration of the canopy at one moment [µmol m-2 ground s-1], and its
    transpiration with stomata at their optimum [mol H2O m-2 ground s-1]."""
    sin_b = sin_solar_elevation(day.latitude_deg, day.declination, solar_hour)
    light = canopy_light(day.global_amplitude_w, day.diffuse_amplitude_w, sin_b, day.lai, diffuse_absorption(day.lai))
    temperature = daily_temperature(day.tmin_c, day.tmax_c, solar_hour)
    sun, sun_water = _leaf(day, temperature, light.sunlit_absorbed_per_leaf)
    shade, shade_water = _leaf(day, temperature, light.shaded_absorbed_per_leaf)
    rates = tuple(getattr(sun, name) * light.sunlit_lai + getattr(shade, name) * light.shaded_lai
                  for name in ("net", "gross", "photorespiration"))
    return rates + (sun_water * light.sunlit_lai + shade_water * light.shaded_lai,)


def _dark_canopy_net(day: _Day, solar_hour):
    """Net CO2 exchange of the canopy with every leaf dark [µmol m-2 ground s-1] (−LAI · Rd)."""
    temperature = daily_temperature(day.tmin_c, day.tmax_c, solar_hour)
    return _leaf(day, temperature, 0.0 * day.lai)[0].net * day.lai


def _prepare(pathway, *, tmin_c, tmax_c, shortwave_mj, latitude_deg, day_of_year, co2_ppm, elevation_m,
             vpd_kpa, actual_vapour_pressure_kpa, water_availability, lai, o2_percent, max_water_supply_mm,
             params, growth_temperature_c=None):
    """Validate the inputs elementwise and compute the quantities that are fixed for the day.

    ``params`` is already resolved (:func:`_run`); the leaf model accepts the resolved mapping as it is.
    """
    pressure = air_pressure_from_elevation(elevation_m)
    valid = valid_day_inputs(tmin_c, tmax_c, shortwave_mj, latitude_deg, day_of_year, lai, pressure)
    if actual_vapour_pressure_kpa is None:
        actual_vapour_pressure_kpa = actual_vapour_pressure_from_tmin(tmin_c)
    declination = solar_declination(day_of_year)
    extraterrestrial = extraterrestrial_radiation(latitude_deg, day_of_year)
    radiation_vapour_pressure = (actual_vapour_pressure_kpa if vpd_kpa is None
                                 else actual_vapour_pressure_from_deficit(tmin_c, tmax_c, vpd_kpa))
    energy_limit = energy_limited_transpiration_mm(tmin_c, tmax_c, radiation_vapour_pressure, shortwave_mj,
                                                   extraterrestrial, elevation_m, pressure)
    clearness = daily_clearness(shortwave_mj, extraterrestrial)
    day = _Day(
        pathway=pathway, tmin_c=tmin_c, tmax_c=tmax_c, shortwave_mj=shortwave_mj,
        latitude_deg=latitude_deg, declination=declination,
        global_amplitude_w=daily_course_amplitude(
            shortwave_mj, daylight_integral_of_sin_elevation(latitude_deg, declination)),
        diffuse_amplitude_w=daily_course_amplitude(
            diffuse_fraction_daily(clearness) * shortwave_mj,
            daylight_integral_of_sin_elevation(latitude_deg, declination, atmospheric_factor=0.0)),
        day_length_h=day_length(latitude_deg, day_of_year), co2_ppm=co2_ppm, pressure_kpa=pressure,
        vpd_kpa=vpd_kpa, actual_vapour_pressure_kpa=actual_vapour_pressure_kpa,
        water_availability=water_availability, lai=lai, o2_percent=o2_percent,
        max_water_supply_mm=max_water_supply_mm, energy_limit_mm=energy_limit, params=params,
        growth_temperature_c=growth_temperature_c)
    return day, valid


def _result(day: _Day, valid, net_umol, gross_umol, photorespiration_umol, transpiration_mol) -> CanopyAssimilation:
    """The day's totals under the soil's water supply (:func:`.water.supply_limited_day`), as carbon."""
    net_umol, gross_umol, photorespiration_umol, share = supply_limited_day(
        net_umol, gross_umol, photorespiration_umol, transpiration_mol, day.water_availability,
        day.max_water_supply_mm, day.energy_limit_mm)

    def to_carbon(total):
        return where_valid(valid, total * _UMOL_CO2_TO_G_C)

    return CanopyAssimilation(net=to_carbon(net_umol), gross=to_carbon(gross_umol),
                              photorespiration=to_carbon(photorespiration_umol),
                              transpiration=where_valid(valid, share * ops.minimum(
                                  transpiration_mm(transpiration_mol), day.energy_limit_mm)))


def _gauss_integral(pathway, params, day_gauss_points, **inputs) -> CanopyAssimilation:
    """:func:`daily_canopy_assimilation` on in-memory (numpy or scalar) inputs."""
    day, valid = _prepare(pathway, params=params, **inputs)
    net = gross = photorespiration = transpiration = 0.0
    nodes, weights = np.polynomial.legendre.leggauss(day_gauss_points)
    for node, weight in zip(nodes, weights):
        hour, seconds = daylight_moment(day.day_length_h, node, weight)
        rate_net, rate_gross, rate_photorespiration, rate_water = _canopy_rates(day, hour)
        net = net + seconds * rate_net
        gross = gross + seconds * rate_gross
        photorespiration = photorespiration + seconds * rate_photorespiration
        transpiration = transpiration + seconds * rate_water
    nodes, weights = np.polynomial.legendre.leggauss(NIGHT_GAUSS_POINTS)
    for node, weight in zip(nodes, weights):
        hour, seconds = night_moment(day.day_length_h, node, weight)
        net = net + seconds * _dark_canopy_net(day, hour)
    return _result(day, valid, net, gross, photorespiration, transpiration)


def _midpoint_integral(pathway, params, steps, **inputs) -> CanopyAssimilation:
    """:func:`daily_canopy_assimilation_reference` on in-memory (numpy or scalar) inputs."""
    day, valid = _prepare(pathway, params=params, **inputs)
    step_s = 24.0 * _SECONDS_PER_HOUR / steps
    net = gross = photorespiration = transpiration = 0.0
    for k in range(steps):
        rate_net, rate_gross, rate_photorespiration, rate_water = _canopy_rates(day, (k + 0.5) * 24.0 / steps)
        net = net + step_s * rate_net
        gross = gross + step_s * rate_gross
        photorespiration = photorespiration + step_s * rate_photorespiration
        transpiration = transpiration + step_s * rate_water
    return _result(day, valid, net, gross, photorespiration, transpiration)


def _is_dask(value) -> bool:
    return hasattr(value, "dask") or (_is_xarray(value) and getattr(value, "chunks", None) is not None)


def _run(integral, pathway, params, option, inputs) -> CanopyAssimilation:
    """Run ``integral`` directly, or block by block when any input is dask-backed."""
    params = resolve_params(pathway, params)  # unknown sets or keys raise ValueError before any work
    if not any(_is_dask(value) for value in inputs.values()):
        return integral(pathway, params, option, **inputs)
    arrays = {name: value for name, value in inputs.items() if value is not None and np.ndim(value) > 0}
    fixed = {name: value for name, value in inputs.items() if name not in arrays}

    def block(*values):
        result = integral(pathway, params, option, **fixed, **dict(zip(arrays, values)))
        return tuple(np.asarray(getattr(result, name), dtype=np.float64)
                     for name in ("net", "gross", "photorespiration", "transpiration"))

    if any(_is_xarray(value) for value in arrays.values()):
        if not all(_is_xarray(value) for value in arrays.values()):
            # Plain arrays beside DataArrays have no dimension names to align on: go elementwise.
            return integral(pathway, params, option, **inputs)
        import xarray as xr

        outputs = xr.apply_ufunc(block, *arrays.values(), output_core_dims=[[], [], [], []], dask="parallelized",
                                 output_dtypes=[np.float64] * 4)
    else:
        import dask.array as da

        # Numpy inputs (and differently chunked dask ones) take the chunks of the first dask input.
        values = da.broadcast_arrays(*(da.asarray(value) for value in arrays.values()))
        chunks = next(value.chunks for value, original in zip(values, arrays.values()) if _is_dask(original))
        values = [value.rechunk(chunks) for value in values]
        signature = ",".join(["()"] * len(values)) + "->(),(),(),()"
        outputs = da.apply_gufunc(block, signature, *values, output_dtypes=(np.float64,) * 4)
    return CanopyAssimilation(*outputs)


def daily_canopy_assimilation(pathway, *, tmin_c, tmax_c, shortwave_mj, latitude_deg, day_of_year,
                              co2_ppm, elevation_m=0.0, vpd_kpa=None, actual_vapour_pressure_kpa=None,
                              water_availability=1.0, lai=3.0, o2_percent=20.95, params=None,
                              day_gauss_points=DAY_GAUSS_POINTS,
                              max_water_supply_mm=MAX_WATER_SUPPLY_MM_PER_DAY,
                              growth_temperature_c=None) -> CanopyAssimilation:
    """Daily canopy assimilation of a C3 or C4 canopy, by Gaussian integration over the day.

    A_day = Σ_i w_i (N/2) A_canopy(t_i) + Σ_j v_j ((24 − N)/2) A_dark(s_j),  in µmol m-2 per hour·3600
    A_canopy(t) = A_leaf(I_sun(t)) L_sun(t) + A_leaf(I_shade(t)) L_shade(t)

    with Gauss-Legendre nodes t_i = 12 + (N/2) x_i over the daylight hours N (FAO-56 eq. 34) and
    s_j = (24 − N)/2 · x_j around midnight; then µmol CO2 → g C (12.011 g mol-1).

    Parameters
    ----------
    pathway : "C3" or "C4", passed to the leaf model.
    tmin_c, tmax_c : daily minimum and maximum air temperature [°C]; Tmin > Tmax gives NaN.
    shortwave_mj : daily global shortwave radiation [MJ m-2 d-1]; negative gives NaN.
    latitude_deg : latitude [degrees north], −90..90.
    day_of_year : representative day [day], 1-366 (e.g. the middle of the month).
    co2_ppm : ambient CO2 mole fraction [µmol mol-1].
    elevation_m : elevation [m], sets the air pressure (FAO-56 eq. 7).
    vpd_kpa : daytime vapour pressure deficit [kPa]; if None, computed hourly from ea.
    actual_vapour_pressure_kpa : actual vapour pressure ea [kPa]; if None, e°(Tmin) (FAO-56 eq. 48).
    water_availability : relative plant-available soil water W, 0 (wilting point) .. 1 (field capacity)
        [-]; the soil supplies at most ``max_water_supply_mm`` · W per day (:mod:`.water`).
    lai : leaf area index [m2 m-2]; negative gives NaN.
    o2_percent : O2 mole fraction [%].
    params : leaf parameters, as for :func:`suitability.physiology.params.resolve_params`.
    day_gauss_points : Gauss-Legendre points over the daylight period [-]; fewer are faster and less
        accurate (see the module docstring).
    max_water_supply_mm : Emax, the soil's daily water supply at field capacity [mm d-1]
        (default 5, Sitch et al. 2003; :mod:`.water`).
    growth_temperature_c : growth temperature Tg [°C] the leaves are acclimated to (C3: Kattge & Knorr
        2007, :mod:`.c3`), constant over the day; None = the parameter set's ``growth_temperature_c``.

    Returns
    -------
    :class:`CanopyAssimilation` with net, gross and photorespiration [g C m-2 d-1].

    References: Goudriaan (1986); Goudriaan & van Laar (1994); de Pury & Farquhar (1997); Spitters et al.
    (1986); Allen et al. (1998) FAO-56.
    """
    inputs = dict(tmin_c=tmin_c, tmax_c=tmax_c, shortwave_mj=shortwave_mj, latitude_deg=latitude_deg,
                  day_of_year=day_of_year, co2_ppm=co2_ppm, elevation_m=elevation_m, vpd_kpa=vpd_kpa,
                  actual_vapour_pressure_kpa=actual_vapour_pressure_kpa,
                  water_availability=water_availability, lai=lai, o2_percent=o2_percent,
                  max_water_supply_mm=max_water_supply_mm, growth_temperature_c=growth_temperature_c)
    return _run(_gauss_integral, pathway, params, day_gauss_points, inputs)


def daily_canopy_assimilation_reference(pathway, *, tmin_c, tmax_c, shortwave_mj, latitude_deg,
                                        day_of_year, co2_ppm, elevation_m=0.0, vpd_kpa=None,
                                        actual_vapour_pressure_kpa=None, water_availability=1.0, lai=3.0,
                                        o2_percent=20.95, params=None, steps=96,
                                        max_water_supply_mm=MAX_WATER_SUPPLY_MM_PER_DAY,
                                        growth_temperature_c=None) -> CanopyAssimilation:
    """The same daily canopy assimilation by the midpoint rule over ``steps`` equal steps of 24 h.

    A_day = Σ_k (24 h / steps) A_canopy(t_k),  t_k = (k + ½) 24 / steps

    Every step runs the full sun/shade canopy (dark leaves at night, where the sun is below the
    horizon). For tests and benchmarks of :func:`daily_canopy_assimilation`; arguments and result as
    there, plus ``steps`` [-].
    """
    inputs = dict(tmin_c=tmin_c, tmax_c=tmax_c, shortwave_mj=shortwave_mj, latitude_deg=latitude_deg,
                  day_of_year=day_of_year, co2_ppm=co2_ppm, elevation_m=elevation_m, vpd_kpa=vpd_kpa,
                  actual_vapour_pressure_kpa=actual_vapour_pressure_kpa,
                  water_availability=water_availability, lai=lai, o2_percent=o2_percent,
                  max_water_supply_mm=max_water_supply_mm, growth_temperature_c=growth_temperature_c)
    return _run(_midpoint_integral, pathway, params, steps, inputs)
