"""Sun, daylight and the light climate of a sun/shade canopy.

Astronomy follows FAO-56 (Allen et al. 1998, FAO Irrigation and Drainage Paper 56, chapter 3); the
daily course and the diffuse share of radiation follow Spitters, Toussaint & Goudriaan (1986, Agric For
Meteorol 38:217-229) and Goudriaan & van Laar (1994, Modelling Potential Crop Growth Processes, Kluwer);
the sun/shade canopy follows de Pury & Farquhar (1997, Plant Cell Environ 20:537-557,
doi:10.1111/j.1365-3040.1997.00094.x). Functions are pure and elementwise (scalars, numpy, dask and
xarray); inputs outside their range give NaN for that element.

Time of day is local apparent solar time in hours (12 = solar noon) throughout.
"""

from __future__ import annotations

from typing import Any, NamedTuple

from . import array_ops as ops
from .elementwise import equation

#: Solar constant of FAO-56 eq. 21, Gsc = 0.0820 MJ m-2 min-1, expressed per second [W m-2].
SOLAR_CONSTANT_W_M2 = 0.0820e6 / 60.0

#: Share of global shortwave radiation that is photosynthetically active (400-700 nm) [-]. Published
#: estimates are 0.45-0.50; 0.5 is the value used by Goudriaan & van Laar (1994) and Spitters et al.
#: (1986) (from memory).
PAR_FRACTION_OF_SHORTWAVE = 0.5

#: Photons per joule of daylight PAR [µmol J-1], McCree (1972, Agric Meteorol 10:443) (from memory);
#: 4.6 is also widely used (common practice).
PAR_PHOTONS_PER_JOULE = 4.57

#: Atmospheric factor of the daily course of global radiation, Sg(t) ∝ sinβ (1 + 0.4 sinβ): more of the
#: light comes at high sun, where the path through the air is short (Goudriaan & van Laar 1994;
#: Spitters et al. 1986) [-] (from memory).
DAILY_COURSE_ATMOSPHERIC_FACTOR = 0.4

#: Leaf scattering coefficient for PAR, σ (de Pury & Farquhar 1997, Table A1; from memory) [-].
LEAF_SCATTERING_PAR = 0.15

#: Extinction coefficient of diffuse light for black leaves, kd (de Pury & Farquhar 1997, Table A1,
#: giving kd' = 0.78 √(1 − 0.15) = 0.719; from memory) [-].
DIFFUSE_EXTINCTION_BLACK_LEAVES = 0.78

#: Canopy reflection coefficient for diffuse PAR, ρcd (de Pury & Farquhar 1997, Table A1; from memory) [-].
CANOPY_DIFFUSE_REFLECTION_PAR = 0.036

#: Smallest sine of solar elevation used in extinction coefficients [-]. At the horizon kb = 0.5/sinβ
#: diverges; the beam there carries no energy, so any small floor gives the same absorbed light.
MIN_SIN_ELEVATION = 1e-6


@equation
def par_from_shortwave(shortwave, par_fraction=PAR_FRACTION_OF_SHORTWAVE,
                       photons_per_joule=PAR_PHOTONS_PER_JOULE):
    """Photosynthetically active photon flux from global shortwave radiation.

    Q = f_PAR · Sg · c,  with f_PAR = 0.5 and c = 4.57 µmol J-1

    The conversion is linear, so units carry through: W m-2 gives µmol m-2 s-1; MJ m-2 d-1 gives
    mol m-2 d-1.

    Parameters
    ----------
    shortwave : global shortwave radiation [W m-2] (or [MJ m-2 d-1]); negative gives NaN.
    par_fraction : PAR share of shortwave [-], default :data:`PAR_FRACTION_OF_SHORTWAVE`.
    photons_per_joule : [µmol J-1], default :data:`PAR_PHOTONS_PER_JOULE` (McCree 1972).

    Returns
    -------
    PAR photon flux [µmol m-2 s-1] (or [mol m-2 d-1]).
    """
    return ops.where_valid(shortwave >= 0, shortwave * par_fraction * photons_per_joule)


