"""The energy available to evaporate water: daily net radiation and the Priestley-Taylor limit.

A canopy cannot transpire more than the radiation it absorbs can evaporate, however open its stomata.
This caps the canopy's water demand (:mod:`.water`) on bright, dry days, where the stomatal demand
gs·D/P alone would exceed what the energy supplies (the supply-demand scheme of Haxeltine & Prentice
1996 likewise bounds demand by equilibrium evapotranspiration).

The same radiation terms give the reference evapotranspiration of FAO-56 Penman-Monteith
(:func:`penman_monteith_et0`, eq. 6) that the monthly soil-water balance of rainfall uses where humidity
and wind are given (:mod:`.water_balance` holds Hargreaves-Samani, used otherwise).

Equations: Allen et al. (1998) FAO-56, eqs. 6 (ET0), 8 (γ), 12 (es), 13 (Δ), 37 (Rso), 38 (Rns), 39 (Rnl),
40 (Rn), 43 (monthly G), 47 (wind at 2 m); Priestley & Taylor (1972, Mon Weather Rev 100:81):
E = α Δ/(Δ + γ) Rn / λ with α = 1.26.
"""

from __future__ import annotations

from . import array_ops as ops
from .atmosphere import mean_saturation_vapour_pressure, saturation_vapour_pressure
from .elementwise import equation

#: Albedo of a green grass reference canopy, FAO-56 eq. 38 [-].
CANOPY_ALBEDO = 0.23
#: Stefan-Boltzmann constant per day, FAO-56 eq. 39 [MJ K-4 m-2 d-1].
STEFAN_BOLTZMANN_MJ_PER_DAY = 4.903e-9
#: Latent heat of vaporisation, FAO-56 (eq. 8 and Annex 3) [MJ kg-1].
LATENT_HEAT_MJ_PER_KG = 2.45
#: Priestley & Taylor (1972) coefficient for a well-watered surface [-].
PRIESTLEY_TAYLOR_ALPHA = 1.26


@equation
def clear_sky_radiation(extraterrestrial_mj, elevation_m):
    """Rso = (0.75 + 2e-5 z) Ra [MJ m-2 d-1] (FAO-56 eq. 37); Ra [MJ m-2 d-1], z [m]."""
    return (0.75 + 2e-5 * elevation_m) * extraterrestrial_mj


@equation
def net_longwave_radiation(tmin_c, tmax_c, actual_vapour_pressure_kpa, shortwave_mj, clear_sky_mj):
    """Net outgoing longwave radiation Rnl [MJ m-2 d-1] (FAO-56 eq. 39).

    Rnl = σ (Tmax,K⁴ + Tmin,K⁴)/2 (0.34 − 0.14 √ea) (1.35 Rs/Rso − 0.35), Rs/Rso capped at 1; where Rso = 0
    (polar night) Rs/Rso is taken as 0.5 (a cloudy value; common practice, no source).

    Parameters
    ----------
    tmin_c, tmax_c : daily minimum and maximum temperature [°C].
    actual_vapour_pressure_kpa : ea [kPa].
    shortwave_mj, clear_sky_mj : Rs and Rso [MJ m-2 d-1].
    """
    tmin_k = tmin_c + 273.16
    tmax_k = tmax_c + 273.16
    has_sun = clear_sky_mj > 0
    relative = ops.where(has_sun, ops.minimum(shortwave_mj / ops.where(has_sun, clear_sky_mj, 1.0), 1.0), 0.5)
    emissivity = 0.34 - 0.14 * ops.sqrt(ops.maximum(actual_vapour_pressure_kpa, 0.0))
    return (STEFAN_BOLTZMANN_MJ_PER_DAY * 0.5 * (tmax_k * tmax_k * tmax_k * tmax_k + tmin_k * tmin_k * tmin_k * tmin_k)
            * emissivity * (1.35 * relative - 0.35))


@equation
def net_radiation(tmin_c, tmax_c, actual_vapour_pressure_kpa, shortwave_mj, extraterrestrial_mj, elevation_m):
    """Daily net radiation Rn = (1 − 0.23) Rs − Rnl [MJ m-2 d-1] (FAO-56 eqs. 37-40).

    Parameters
    ----------
    tmin_c, tmax_c : [°C]; actual_vapour_pressure_kpa : ea [kPa]; shortwave_mj : Rs [MJ m-2 d-1];
    extraterrestrial_mj : Ra [MJ m-2 d-1]; elevation_m : z [m].
    """
    clear_sky = clear_sky_radiation(extraterrestrial_mj, elevation_m)
    return ((1.0 - CANOPY_ALBEDO) * shortwave_mj
            - net_longwave_radiation(tmin_c, tmax_c, actual_vapour_pressure_kpa, shortwave_mj, clear_sky))


@equation
def saturation_slope(temperature_c):
    """Δ = 4098 e°(T) / (T + 237.3)² [kPa °C-1] (FAO-56 eq. 13); T [°C]."""
    return 4098.0 * saturation_vapour_pressure(temperature_c) / ((temperature_c + 237.3) * (temperature_c + 237.3))


