"""Net radiation and the energy limit of transpiration (suitability.physiology.energy).

Oracle: the independent library pyet (FAO-56 radiation functions and the Priestley-Taylor method).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pyet
import pytest
from pyet import rad_utils

from suitability.physiology.atmosphere import air_pressure_from_elevation, saturation_vapour_pressure
from suitability.physiology.energy import (
    clear_sky_radiation,
    energy_limited_transpiration_mm,
    net_longwave_radiation,
    net_radiation,
)
from suitability.physiology.light import extraterrestrial_radiation


def _days(seed=3, count=40):
    rng = np.random.default_rng(seed)
    tmin = rng.uniform(-5.0, 25.0, count)
    tmax = tmin + rng.uniform(4.0, 16.0, count)
    latitude = rng.uniform(-50.0, 50.0, count)
    day = rng.integers(1, 366, count).astype(float)
    ra = extraterrestrial_radiation(latitude, day)
    shortwave = rng.uniform(0.3, 0.78, count) * ra
    elevation = rng.uniform(0.0, 2500.0, count)
    ea = saturation_vapour_pressure(tmin - rng.uniform(0.0, 4.0, count))
    return tmin, tmax, latitude, day, ra, shortwave, elevation, ea


def test_clear_sky_and_net_longwave_match_pyet():
    # pyet (FAO-56 eqs. 37 and 39) as the independent reference.
    tmin, tmax, _, _, ra, shortwave, elevation, ea = _days()
    rso = clear_sky_radiation(ra, elevation)
    np.testing.assert_allclose(rso, rad_utils.calc_rso(ra, elevation), rtol=1e-12)
    expected = rad_utils.calc_rad_long(pd.Series(shortwave), tmax=pd.Series(tmax), tmin=pd.Series(tmin),
                                       rso=pd.Series(rso), ea=pd.Series(ea))
    np.testing.assert_allclose(net_longwave_radiation(tmin, tmax, ea, shortwave, rso), expected, rtol=1e-6)


def test_net_radiation_matches_pyet():
    # pyet calc_rad_net (FAO-56 eqs. 38-40) as the independent reference.
    tmin, tmax, _, _, ra, shortwave, elevation, ea = _days(seed=5)
    rso = clear_sky_radiation(ra, elevation)
    expected = rad_utils.calc_rad_net(pd.Series((tmin + tmax) / 2), rs=pd.Series(shortwave), tmax=pd.Series(tmax),
                                      tmin=pd.Series(tmin), rso=pd.Series(rso), ea=pd.Series(ea))
    np.testing.assert_allclose(net_radiation(tmin, tmax, ea, shortwave, ra, elevation), expected, rtol=1e-6)


def test_energy_limit_is_priestley_taylor_like_pyet():
    # pyet.priestley_taylor (Priestley & Taylor 1972, alpha 1.26, FAO-56 Δ and γ) as the reference. pyet
    # takes the latent heat as 2.501 − 0.002361 T MJ kg-1 where FAO-56 uses 2.45: the ratio of the two
    # converts between them (derived here). Exactly 0 where net radiation is negative.
    tmin, tmax, _, _, ra, shortwave, elevation, ea = _days(seed=8)
    pressure = air_pressure_from_elevation(elevation)
    rn = net_radiation(tmin, tmax, ea, shortwave, ra, elevation)
    tmean = (tmin + tmax) / 2
    expected = pyet.priestley_taylor(pd.Series(tmean), rn=pd.Series(rn), pressure=pd.Series(pressure))
    got = energy_limited_transpiration_mm(tmin, tmax, ea, shortwave, ra, elevation, pressure)
    lam_ratio = (2.501 - 0.002361 * tmean) / 2.45
    positive = rn > 0
    np.testing.assert_allclose(got[positive], np.asarray(expected)[positive] * lam_ratio[positive], rtol=1e-3)
    assert np.all(got[~positive] == 0.0)


def test_bright_day_energy_limit_example():
    # Derived here from FAO-56 eqs. 8, 13, 37-40 for 40° N, 15 July (day 196), sea level, Tmin 15 °C,
    # Tmax 25 °C, ea = e°(15 °C), Rs 22 MJ m-2 d-1: Ra 41.6, Rso 31.2, Rn about 13.5 MJ m-2 d-1 and a
    # Priestley-Taylor limit of about 4.7 mm d-1 (hand calculation, 2 significant figures).
    ra = extraterrestrial_radiation(40.0, 196)
    ea = saturation_vapour_pressure(15.0)
    assert net_radiation(15.0, 25.0, ea, 22.0, ra, 0.0) == pytest.approx(13.5, abs=0.3)
    assert energy_limited_transpiration_mm(15.0, 25.0, ea, 22.0, ra, 0.0, 101.3) == pytest.approx(4.7, abs=0.15)


def test_penman_monteith_reproduces_fao56_example_17():
    # Allen et al. (1998) FAO-56, Example 17 (monthly data, Bangkok, April; 13°44' N, 2 m): Tmax 34.8, Tmin
    # 25.6 °C, ea 2.85 kPa, u2 2 m s-1, Ra 38.06 and Rs 22.65 MJ m-2 d-1, G = 0.14 (30.2 − 29.2) = 0.14
    # MJ m-2 d-1 (eq. 44): Rn 14.33 MJ m-2 d-1 and ET0 = 5.72 mm d-1 (the example rounds its intermediate
    # values, hence 0.02 mm d-1).
    from suitability.physiology.energy import penman_monteith_et0

    assert net_radiation(25.6, 34.8, 2.85, 22.65, 38.06, 2.0) == pytest.approx(14.33, abs=0.02)
    pressure = air_pressure_from_elevation(2.0)  # 101.3 kPa in the example
    et0 = penman_monteith_et0(25.6, 34.8, 2.85, 22.65, 38.06, 2.0, pressure, 2.0, 0.14)
    assert et0 == pytest.approx(5.72, abs=0.02)


def test_penman_monteith_matches_pyet():
    # pyet.pm_fao56 (FAO-56 eq. 6) as the independent reference, given the same net radiation, soil heat
    # flux, pressure and ea; pyet takes es from Tmax and Tmin (eq. 12) as we do.
    from suitability.physiology.energy import penman_monteith_et0

    tmin, tmax, _, _, ra, shortwave, elevation, ea = _days(seed=11)
    rng = np.random.default_rng(12)
    wind = rng.uniform(0.5, 6.0, tmin.size)
    heat = rng.uniform(-0.5, 0.5, tmin.size)
    pressure = air_pressure_from_elevation(elevation)
    rn = net_radiation(tmin, tmax, ea, shortwave, ra, elevation)
    expected = pyet.pm_fao56(pd.Series((tmin + tmax) / 2), pd.Series(wind), rn=pd.Series(rn), g=pd.Series(heat),
                             tmax=pd.Series(tmax), tmin=pd.Series(tmin), pressure=pd.Series(pressure),
                             ea=pd.Series(ea), clip_zero=True)
    got = penman_monteith_et0(tmin, tmax, ea, shortwave, ra, elevation, pressure, wind, heat)
    np.testing.assert_allclose(got, np.asarray(expected), rtol=1e-3, atol=1e-6)


def test_wind_at_2m_and_monthly_soil_heat_flux():
    # FAO-56 eq. 47 and Example 14: the factor from 10 m to 2 m is 0.748, so 3.2 m s-1 at 10 m is 2.4 m s-1
    # at 2 m (the 3.2 / 2.4 pair from memory; 0.748 confirmed); at 2 m unchanged (4.87/ln(130.18) = 1.0002,
    # derived here). Eq. 43 with the months of FAO-56 Example 13 (March 14.1 °C, May 18.8 °C; from memory):
    # G for April = 0.07 (18.8 − 14.1) = 0.33 MJ m-2 d-1 (derived here from eq. 43).
    from suitability.physiology.energy import monthly_soil_heat_flux, wind_speed_at_2m

    assert wind_speed_at_2m(1.0, 10.0) == pytest.approx(0.748, abs=0.0005)
    assert wind_speed_at_2m(3.2, 10.0) == pytest.approx(2.4, abs=0.01)
    assert wind_speed_at_2m(3.0, 2.0) == pytest.approx(3.0, rel=1e-3)
    assert monthly_soil_heat_flux(14.1, 18.8) == pytest.approx(0.33, abs=0.005)