@equation
def solar_declination(day_of_year):
    """Solar declination, FAO-56 eq. 24: δ = 0.409 sin(2π J / 365 − 1.39).

    Parameters
    ----------
    day_of_year : J [day], 1-366 (fractions allowed); outside gives NaN.

    Returns
    -------
    δ [rad].

    Reference: Allen et al. (1998) FAO-56, eq. 24.
    """
    valid = ops.in_range(day_of_year, 1, 366)
    return ops.where_valid(valid, 0.409 * ops.sin(2.0 * ops.pi * day_of_year / 365.0 - 1.39))


@equation
def inverse_relative_distance(day_of_year):
    """Inverse relative Earth-Sun distance, FAO-56 eq. 23: dr = 1 + 0.033 cos(2π J / 365).

    Parameters
    ----------
    day_of_year : J [day], 1-366; outside gives NaN.

    Returns
    -------
    dr [-].

    Reference: Allen et al. (1998) FAO-56, eq. 23.
    """
    valid = ops.in_range(day_of_year, 1, 366)
    return ops.where_valid(valid, 1.0 + 0.033 * ops.cos(2.0 * ops.pi * day_of_year / 365.0))


@equation
def sunset_hour_angle(latitude_deg, declination_rad):
    """Sunset hour angle, FAO-56 eq. 25: ωs = arccos(−tan φ tan δ).

    The argument is clipped to [−1, 1], so polar day gives ωs = π (no sunset) and polar night ωs = 0.

    Parameters
    ----------
    latitude_deg : φ [degrees north], −90..90; outside gives NaN.
    declination_rad : δ [rad].

    Returns
    -------
    ωs [rad], 0..π.

    Reference: Allen et al. (1998) FAO-56, eq. 25.
    """
    valid = ops.in_range(latitude_deg, -90.0, 90.0)
    # tan φ tan δ = (sin φ sin δ)/(cos φ cos δ) = a/b of solar_elevation_terms, which callers compute anyway
    # (no tangent to evaluate). cos φ cos δ >= 0 for |φ| <= 90°; rounding can leave it 0 or a hair below 0 at
    # a pole, where the floor keeps the sign of tan φ tan δ (polar day or night, as the tangents give).
    a, b = solar_elevation_terms(latitude_deg, declination_rad)  # invalid φ: NaN below anyway
    tangents = a / ops.maximum(b, 1e-300)
    # ops.minimum/ops.maximum rather than ops.clip: they are ufuncs, which xarray and dask keep lazy.
    omega = ops.arccos(ops.minimum(ops.maximum(-tangents, -1.0), 1.0))
    return ops.where_valid(valid, omega)


@equation
def solar_elevation_terms(latitude_deg, declination_rad):
    """a = sin φ sin δ and b = cos φ cos δ [-], so that sin β = a + b cos ω (see :func:`sin_solar_elevation`).

    Parameters
    ----------
    latitude_deg : φ [degrees north].
    declination_rad : δ [rad].
    """
    phi = ops.deg2rad(latitude_deg)
    return ops.sin(phi) * ops.sin(declination_rad), ops.cos(phi) * ops.cos(declination_rad)


@equation
def extraterrestrial_radiation(latitude_deg, day_of_year):
    """Daily extraterrestrial radiation on a horizontal surface, FAO-56 eq. 21.

    Ra = (24 · 60 / π) Gsc dr [ωs sin φ sin δ + cos φ cos δ sin ωs],  Gsc = 0.0820 MJ m-2 min-1

    Parameters
    ----------
    latitude_deg : φ [degrees north], −90..90.
    day_of_year : J [day], 1-366.

    Returns
    -------
    Ra [MJ m-2 d-1].

    Reference: Allen et al. (1998) FAO-56, eqs. 21, 23-25.
    """
    declination = solar_declination(day_of_year)
    omega_s = sunset_hour_angle(latitude_deg, declination)
    a, b = solar_elevation_terms(latitude_deg, declination)
    return 24.0 * 60.0 / ops.pi * 0.0820 * inverse_relative_distance(day_of_year) * (
        omega_s * a + b * ops.sin(omega_s))


