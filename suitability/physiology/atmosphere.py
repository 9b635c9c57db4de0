"""Air pressure, partial pressures and the water vapour of the air.

Every equation here is from FAO-56: Allen, R.G., Pereira, L.S., Raes, D. & Smith, M. (1998) Crop
evapotranspiration. FAO Irrigation and Drainage Paper 56, FAO, Rome (chapter 3). Functions are pure and
elementwise, so they work on scalars, numpy, dask and xarray alike; an input outside its valid range
(or NaN) gives NaN for that element instead of raising.

The private helper :func:`where_valid` is shared with ``light.py`` and ``canopy.py`` of this package.
"""

from __future__ import annotations

from . import array_ops as ops
from .array_ops import in_range, where_valid  # noqa: F401  (re-exported)
from .elementwise import equation

#: Sea-level air pressure of FAO-56 eq. 7 [kPa].
SEA_LEVEL_PRESSURE_KPA = 101.3

#: Elevations accepted by :func:`air_pressure_from_elevation` [m]. They span the land surface (the Dead
#: Sea shore is near -430 m); common practice, no source. Outside them the result is NaN.
ELEVATION_RANGE_M = (-500.0, 9000.0)

#: Air temperatures accepted [°C]; the package-wide physiology contract (docs/contracts.md).
TEMPERATURE_RANGE_C = (-60.0, 60.0)


@equation
def air_pressure_from_elevation(elevation_m):
    """Mean air pressure at an elevation, FAO-56 eq. 7.

    P = 101.3 · ((293 − 0.0065 z) / 293)^5.26

    Parameters
    ----------
    elevation_m : elevation above sea level [m]; outside :data:`ELEVATION_RANGE_M` gives NaN.

    Returns
    -------
    Air pressure [kPa].

    Reference: Allen et al. (1998) FAO-56, eq. 7 (standard atmosphere, 20 °C at sea level).
    """
    valid = ops.in_range(elevation_m, ELEVATION_RANGE_M[0], ELEVATION_RANGE_M[1])
    safe_z = ops.where_valid(valid, elevation_m, 0.0)
    pressure = SEA_LEVEL_PRESSURE_KPA * ((293.0 - 0.0065 * safe_z) / 293.0) ** 5.26
    return ops.where_valid(valid, pressure)


@equation
def saturation_vapour_pressure(temperature_c):
    """Saturation vapour pressure over water, FAO-56 eq. 11.

    e°(T) = 0.6108 · exp(17.27 T / (T + 237.3))

    Parameters
    ----------
    temperature_c : air temperature [°C]; outside :data:`TEMPERATURE_RANGE_C` gives NaN.

    Returns
    -------
    e°(T) [kPa].

    Reference: Allen et al. (1998) FAO-56, eq. 11 (Tetens form).
    """
    valid = ops.in_range(temperature_c, TEMPERATURE_RANGE_C[0], TEMPERATURE_RANGE_C[1])
    safe_t = ops.where_valid(valid, temperature_c, 0.0)
    return ops.where_valid(valid, 0.6108 * ops.exp(17.27 * safe_t / (safe_t + 237.3)))


@equation
def mean_saturation_vapour_pressure(tmin_c, tmax_c):
    """Daily mean saturation vapour pressure, FAO-56 eq. 12.

    es = [e°(Tmax) + e°(Tmin)] / 2

    Parameters
    ----------
    tmin_c, tmax_c : daily minimum and maximum air temperature [°C]; Tmin > Tmax gives NaN.

    Returns
    -------
    es [kPa].

    Reference: Allen et al. (1998) FAO-56, eq. 12.
    """
    mean = 0.5 * (saturation_vapour_pressure(tmax_c) + saturation_vapour_pressure(tmin_c))
    return ops.where_valid(tmin_c <= tmax_c, mean)


@equation
def actual_vapour_pressure_from_dew_point(dew_point_c):
    """Actual vapour pressure from the dew point, FAO-56 eq. 14: ea = e°(Tdew).

    Parameters
    ----------
    dew_point_c : dew-point temperature [°C].

    Returns
    -------
    ea [kPa].

    Reference: Allen et al. (1998) FAO-56, eq. 14.
    """
    return saturation_vapour_pressure(dew_point_c)


@equation
def actual_vapour_pressure_from_tmin(tmin_c):
    """Actual vapour pressure without humidity data, FAO-56 eq. 48: ea ≈ e°(Tmin).

    The dew point is taken equal to the daily minimum temperature, which FAO-56 recommends where the
    crop is well watered and the site is not arid (in arid places Tdew can be 2-3 °C below Tmin).

    Parameters
    ----------
    tmin_c : daily minimum air temperature [°C].

    Returns
    -------
    ea [kPa].

    Reference: Allen et al. (1998) FAO-56, eq. 48.
    """
    return saturation_vapour_pressure(tmin_c)


