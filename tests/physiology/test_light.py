"""Tests of suitability.physiology.light.

Sources: FAO-56 (Allen et al. 1998) worked examples; the independent PyPI libraries `pyet` (FAO-56
radiation functions) and `pvlib` (solar geometry, extraterrestrial irradiance, the Erbs et al. 1982
diffuse model); de Pury & Farquhar (1997, Plant Cell Environ 20:537) for the sun/shade canopy, checked
by numerical integration of their layer equations; Monsi & Saeki (1953) Beer's law; Campbell & Norman
(1998) for the leaf-angle extinction coefficient.
"""

import dask.array as da
import numpy as np
import pandas as pd
import pvlib
import pyet
import pytest
import xarray as xr
from scipy import integrate

from suitability.physiology import light

SEPTEMBER_3 = 246  # day of year of 3 September in a non-leap year (FAO-56 Example 8)


def test_fao56_example_8_extraterrestrial_radiation():
    # FAO-56 Example 8: 20° S on 3 September, Ra = 32.2 MJ m-2 d-1.
    assert light.extraterrestrial_radiation(-20.0, SEPTEMBER_3) == pytest.approx(32.2, abs=0.05)
    # Intermediate values of the same example (from memory): dr 0.985, δ 0.120 rad, ωs 1.527 rad.
    assert light.inverse_relative_distance(SEPTEMBER_3) == pytest.approx(0.985, abs=0.0005)
    declination = light.solar_declination(SEPTEMBER_3)
    assert declination == pytest.approx(0.120, abs=0.0005)
    assert light.sunset_hour_angle(-20.0, declination) == pytest.approx(1.527, abs=0.0005)


def test_fao56_example_9_day_length():
    # FAO-56 Example 9: same place and day, N = 11.7 h.
    assert light.day_length(-20.0, SEPTEMBER_3) == pytest.approx(11.7, abs=0.05)


@pytest.fixture(scope="module")
def days_2023():
    return pd.date_range("2023-01-01", "2023-12-31", freq="D")


@pytest.mark.parametrize("latitude", [-60.0, -45.0, -23.4, -5.0, 0.0, 12.0, 35.0, 50.0, 60.0])
def test_radiation_and_day_length_match_pyet(latitude, days_2023):
    # Independent library: pyet.extraterrestrial_r (FAO-56 eq. 21) and daylight_hours (eq. 34).
    doy = days_2023.dayofyear.to_numpy()
    lat_rad = np.deg2rad(latitude)
    np.testing.assert_allclose(light.extraterrestrial_radiation(latitude, doy),
                               pyet.extraterrestrial_r(days_2023, lat_rad), rtol=1e-9, atol=1e-9)
    np.testing.assert_allclose(light.day_length(latitude, doy),
                               pyet.daylight_hours(days_2023, lat_rad), rtol=1e-9, atol=1e-9)


def test_astronomy_matches_pyet_components_and_polar_cases(days_2023):
    # Independent library: pyet's FAO-56 eqs. 23-25, including clipped polar day and night.
    doy = days_2023.dayofyear.to_numpy()
    np.testing.assert_allclose(light.solar_declination(doy), pyet.meteo_utils.solar_declination(doy),
                               rtol=1e-12)
    np.testing.assert_allclose(light.inverse_relative_distance(doy), pyet.meteo_utils.relative_distance(doy),
                               rtol=1e-12)
    for latitude in (-89.0, -75.0, 70.0, 85.0):
        np.testing.assert_allclose(
            light.sunset_hour_angle(latitude, light.solar_declination(doy)),
            pyet.meteo_utils.sunset_angle(pyet.meteo_utils.solar_declination(doy), np.deg2rad(latitude)),
            rtol=1e-12, atol=1e-12)
    # Polar day and night (FAO-56 eq. 25 clipped): 24 h and 0 h at 80° in late June, no NaN.
    assert light.day_length(80.0, 172) == pytest.approx(24.0)
    assert light.day_length(-80.0, 172) == pytest.approx(0.0)
    assert light.extraterrestrial_radiation(-80.0, 172) == pytest.approx(0.0, abs=1e-12)