@equation
def day_length(latitude_deg, day_of_year):
    """Daylight hours, FAO-56 eq. 34: N = 24 ωs / π.

    Parameters
    ----------
    latitude_deg : φ [degrees north], −90..90.
    day_of_year : J [day], 1-366.

    Returns
    -------
    N [h], 0..24.

    Reference: Allen et al. (1998) FAO-56, eq. 34.
    """
    return 24.0 / ops.pi * sunset_hour_angle(latitude_deg, solar_declination(day_of_year))


@equation
def sin_solar_elevation(latitude_deg, declination_rad, solar_hour):
    """Sine of the solar elevation: sin β = sin φ sin δ + cos φ cos δ cos ω, ω = π (t − 12) / 12.

    Negative values mean the sun is below the horizon.

    Parameters
    ----------
    latitude_deg : φ [degrees north].
    declination_rad : δ [rad].
    solar_hour : t, local apparent solar time [h] (12 = solar noon).

    Returns
    -------
    sin β [-].

    Reference: Spitters et al. (1986) eq. 6 (equation number from memory); the hour angle as FAO-56
    eq. 31 in solar time.
    """
    a, b = solar_elevation_terms(latitude_deg, declination_rad)
    return sin_solar_elevation_from_terms(a, b, solar_hour)


@equation
def sin_solar_elevation_from_terms(a, b, solar_hour):
    """sin β = a + b cos ω with ω = π (t − 12) / 12, from a and b of :func:`solar_elevation_terms` [-].

    Parameters
    ----------
    a, b : sin φ sin δ and cos φ cos δ [-].
    solar_hour : t, local apparent solar time [h].
    """
    return sin_solar_elevation_given_hour_angle(a, b, ops.cos(hour_angle(solar_hour)))


@equation
def hour_angle(solar_hour):
    """Solar hour angle ω = π (t − 12) / 12 [rad] (FAO-56 eq. 31, in solar time), 0 at solar noon.

    Parameters
    ----------
    solar_hour : t, local apparent solar time [h].
    """
    return (ops.pi / 12.0) * (solar_hour - 12.0)


@equation
def sin_solar_elevation_given_hour_angle(a, b, cos_hour_angle):
    """sin β = a + b cos ω [-] from a, b of :func:`solar_elevation_terms` and cos ω of :func:`hour_angle`.

    sin β is even in ω: the moments t and 24 − t (ω and −ω) see the same sun.
    """
    return a + b * cos_hour_angle


@equation
def daylight_integral_of_sin_elevation(latitude_deg, declination_rad,
                                       atmospheric_factor=DAILY_COURSE_ATMOSPHERIC_FACTOR):
    """Integral over the daylight period of sin β (1 + c sin β), in seconds.

    ∫ sin β dt = (24/π) (a ωs + b sin ωs) h
    ∫ sin²β dt = (12/π) [2 a² ωs + 4 a b sin ωs + b² (ωs + sin ωs cos ωs)] h

    with a = sin φ sin δ, b = cos φ cos δ (derived here by integrating sin β = a + b cos ω over
    −ωs..ωs; Goudriaan & van Laar 1994 use the same integral, "DSINBE").

    Parameters
    ----------
    latitude_deg : φ [degrees north].
    declination_rad : δ [rad].
    atmospheric_factor : c [-], default 0.4.

    Returns
    -------
    The integral [s] (0 in polar night).
    """
    omega_s = sunset_hour_angle(latitude_deg, declination_rad)
    a, b = solar_elevation_terms(latitude_deg, declination_rad)
    sin_w = ops.sin(omega_s)
    integral_sin = 24.0 / ops.pi * (a * omega_s + b * sin_w)
    integral_sin2 = 12.0 / ops.pi * (2 * a * a * omega_s + 4 * a * b * sin_w
                                    + b * b * (omega_s + sin_w * ops.cos(omega_s)))
    return 3600.0 * (integral_sin + atmospheric_factor * integral_sin2)