@equation
def psychrometric_constant(pressure_kpa):
    """γ = 0.665e-3 P [kPa °C-1] (FAO-56 eq. 8); P [kPa]."""
    return 0.665e-3 * pressure_kpa


@equation
def energy_limited_transpiration_mm(tmin_c, tmax_c, actual_vapour_pressure_kpa, shortwave_mj, extraterrestrial_mj,
                                    elevation_m, pressure_kpa):
    """Largest daily transpiration the radiation allows, E = 1.26 Δ/(Δ + γ) Rn / λ [mm d-1] (Priestley &
    Taylor 1972), Δ at the daily mean temperature, Rn from FAO-56; 0 where Rn <= 0. Arguments as
    :func:`net_radiation`, plus the air pressure P [kPa]."""
    mean = 0.5 * (tmin_c + tmax_c)
    slope = saturation_slope(mean)
    radiation = net_radiation(tmin_c, tmax_c, actual_vapour_pressure_kpa, shortwave_mj, extraterrestrial_mj,
                              elevation_m)
    return (PRIESTLEY_TAYLOR_ALPHA * slope / (slope + psychrometric_constant(pressure_kpa))
            * ops.maximum(radiation, 0.0) / LATENT_HEAT_MJ_PER_KG)


#: FAO-56 eq. 6 constants of the grass reference surface: Cn [K mm s3 Mg-1 d-1] and Cd [s m-1] (FAO-56 Box 6).
REFERENCE_CN = 900.0
REFERENCE_CD = 0.34
#: MJ m-2 d-1 -> mm d-1 of evaporation, 1/λ with λ = 2.45 MJ kg-1 (FAO-56 eq. 6 and eq. 20).
MJ_TO_MM = 0.408


@equation
def wind_speed_at_2m(wind_speed, height_m):
    """u2 = uz · 4.87 / ln(67.8 z − 5.42) [m s-1] (FAO-56 eq. 47): the wind uz [m s-1] measured z [m] above
    the ground brought to 2 m over short grass by the logarithmic wind profile (z = 10 m: u2 = 0.748 uz)."""
    return wind_speed * 4.87 / ops.log(67.8 * height_m - 5.42)


@equation
def monthly_soil_heat_flux(previous_mean_c, next_mean_c):
    """G = 0.07 (T_month,i+1 − T_month,i−1) [MJ m-2 d-1] (FAO-56 eq. 43): the soil heat flux of a month from
    the mean air temperatures [°C] of the months before and after it."""
    return 0.07 * (next_mean_c - previous_mean_c)


@equation
def penman_monteith_et0(tmin_c, tmax_c, actual_vapour_pressure_kpa, shortwave_mj, extraterrestrial_mj,
                        elevation_m, pressure_kpa, wind_2m, soil_heat_flux_mj):
    """Grass reference evapotranspiration by FAO-56 Penman-Monteith (FAO-56 eq. 6) [mm d-1].

    ET0 = [0.408 Δ (Rn − G) + γ 900/(T + 273) u2 (es − ea)] / [Δ + γ (1 + 0.34 u2)]

    with T = (Tmax + Tmin)/2 (eq. 9), es = [e°(Tmax) + e°(Tmin)]/2 (eq. 12), Δ at T (eq. 13), γ = 0.665e-3 P
    (eq. 8) and Rn from Rs, Ra, ea, Tmin, Tmax and z (eqs. 37-40, :func:`net_radiation`). Negative values
    (condensation: net radiation below the ground's heat uptake in a humid polar month) are returned as 0,
    the demand a monthly water balance takes (common practice, no source).

    Parameters
    ----------
    tmin_c, tmax_c : mean daily minimum and maximum air temperature [°C].
    actual_vapour_pressure_kpa : ea [kPa].
    shortwave_mj : Rs [MJ m-2 d-1]; extraterrestrial_mj : Ra [MJ m-2 d-1] (eq. 21).
    elevation_m : z [m] (clear-sky radiation, eq. 37); pressure_kpa : P [kPa] (eq. 7 from z where unknown).
    wind_2m : u2, wind speed at 2 m [m s-1] (:func:`wind_speed_at_2m` from another height).
    soil_heat_flux_mj : G [MJ m-2 d-1] (:func:`monthly_soil_heat_flux` for months; 0 for days).

    Reference: Allen, Pereira, Raes & Smith (1998) FAO Irrigation and Drainage Paper 56, eq. 6; worked
    monthly example: Example 17 (Bangkok, April: ET0 = 5.72 mm d-1).
    """
    mean = 0.5 * (tmin_c + tmax_c)
    slope = saturation_slope(mean)
    gamma = psychrometric_constant(pressure_kpa)
    deficit = mean_saturation_vapour_pressure(tmin_c, tmax_c) - actual_vapour_pressure_kpa
    radiation = net_radiation(tmin_c, tmax_c, actual_vapour_pressure_kpa, shortwave_mj, extraterrestrial_mj,
                              elevation_m)
    numerator = (MJ_TO_MM * slope * (radiation - soil_heat_flux_mj)
                 + gamma * REFERENCE_CN / (mean + 273.0) * wind_2m * deficit)
    return ops.maximum(numerator / (slope + gamma * (1.0 + REFERENCE_CD * wind_2m)), 0.0)