def test_earth_sun_distance_matches_pvlib():
    # Independent library: pvlib.irradiance.get_extra_radiation(method="asce") is Gsc (1 + 0.033 cos(2πJ/365)),
    # the same dr as FAO-56 eq. 23.
    doy = np.arange(1, 366)
    dni_extra = pvlib.irradiance.get_extra_radiation(doy, solar_constant=1.0, method="asce")
    np.testing.assert_allclose(light.inverse_relative_distance(doy), dni_extra, rtol=1e-12)


def test_declination_close_to_pvlib_cooper():
    # Independent library: pvlib's Cooper (1969) declination is a different published fit of the same
    # quantity; FAO-56 eq. 24 stays within 0.003 rad (0.17°) of it over the year.
    doy = np.arange(1, 366)
    cooper = pvlib.solarposition.declination_cooper69(doy)
    assert np.abs(light.solar_declination(doy) - cooper).max() < 0.003


def test_sin_elevation_matches_pvlib_zenith():
    # Independent library: pvlib.solarposition.solar_zenith_analytical gives cos(zenith) = sin(elevation).
    latitude = np.array([-60.0, -40.0, -10.0, 0.0, 25.0, 45.0, 60.0])[:, None]
    hours = np.linspace(0.0, 24.0, 25)[None, :]
    declination = light.solar_declination(100)
    zenith = pvlib.solarposition.solar_zenith_analytical(
        np.deg2rad(latitude), np.pi * (hours - 12.0) / 12.0, declination)
    np.testing.assert_allclose(light.sin_solar_elevation(latitude, declination, hours), np.cos(zenith),
                               atol=1e-12)


@pytest.mark.parametrize("latitude,day", [(-20.0, SEPTEMBER_3), (0.0, 80), (45.0, 172), (60.0, 355),
                                          (-38.0, 15), (75.0, 160)])
def test_daylight_integral(latitude, day):
    declination = light.solar_declination(day)
    # Derived here: quadrature of sin β (1 + 0.4 sin β) over the daylight hours.
    def integrand(hour):
        s = max(light.sin_solar_elevation(latitude, declination, hour), 0.0)
        return s * (1.0 + 0.4 * s)
    numeric, _ = integrate.quad(integrand, 0.0, 24.0, limit=200, points=[12.0])
    assert light.daylight_integral_of_sin_elevation(latitude, declination) == pytest.approx(
        3600.0 * numeric, rel=1e-6)
    # Independent library: Gsc dr ∫ sin β dt is Ra, which pyet computes from FAO-56 eq. 21.
    ra = light.SOLAR_CONSTANT_W_M2 * light.inverse_relative_distance(day) * \
        light.daylight_integral_of_sin_elevation(latitude, declination, atmospheric_factor=0.0) / 1e6
    date = pd.DatetimeIndex([pd.Timestamp("2023-01-01") + pd.Timedelta(days=day - 1)])
    assert ra == pytest.approx(float(pyet.extraterrestrial_r(date, np.deg2rad(latitude)).iloc[0]), rel=1e-9)


def test_shortwave_daily_course_returns_the_daily_total():
    # Derived here: integrating Sg(t) (Goudriaan & van Laar 1994 form) over the day returns Sg,day.
    latitude, day, total = -24.0, 30, 22.5
    declination = light.solar_declination(day)
    hours = (np.arange(2880) + 0.5) / 120.0
    sin_b = light.sin_solar_elevation(latitude, declination, hours)
    course = light.shortwave_daily_course(total, sin_b,
                                          light.daylight_integral_of_sin_elevation(latitude, declination))
    assert course.sum() * 30.0 / 1e6 == pytest.approx(total, rel=1e-5)
    # The same with the atmospheric factor 0 (the course of diffuse light, proportional to sin β).
    diffuse = light.shortwave_daily_course(
        7.0, sin_b, light.daylight_integral_of_sin_elevation(latitude, declination, atmospheric_factor=0.0),
        atmospheric_factor=0.0)
    assert diffuse.sum() * 30.0 / 1e6 == pytest.approx(7.0, rel=1e-5)
    np.testing.assert_allclose(diffuse / diffuse.max(), np.maximum(sin_b, 0) / sin_b.max(), atol=1e-12)
    assert (course[sin_b <= 0] == 0).all()
    # Polar night: no course, no NaN.
    night = light.shortwave_daily_course(1.0, -0.2, light.daylight_integral_of_sin_elevation(-80.0, 0.4))
    assert night == 0.0