@equation
def shortwave_daily_course(daily_shortwave_mj, sin_elevation, daylight_integral_s,
                           atmospheric_factor=DAILY_COURSE_ATMOSPHERIC_FACTOR):
    """Global radiation at one moment from the daily total, distributed as sin β (1 + 0.4 sin β).

    Sg(t) = Sg,day · sin β (1 + 0.4 sin β) / ∫ sin β (1 + 0.4 sin β) dt

    Parameters
    ----------
    daily_shortwave_mj : daily global radiation [MJ m-2 d-1]; negative gives NaN.
    sin_elevation : sin β at that moment [-]; ≤ 0 gives 0 (night).
    daylight_integral_s : :func:`daylight_integral_of_sin_elevation` for the day [s].
    atmospheric_factor : the 0.4 [-]; must match the one of ``daylight_integral_s``.

    Returns
    -------
    Sg(t) [W m-2].

    Reference: Goudriaan & van Laar (1994); Spitters et al. (1986) (form from memory).
    """
    return shortwave_course_given_amplitude(daily_course_amplitude(daily_shortwave_mj, daylight_integral_s),
                                            sin_elevation, atmospheric_factor)


@equation
def daily_course_amplitude(daily_shortwave_mj, daylight_integral_s):
    """A = 10⁶ Sg,day / ∫ sin β (1 + c sin β) dt [W m-2], so that Sg(t) = A sin β (1 + c sin β)
    (:func:`shortwave_daily_course`); 0 where the integral is 0 (polar night); NaN where Sg,day < 0.

    It is fixed for the day, so a caller evaluating many moments computes it (and its division) once.

    Parameters
    ----------
    daily_shortwave_mj : daily global (or diffuse) radiation [MJ m-2 d-1].
    daylight_integral_s : :func:`daylight_integral_of_sin_elevation` for the day, with the same c [s].
    """
    has_daylight = daylight_integral_s > 0
    amplitude = 1e6 * daily_shortwave_mj / ops.where(has_daylight, daylight_integral_s, 1.0)
    return ops.where_valid(daily_shortwave_mj >= 0, ops.where(has_daylight, amplitude, 0.0))


@equation
def shortwave_course_given_amplitude(amplitude_w, sin_elevation, atmospheric_factor=DAILY_COURSE_ATMOSPHERIC_FACTOR):
    """Sg(t) = A sin β (1 + c sin β) [W m-2], 0 while the sun is down (sin β <= 0).

    Parameters
    ----------
    amplitude_w : A of :func:`daily_course_amplitude` [W m-2] (NaN stays NaN, also at night).
    sin_elevation : sin β [-].
    atmospheric_factor : c [-], the one of the daylight integral behind ``amplitude_w``.

    Reference: Goudriaan & van Laar (1994); Spitters et al. (1986) (form from memory).
    """
    sun_up = sin_elevation > 0
    sin_b = ops.where(sun_up, sin_elevation, 0.0)
    return ops.where(sun_up, amplitude_w * sin_b * (1.0 + atmospheric_factor * sin_b), 0.0 * amplitude_w)


@equation
def daily_clearness(shortwave_mj, extraterrestrial_mj):
    """Daily clearness τ = Sg / Ra [-]; 0 where the sun does not rise (Ra = 0).

    Parameters
    ----------
    shortwave_mj : daily global radiation Sg [MJ m-2 d-1].
    extraterrestrial_mj : daily extraterrestrial radiation Ra (:func:`extraterrestrial_radiation`) [MJ m-2 d-1].
    """
    sun_rises = extraterrestrial_mj > 0
    return ops.where_valid(sun_rises, shortwave_mj / ops.where_valid(sun_rises, extraterrestrial_mj, 1.0), 0.0)


@equation
def diffuse_fraction_daily(clearness):
    """Diffuse share of daily global radiation from the daily clearness τ = Sg / Ra.

    Sd/Sg = 1                       for τ < 0.07
          = 1 − 2.3 (τ − 0.07)²     for 0.07 ≤ τ < 0.35
          = 1.33 − 1.46 τ           for 0.35 ≤ τ < 0.75
          = 0.23                    for τ ≥ 0.75

    Parameters
    ----------
    clearness : τ, daily global over extraterrestrial radiation [-]; negative gives NaN.

    Returns
    -------
    Sd/Sg [-].

    Reference: Spitters et al. (1986) eq. 2 (after de Jong 1980); coefficients from memory, matching
    published restatements.
    """
    tau = clearness
    fraction = ops.where_valid(tau < 0.07, 1.0,
                           ops.where_valid(tau < 0.35, 1.0 - 2.3 * (tau - 0.07) ** 2,
                                       ops.where_valid(tau < 0.75, 1.33 - 1.46 * tau, 0.23)))
    return ops.where_valid(tau >= 0, fraction)


