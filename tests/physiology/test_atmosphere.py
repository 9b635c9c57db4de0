"""Tests of suitability.physiology.atmosphere against FAO-56 worked examples and the independent `pyet`.

FAO-56 = Allen, Pereira, Raes & Smith (1998) FAO Irrigation and Drainage Paper 56. `pyet` (PyPI) is an
independent implementation of the same FAO-56 equations, used here as a test-only oracle.
"""

import dask.array as da
import numpy as np
import pyet
import pytest
import xarray as xr

from suitability.physiology import atmosphere as atm


def test_pressure_fao56_example_2():
    # FAO-56 Example 2: z = 1800 m gives P = 81.8 kPa (rounded to 0.1 in the example).
    assert atm.air_pressure_from_elevation(1800.0) == pytest.approx(81.8, abs=0.05)


def test_pressure_matches_pyet_over_the_land_range():
    # Independent library: pyet.calc_press implements FAO-56 eq. 7.
    z = np.linspace(-400.0, 8800.0, 47)
    np.testing.assert_allclose(atm.air_pressure_from_elevation(z), pyet.calc_press(z), rtol=1e-12)


def test_saturation_vapour_pressure_fao56_example_3():
    # FAO-56 Example 3: e°(24.5 °C) = 3.075 kPa, e°(15 °C) = 1.705 kPa.
    assert atm.saturation_vapour_pressure(24.5) == pytest.approx(3.075, abs=0.002)
    assert atm.saturation_vapour_pressure(15.0) == pytest.approx(1.705, abs=0.002)
    # Same example: es = (3.075 + 1.705) / 2 = 2.39 kPa (FAO-56 eq. 12).
    assert atm.mean_saturation_vapour_pressure(15.0, 24.5) == pytest.approx(2.39, abs=0.002)


def test_saturation_vapour_pressure_matches_pyet():
    # Independent library: pyet.calc_e0 (FAO-56 eq. 11) and pyet.calc_es (eq. 12).
    t = np.linspace(-50.0, 55.0, 106)
    np.testing.assert_allclose(atm.saturation_vapour_pressure(t), pyet.calc_e0(t), rtol=1e-12)
    tmin, tmax = t[:-10], t[10:]
    np.testing.assert_allclose(atm.mean_saturation_vapour_pressure(tmin, tmax),
                               pyet.calc_es(tmax=tmax, tmin=tmin), rtol=1e-12)


def test_actual_vapour_pressure_from_tmin_matches_pyet():
    # Independent library: pyet.calc_ea without humidity takes ea = e°(Tmin) (FAO-56 eq. 48).
    tmin = np.linspace(-20.0, 30.0, 26)
    tmax = tmin + 12.0
    np.testing.assert_allclose(atm.actual_vapour_pressure_from_tmin(tmin),
                               pyet.calc_ea(tmax=tmax, tmin=tmin), rtol=1e-12)
    # FAO-56 eq. 14: ea from the dew point is e°(Tdew); Example 3's e°(15) = 1.705 kPa.
    assert atm.actual_vapour_pressure_from_dew_point(15.0) == pytest.approx(1.705, abs=0.002)


def test_actual_vapour_pressure_from_relative_humidity():
    # FAO-56 Example 6 (from memory): Tmax 25, Tmin 18 °C, RHmean 68 % gives ea = 1.78 kPa (eq. 19).
    assert atm.actual_vapour_pressure_from_relative_humidity(68.0, 18.0, 25.0) == pytest.approx(
        1.78, abs=0.005)
    # Independent library: pyet.calc_ea with rh uses the same eq. 19.
    rh = np.linspace(5.0, 100.0, 20)
    tmin = np.linspace(-5.0, 25.0, 20)
    tmax = tmin + 9.0
    np.testing.assert_allclose(atm.actual_vapour_pressure_from_relative_humidity(rh, tmin, tmax),
                               pyet.calc_ea(tmax=tmax, tmin=tmin, rh=rh), rtol=1e-12)


def test_vapour_pressure_deficit():
    # Deficit e°(T) - ea with e° from the independent pyet.calc_e0 (FAO-56 eq. 11).
    t = np.array([5.0, 15.0, 25.0, 35.0])
    ea = np.array([0.5, 1.0, 1.5, 2.0])
    np.testing.assert_allclose(atm.vapour_pressure_deficit(t, ea), pyet.calc_e0(t) - ea, rtol=1e-12)
    # Air holding more vapour than saturation is not physical: the deficit stops at 0
    # (common practice, no source).
    assert atm.vapour_pressure_deficit(10.0, 2.0) == 0.0


def test_partial_pressures_follow_daltons_law():
    # Dalton's law p = x P, with P from FAO-56 Example 2 (81.8 kPa at 1800 m):
    # 400 ppm CO2 gives 400e-6 * 81.8 kPa = 32.7 Pa; 20.95 % O2 gives 17.1 kPa.
    pressure = atm.air_pressure_from_elevation(1800.0)
    assert atm.co2_partial_pressure_pa(400.0, pressure) == pytest.approx(32.72, abs=0.03)
    assert atm.o2_partial_pressure_kpa(20.95, pressure) == pytest.approx(17.14, abs=0.02)
    # At the standard atmosphere 101.325 kPa (ISO 2533): 400 ppm is 40.53 Pa.
    assert atm.co2_partial_pressure_pa(400.0, 101.325) == pytest.approx(40.53, abs=0.005)


def test_invalid_elements_become_nan_without_raising():
    # Project contract (docs/contracts.md): invalid elements give NaN, the rest are computed.
    z = np.array([0.0, np.nan, 20000.0, -3000.0, 500.0])
    p = atm.air_pressure_from_elevation(z)
    assert np.isnan(p[[1, 2, 3]]).all() and np.isfinite(p[[0, 4]]).all()
    t = np.array([20.0, 75.0, -80.0, np.nan])
    assert np.isfinite(atm.saturation_vapour_pressure(t)).tolist() == [True, False, False, False]
    assert np.isnan(atm.actual_vapour_pressure_from_relative_humidity(120.0, 10.0, 20.0))
    assert np.isnan(atm.mean_saturation_vapour_pressure(25.0, 10.0))  # Tmin above Tmax
    assert np.isnan(atm.vapour_pressure_deficit(20.0, -0.1))
    assert np.isnan(atm.partial_pressure(0.5, 0.0))


def test_xarray_and_dask_give_the_same_numbers_and_stay_lazy():
    # Reference values: the numpy path, itself checked against pyet above.
    z = np.linspace(0.0, 3000.0, 12).reshape(3, 4)
    expected = atm.air_pressure_from_elevation(z)
    lazy = xr.DataArray(da.from_array(z, chunks=2), dims=("y", "x"))
    result = atm.air_pressure_from_elevation(lazy)
    assert isinstance(result, xr.DataArray) and isinstance(result.data, da.Array)
    np.testing.assert_array_equal(result.values, expected)
    vpd = atm.vapour_pressure_deficit(lazy / 100.0, atm.actual_vapour_pressure_from_tmin(lazy / 200.0))
    assert isinstance(vpd.data, da.Array)
    np.testing.assert_allclose(vpd.values, pyet.calc_e0(z / 100.0) - pyet.calc_e0(z / 200.0), rtol=1e-12)
    dask_only = atm.saturation_vapour_pressure(da.from_array(z / 100.0, chunks=2))
    assert isinstance(dask_only, da.Array)
    np.testing.assert_allclose(dask_only.compute(), pyet.calc_e0(z / 100.0), rtol=1e-12)