def test_par_conversion():
    # PAR = 0.5 of shortwave (Goudriaan & van Laar 1994, from memory) and 4.57 µmol J-1 (McCree 1972,
    # from memory): 500 W m-2 is 1142.5 µmol m-2 s-1, 20 MJ m-2 d-1 is 45.7 mol m-2 d-1.
    assert light.par_from_shortwave(500.0) == pytest.approx(1142.5)
    assert light.par_from_shortwave(20.0) == pytest.approx(45.7)
    assert np.isnan(light.par_from_shortwave(-1.0))


def test_daily_diffuse_fraction_spitters():
    # Spitters et al. (1986) eq. 2: overcast limit 1, clear limit 0.23, and 1.33 - 1.46 τ between.
    assert light.diffuse_fraction_daily(0.03) == 1.0
    assert light.diffuse_fraction_daily(0.9) == pytest.approx(0.23)
    assert light.diffuse_fraction_daily(0.5) == pytest.approx(1.33 - 1.46 * 0.5)
    # The published pieces meet at τ = 0.35 within 0.001 and at 0.75 within 0.006 (derived here from eq. 2).
    assert light.diffuse_fraction_daily(0.35 - 1e-9) == pytest.approx(light.diffuse_fraction_daily(0.35),
                                                                       abs=0.001)
    assert light.diffuse_fraction_daily(0.75 - 1e-9) == pytest.approx(0.23, abs=0.006)
    tau = np.linspace(0.0, 1.0, 101)
    assert (np.diff(light.diffuse_fraction_daily(tau)) <= 1e-12).all()


def test_instantaneous_diffuse_fraction_close_to_pvlib_erbs():
    # Independent library: pvlib's Erbs et al. (1982) diffuse model is another published fit of the same
    # relation; with the sun high (sin β >= 0.7) and clearness up to 0.7, Spitters et al. (1986) eq. 20
    # stays within 0.08 of it. Clearer skies differ by design: Erbs levels off at 0.165, Spitters at
    # R = 0.847 - 1.61 sin β + 1.04 sin²β (0.277 at sin β = 1).
    kt = np.linspace(0.05, 0.7, 27)
    for sin_b in (0.7, 0.85, 1.0):
        zenith_deg = np.rad2deg(np.arccos(sin_b))
        dni_extra = pvlib.irradiance.get_extra_radiation(172)
        ghi = kt * dni_extra * sin_b
        erbs = pvlib.irradiance.erbs(ghi, zenith_deg, 172)
        ours = light.diffuse_fraction_instantaneous(erbs["kt"], sin_b)
        assert np.abs(ours - erbs["dhi"] / ghi).max() < 0.08
        assert light.diffuse_fraction_instantaneous(0.9, sin_b) == pytest.approx(
            0.847 - 1.61 * sin_b + 1.04 * sin_b ** 2)
    # At low sun the clear-sky diffuse share rises (Spitters et al. 1986, the sin β term of R).
    assert light.diffuse_fraction_instantaneous(0.9, 0.2) > light.diffuse_fraction_instantaneous(0.9, 0.9)