@equation
def diffuse_fraction_instantaneous(clearness, sin_elevation):
    """Diffuse share of global radiation at one moment from the clearness τ = Sg / (Gsc dr sin β).

    Sdf/Sg = 1                      for τ < 0.22
           = 1 − 6.4 (τ − 0.22)²    for 0.22 ≤ τ < 0.35
           = 1.47 − 1.66 τ          for 0.35 ≤ τ < K
           = R                      for τ ≥ K
    R = 0.847 − 1.61 sin β + 1.04 sin²β,  K = (1.47 − R) / 1.66

    Parameters
    ----------
    clearness : τ [-]; negative gives NaN.
    sin_elevation : sin β [-].

    Returns
    -------
    Sdf/Sg [-].

    Reference: Spitters et al. (1986) eq. 20 (hourly relation; equation number and coefficients from
    memory, matching published restatements).
    """
    tau = clearness
    s = ops.minimum(ops.maximum(sin_elevation, 0.0), 1.0)
    clear_limit = 0.847 - 1.61 * s + 1.04 * s * s
    knee = (1.47 - clear_limit) / 1.66
    fraction = ops.where_valid(tau < 0.22, 1.0,
                           ops.where_valid(tau < 0.35, 1.0 - 6.4 * (tau - 0.22) ** 2,
                                       ops.where_valid(tau < knee, 1.47 - 1.66 * tau, clear_limit)))
    return ops.where_valid(tau >= 0, fraction)


@equation
def beam_extinction_coefficient(sin_elevation):
    """Extinction coefficient of the direct beam for black leaves of spherical angle distribution.

    kb = 0.5 / sin β   (sin β floored at :data:`MIN_SIN_ELEVATION`)

    Parameters
    ----------
    sin_elevation : sin β [-].

    Returns
    -------
    kb [-].

    Reference: de Pury & Farquhar (1997) Table A1 (spherical leaf angle distribution).
    """
    return 0.5 / ops.maximum(sin_elevation, MIN_SIN_ELEVATION)


@equation
def scattered_extinction_coefficient(black_leaf_coefficient, scattering=LEAF_SCATTERING_PAR):
    """Extinction coefficient of beam (or diffuse) plus scattered light: k' = k √(1 − σ).

    Parameters
    ----------
    black_leaf_coefficient : k for black leaves [-].
    scattering : leaf scattering coefficient σ [-], default 0.15 for PAR.

    Returns
    -------
    k' [-].

    Reference: de Pury & Farquhar (1997) Table A1 (kb' = kb √(1 − σ), kd' = 0.719).
    """
    return black_leaf_coefficient * ops.sqrt(1.0 - scattering)


@equation
def canopy_beam_reflection(beam_extinction, scattering=LEAF_SCATTERING_PAR):
    """Canopy reflection coefficient for beam irradiance of a deep canopy.

    ρcb = 1 − exp(−2 ρh kb / (1 + kb)),  ρh = (1 − √(1 − σ)) / (1 + √(1 − σ))

    Parameters
    ----------
    beam_extinction : kb [-].
    scattering : σ [-].

    Returns
    -------
    ρcb [-].

    Reference: de Pury & Farquhar (1997) Table A1 (after Goudriaan 1977) (from memory).
    """
    root = ops.sqrt(1.0 - scattering)
    horizontal = (1.0 - root) / (1.0 + root)
    return ops.one_minus_exp_neg(2.0 * horizontal * beam_extinction / (1.0 + beam_extinction))