@equation
def actual_vapour_pressure_from_relative_humidity(relative_humidity_percent, tmin_c, tmax_c):
    """Actual vapour pressure from mean relative humidity, FAO-56 eq. 19.

    ea = RHmean / 100 · [e°(Tmax) + e°(Tmin)] / 2

    For an instantaneous humidity at one temperature T, pass ``tmin_c = tmax_c = T``.

    Parameters
    ----------
    relative_humidity_percent : mean relative humidity [%], 0-100 (else NaN).
    tmin_c, tmax_c : daily minimum and maximum air temperature [°C].

    Returns
    -------
    ea [kPa].

    Reference: Allen et al. (1998) FAO-56, eq. 19.
    """
    valid = ops.in_range(relative_humidity_percent, 0.0, 100.0)
    ea = relative_humidity_percent / 100.0 * mean_saturation_vapour_pressure(tmin_c, tmax_c)
    return ops.where_valid(valid, ea)


@equation
def actual_vapour_pressure_from_deficit(tmin_c, tmax_c, vpd_kpa):
    """ea = max(es − D, 0) [kPa] with es the daily mean saturation vapour pressure (FAO-56 eq. 12) and D a
    daily vapour pressure deficit [kPa]; tmin_c, tmax_c [°C]. The inverse of FAO-56's D = es − ea."""
    return ops.maximum(mean_saturation_vapour_pressure(tmin_c, tmax_c) - vpd_kpa, 0.0)


@equation
def vapour_pressure_deficit(temperature_c, actual_vapour_pressure_kpa):
    """Vapour pressure deficit of the air at a temperature, FAO-56 eqs. 11 and 13 form.

    D = max(e°(T) − ea, 0)

    Air cannot hold more vapour than saturation, so an ``ea`` above e°(T) (dew or rounding in the input)
    gives D = 0 rather than a negative deficit.

    Parameters
    ----------
    temperature_c : air temperature [°C].
    actual_vapour_pressure_kpa : actual vapour pressure ea [kPa]; negative gives NaN.

    Returns
    -------
    D [kPa].

    Reference: Allen et al. (1998) FAO-56, eq. 11 for e°(T); the deficit es − ea as in the text around
    eq. 19 ("vapour pressure deficit").
    """
    return ops.where_valid(actual_vapour_pressure_kpa >= 0,
                           saturation_deficit(saturation_vapour_pressure(temperature_c), actual_vapour_pressure_kpa))


@equation
def saturation_deficit(saturation_vapour_pressure_kpa, actual_vapour_pressure_kpa):
    """D = max(e° − ea, 0) [kPa] from a saturation vapour pressure already computed (both in kPa).

    The compiled engine tabulates e°(T) (:func:`saturation_vapour_pressure`) and calls this.
    """
    return ops.maximum(saturation_vapour_pressure_kpa - actual_vapour_pressure_kpa, 0.0)


@equation
def partial_pressure(mole_fraction, pressure_kpa):
    """Partial pressure of a gas from its mole fraction (Dalton's law): p = x · P.

    Parameters
    ----------
    mole_fraction : mole fraction of the gas [mol mol-1], 0-1 (else NaN).
    pressure_kpa : total air pressure [kPa], > 0 (else NaN).

    Returns
    -------
    Partial pressure [kPa].

    Reference: Dalton's law of partial pressures; total pressure from FAO-56 eq. 7
    (:func:`air_pressure_from_elevation`).
    """
    valid = ops.in_range(mole_fraction, 0.0, 1.0) & (pressure_kpa > 0)
    return ops.where_valid(valid, mole_fraction * pressure_kpa)


@equation
def co2_partial_pressure_pa(co2_ppm, pressure_kpa):
    """CO2 partial pressure from its mole fraction in µmol mol-1 (ppm): p = 1e-6 · x · P · 1000.

    Parameters
    ----------
    co2_ppm : CO2 mole fraction [µmol mol-1].
    pressure_kpa : air pressure [kPa].

    Returns
    -------
    CO2 partial pressure [Pa].

    Reference: Dalton's law, as :func:`partial_pressure`.
    """
    return partial_pressure(co2_ppm * 1e-6, pressure_kpa) * 1000.0


@equation
def o2_partial_pressure_kpa(o2_percent, pressure_kpa):
    """O2 partial pressure from its mole fraction in percent: p = x / 100 · P.

    Parameters
    ----------
    o2_percent : O2 mole fraction [%] (20.95 in present air).
    pressure_kpa : air pressure [kPa].

    Returns
    -------
    O2 partial pressure [kPa].

    Reference: Dalton's law, as :func:`partial_pressure`.
    """
    return partial_pressure(o2_percent / 100.0, pressure_kpa)


@equation
def o2_partial_pressure_pa(o2_percent, pressure_kpa):
    """O2 partial pressure from its mole fraction in percent: p = x / 100 · P · 1000.

    Parameters
    ----------
    o2_percent : O2 mole fraction [%].
    pressure_kpa : air pressure [kPa].

    Returns
    -------
    O2 partial pressure [Pa].

    Reference: Dalton's law, as :func:`partial_pressure`.
    """
    return partial_pressure(o2_percent / 100.0, pressure_kpa) * 1000.0