def test_beam_extinction_matches_campbell_norman_spherical():
    # Campbell & Norman (1998) eq. 15.4 (from memory), ellipsoidal leaf angles with x = 1 (spherical):
    # kb = sqrt(x² + tan²θ) / (x + 1.774 (x + 1.182)^-0.733), within 0.2 % of 0.5 / sin β.
    elevation = np.deg2rad(np.linspace(5.0, 90.0, 18))
    zenith = np.pi / 2 - elevation
    campbell = np.sqrt(1.0 + np.tan(zenith) ** 2) / (1.0 + 1.774 * 2.182 ** -0.733)
    np.testing.assert_allclose(light.beam_extinction_coefficient(np.sin(elevation)), campbell, rtol=2e-3)
    # de Pury & Farquhar (1997) Table A1 (from memory): kd' = 0.719 for σ = 0.15.
    assert light.scattered_extinction_coefficient(light.DIFFUSE_EXTINCTION_BLACK_LEAVES) == pytest.approx(
        0.719, abs=0.001)


CANOPY_CASES = [  # beam PAR, diffuse PAR [µmol m-2 s-1], LAI, sin β
    (1400.0, 250.0, 3.0, 0.9), (600.0, 300.0, 0.5, 0.4), (0.0, 400.0, 6.0, 0.3),
    (900.0, 0.0, 1.5, 0.15), (1700.0, 180.0, 8.0, 1.0), (50.0, 120.0, 2.0, 0.05),
]


@pytest.mark.parametrize("beam,diffuse,lai,sin_b", CANOPY_CASES)
def test_sun_shade_matches_integrated_layer_profile(beam, diffuse, lai, sin_b):
    # de Pury & Farquhar (1997) light profile within the canopy, integrated numerically here (scipy):
    # shaded leaves at depth l absorb diffuse (1-ρcd) kd' Id e^(-kd' l) and scattered beam
    # Ib [(1-ρcb) kb' e^(-kb' l) - (1-σ) kb e^(-kb l)]; sunlit leaves (fraction e^(-kb l)) add (1-σ) kb Ib.
    sigma, rho_cd = light.LEAF_SCATTERING_PAR, light.CANOPY_DIFFUSE_REFLECTION_PAR
    kb = 0.5 / sin_b
    kb_s, kd_s = kb * np.sqrt(1 - sigma), light.DIFFUSE_EXTINCTION_BLACK_LEAVES * np.sqrt(1 - sigma)
    rho_cb = light.canopy_beam_reflection(kb, sigma)

    def shade_leaf(depth):
        return ((1 - rho_cd) * kd_s * diffuse * np.exp(-kd_s * depth)
                + beam * ((1 - rho_cb) * kb_s * np.exp(-kb_s * depth) - (1 - sigma) * kb * np.exp(-kb * depth)))

    def sunlit_fraction(depth):
        return np.exp(-kb * depth)

    sunlit, _ = integrate.quad(lambda l: sunlit_fraction(l) * (shade_leaf(l) + (1 - sigma) * kb * beam), 0, lai)
    shaded, _ = integrate.quad(lambda l: (1 - sunlit_fraction(l)) * shade_leaf(l), 0, lai)
    sunlit_lai, _ = integrate.quad(sunlit_fraction, 0, lai)

    result = light.sun_shade_absorbed_par(beam, diffuse, lai, sin_b)
    assert result.sunlit_absorbed == pytest.approx(sunlit, rel=1e-7, abs=1e-9)
    assert result.shaded_absorbed == pytest.approx(shaded, rel=1e-7, abs=1e-9)
    assert result.sunlit_lai == pytest.approx(sunlit_lai, rel=1e-9)
    assert result.shaded_lai == pytest.approx(lai - sunlit_lai, rel=1e-7)
    assert result.sunlit_absorbed_per_leaf == pytest.approx(sunlit / sunlit_lai, rel=1e-7)
    # de Pury & Farquhar (1997): sunlit + shaded = absorbed by the canopy (eq. 13), each computed apart.
    assert result.sunlit_absorbed + result.shaded_absorbed == pytest.approx(result.canopy_absorbed, rel=1e-10)