@equation
def sunlit_leaf_area_index(lai, beam_extinction):
    """Sunlit leaf area per ground area: Lsun = (1 − exp(−kb L)) / kb.

    Parameters
    ----------
    lai : canopy leaf area index L [m2 m-2].
    beam_extinction : kb [-].

    Returns
    -------
    Lsun [m2 m-2].

    Reference: de Pury & Farquhar (1997) eq. 18 (equation number from memory).
    """
    return ops.one_minus_exp_neg(beam_extinction * lai) / beam_extinction


class SunShadeLight(NamedTuple):
    """PAR absorbed by the sunlit and shaded leaves of a canopy (de Pury & Farquhar 1997).

    Per-ground fields are [µmol m-2 ground s-1]; per-leaf fields [µmol m-2 leaf s-1] are the mean over
    the sunlit (or shaded) leaves, 0 where that leaf class has no area.
    """

    sunlit_lai: Any
    shaded_lai: Any
    sunlit_absorbed: Any
    shaded_absorbed: Any
    canopy_absorbed: Any
    sunlit_absorbed_per_leaf: Any
    shaded_absorbed_per_leaf: Any


@equation
def diffuse_absorption(lai, scattering=LEAF_SCATTERING_PAR, diffuse_extinction=DIFFUSE_EXTINCTION_BLACK_LEAVES):
    """E(kd') = 1 − exp(−kd' L), the share of diffuse light the canopy intercepts [-].

    kd' = kd √(1 − σ) (:func:`scattered_extinction_coefficient`). It depends on the canopy only, so a
    caller that evaluates many moments of one day computes it once (:func:`sun_shade_absorbed_par_given`).

    Parameters
    ----------
    lai : L [m2 m-2].
    scattering : σ [-]; diffuse_extinction : kd for black leaves [-].
    """
    return ops.one_minus_exp_neg(scattered_extinction_coefficient(diffuse_extinction, scattering) * lai)


@equation
def sun_shade_absorbed_par(beam_par, diffuse_par, lai, sin_elevation, scattering=LEAF_SCATTERING_PAR,
                           diffuse_extinction=DIFFUSE_EXTINCTION_BLACK_LEAVES,
                           diffuse_reflection=CANOPY_DIFFUSE_REFLECTION_PAR):
    """Absorbed PAR of the sunlit and the shaded leaves of a canopy, de Pury & Farquhar (1997).

    With kb = 0.5/sin β, kb' = kb √(1−σ), kd' = kd √(1−σ), ρcb from :func:`canopy_beam_reflection`,
    Ib and Id the beam and diffuse PAR on a horizontal plane above the canopy, E(x) = 1 − exp(−x L):

    canopy   Ic   = (1−ρcb) Ib E(kb') + (1−ρcd) Id E(kd')                            (eq. 13)
    sunlit   Isun = Ib (1−σ) E(kb)                                                   direct beam
                  + (1−ρcd) Id kd'/(kd'+kb) E(kd'+kb)                                 diffuse
                  + Ib [(1−ρcb) kb'/(kb'+kb) E(kb'+kb) − (1−σ) E(2 kb)/2]             scattered beam
    shaded   Ish  = (1−ρcd) Id [E(kd') − kd'/(kd'+kb) E(kd'+kb)]
                  + Ib [(1−ρcb) (E(kb') − kb'/(kb'+kb) E(kb'+kb)) − (1−σ) (E(kb) − E(2 kb)/2)]

    E of a sum of coefficients follows from E of each, E(k1 + k2) = E1 + E2 − E1 E2 (exact), so only
    E(kb), E(kb') and E(kd') take an exponential. The shaded part is computed from its own integral (not
    as Ic − Isun), so Isun + Ish = Ic is a check of the algebra. Leaf capacity and absorptance are not
    scaled through the canopy here.

    Parameters
    ----------
    beam_par : direct-beam PAR on a horizontal plane above the canopy [µmol m-2 s-1]; < 0 gives NaN.
    diffuse_par : diffuse PAR on a horizontal plane above the canopy [µmol m-2 s-1]; < 0 gives NaN.
    lai : leaf area index L [m2 m-2]; < 0 gives NaN.
    sin_elevation : sin β [-] (floored at :data:`MIN_SIN_ELEVATION`).
    scattering : leaf scattering coefficient σ for PAR [-], default 0.15.
    diffuse_extinction : kd for black leaves [-], default 0.78.
    diffuse_reflection : canopy reflection coefficient for diffuse PAR ρcd [-], default 0.036.

    Returns
    -------
    :class:`SunShadeLight`.

    Reference: de Pury & Farquhar (1997) eqs. 13-20 and Table A1 (equation numbers from memory).
    """
    return sun_shade_absorbed_par_given(beam_par, diffuse_par, lai, sin_elevation,
                                        diffuse_absorption(lai, scattering, diffuse_extinction), scattering,
                                        diffuse_extinction, diffuse_reflection)


@equation
def sun_shade_absorbed_par_given(beam_par, diffuse_par, lai, sin_elevation, diffuse_absorbed_share,
                                 scattering=LEAF_SCATTERING_PAR,
                                 diffuse_extinction=DIFFUSE_EXTINCTION_BLACK_LEAVES,
                                 diffuse_reflection=CANOPY_DIFFUSE_REFLECTION_PAR):
    """:func:`sun_shade_absorbed_par` with E(kd') given (``diffuse_absorbed_share``, from
    :func:`diffuse_absorption` of the same ``lai`` and coefficients) [-]."""
    valid = (beam_par >= 0) & (diffuse_par >= 0) & (lai >= 0)
    kb = beam_extinction_coefficient(sin_elevation)
    kb_s = scattered_extinction_coefficient(kb, scattering)
    kd_s = scattered_extinction_coefficient(diffuse_extinction, scattering)
    absorbed_beam = (1.0 - canopy_beam_reflection(kb, scattering)) * beam_par
    absorbed_diffuse = (1.0 - diffuse_reflection) * diffuse_par
    direct = beam_par * (1.0 - scattering)
    e_kd = diffuse_absorbed_share
    e_kb = ops.one_minus_exp_neg(kb * lai)
    e_kbs = ops.one_minus_exp_neg(kb_s * lai)
    e_2kb = e_kb * (2.0 - e_kb)
    diffuse_to_sunlit = kd_s / (kd_s + kb) * (e_kd + e_kb - e_kd * e_kb)
    # kb'/(kb' + kb) with kb' = kb √(1 − σ) is √(1 − σ)/(√(1 − σ) + 1): the same for every kb
    root = scattered_extinction_coefficient(1.0, scattering)
    scattered_to_sunlit = root / (root + 1.0) * (e_kbs + e_kb - e_kbs * e_kb)
    canopy = absorbed_beam * e_kbs + absorbed_diffuse * e_kd
    sunlit = (direct * e_kb + absorbed_diffuse * diffuse_to_sunlit
              + absorbed_beam * scattered_to_sunlit - direct * e_2kb / 2.0)
    shaded = (absorbed_diffuse * (e_kd - diffuse_to_sunlit)
              + absorbed_beam * (e_kbs - scattered_to_sunlit)
              - direct * (e_kb - e_2kb / 2.0))

    sunlit_lai = e_kb / kb  # sunlit_leaf_area_index, with E(kb) already at hand
    shaded_lai = ops.maximum(lai - sunlit_lai, 0.0)
    # Rounding can leave a tiny negative absorbed flux for very thin canopies: clip, it has no area.
    sunlit_per_leaf = ops.where(sunlit_lai > 0, ops.maximum(sunlit, 0.0)
                                / ops.where(sunlit_lai > 0, sunlit_lai, 1.0), 0.0)
    shaded_per_leaf = ops.where(shaded_lai > 0, ops.maximum(shaded, 0.0)
                                / ops.where(shaded_lai > 0, shaded_lai, 1.0), 0.0)
    return SunShadeLight(
        ops.where_valid(valid, sunlit_lai),
        ops.where_valid(valid, shaded_lai),
        ops.where_valid(valid, sunlit),
        ops.where_valid(valid, shaded),
        ops.where_valid(valid, canopy),
        ops.where_valid(valid, sunlit_per_leaf),
        ops.where_valid(valid, shaded_per_leaf),
    )