def test_sun_shade_limits():
    # Beer's law (Monsi & Saeki 1953): without scattering or reflection the canopy absorbs
    # Ib (1 - e^(-kb L)) + Id (1 - e^(-kd L)).
    beam, diffuse, lai, sin_b = 1200.0, 300.0, 2.5, 0.6
    black = light.sun_shade_absorbed_par(beam, diffuse, lai, sin_b, scattering=0.0, diffuse_reflection=0.0)
    kb, kd = 0.5 / sin_b, light.DIFFUSE_EXTINCTION_BLACK_LEAVES
    beer = beam * (1 - np.exp(-kb * lai)) + diffuse * (1 - np.exp(-kd * lai))
    assert black.canopy_absorbed == pytest.approx(beer, rel=1e-12)
    # Sunlit black leaves get the whole beam (de Pury & Farquhar 1997 with σ = 0).
    assert black.sunlit_absorbed - diffuse * kd / (kd + kb) * (1 - np.exp(-(kd + kb) * lai)) == pytest.approx(
        beam * (1 - np.exp(-kb * lai)), rel=1e-12)
    # Deep canopy (de Pury & Farquhar 1997): all but the reflected share is absorbed; sunlit LAI -> 1/kb.
    deep = light.sun_shade_absorbed_par(beam, diffuse, 30.0, sin_b)
    rho_cb = light.canopy_beam_reflection(kb)
    assert deep.canopy_absorbed == pytest.approx((1 - rho_cb) * beam + (1 - 0.036) * diffuse, rel=1e-9)
    assert deep.sunlit_lai == pytest.approx(1 / kb, rel=1e-9)
    # No leaves, no absorption and no NaN.
    bare = light.sun_shade_absorbed_par(beam, diffuse, 0.0, sin_b)
    assert (bare.canopy_absorbed, bare.sunlit_absorbed_per_leaf, bare.shaded_absorbed_per_leaf) == (0.0, 0.0, 0.0)


def test_invalid_inputs_give_nan_elementwise():
    # Project contract (docs/contracts.md): invalid elements are NaN, never an exception mid-array.
    latitude = np.array([10.0, 95.0, np.nan, -91.0])
    assert np.isfinite(light.extraterrestrial_radiation(latitude, 100)).tolist() == [True, False, False, False]
    assert np.isfinite(light.day_length(10.0, np.array([0, 1, 366, 400]))).tolist() == [False, True, True, False]
    result = light.sun_shade_absorbed_par(np.array([1000.0, -5.0, 1000.0]), 200.0,
                                          np.array([3.0, 3.0, -1.0]), 0.7)
    assert np.isfinite(result.canopy_absorbed).tolist() == [True, False, False]
    assert np.isnan(light.diffuse_fraction_daily(-0.1)) and np.isnan(light.diffuse_fraction_instantaneous(np.nan, 0.5))


def test_xarray_and_dask_inputs():
    # Reference values: the numpy path (checked against pyet and integration above).
    latitude = np.linspace(-40.0, 40.0, 12).reshape(3, 4)
    lazy_lat = xr.DataArray(da.from_array(latitude, chunks=2), dims=("y", "x"))
    ra = light.extraterrestrial_radiation(lazy_lat, 200)
    assert isinstance(ra.data, da.Array)
    np.testing.assert_array_equal(ra.values, light.extraterrestrial_radiation(latitude, 200))
    lai = np.linspace(0.5, 6.0, 12).reshape(3, 4)
    lazy_lai = xr.DataArray(da.from_array(lai, chunks=2), dims=("y", "x"))
    lazy = light.sun_shade_absorbed_par(900.0, 200.0, lazy_lai, 0.5)
    eager = light.sun_shade_absorbed_par(900.0, 200.0, lai, 0.5)
    for name in ("sunlit_absorbed_per_leaf", "shaded_absorbed_per_leaf", "canopy_absorbed", "sunlit_lai"):
        value = getattr(lazy, name)
        assert isinstance(value.data, da.Array), name
        np.testing.assert_array_equal(value.values, getattr(eager, name))
