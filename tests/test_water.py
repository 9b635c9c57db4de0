"""Water availability from rainfall inside the model, and the config rules for the rainfall layers.

The climate values are synthetic. Expected values come from the pure functions of
suitability/physiology/water_balance.py (tested against pyet and a published worked budget in
tests/physiology/test_water_balance.py) applied here by hand, and from the direction of the physics.
"""

from __future__ import annotations

import numpy as np
import pytest
import xarray as xr
from pydantic import ValidationError

import suitability
from suitability.config import ClimateConfig
from suitability.model import DAYS_IN_MONTH, REPRESENTATIVE_DAY, water_from_rainfall
from suitability.physiology import light, water_balance as wb

from test_model import synthetic_climate

RAIN = np.array([6.0, 5.0, 4.0, 2.0, 0.5, 0.0, 0.0, 0.2, 1.0, 2.5, 4.0, 6.0], np.float32)  # mm d-1


def rainy_climate(mean_temperature_c, rain=RAIN, *, chunks=None):
    ds = synthetic_climate(mean_temperature_c).drop_vars("water_availability")
    ds["precipitation"] = xr.DataArray(rain, dims="month", coords={"month": ds.month}) * xr.ones_like(ds["tmin"])
    return ds.chunk({"month": -1, "y": 1, "x": 1}) if chunks else ds


def test_rainfall_gives_the_balance_of_the_physiology_functions():
    ds = rainy_climate([12.0, 26.0])
    out = water_from_rainfall(ds, 120.0)
    for j in range(2):  # by hand: Hargreaves-Samani PET, monthly totals, the bucket, AET/PET
        tmin, tmax = ds.tmin.values[:, 0, j], ds.tmax.values[:, 0, j]
        ra = light.extraterrestrial_radiation(-15.0, REPRESENTATIVE_DAY)
        pet = wb.hargreaves_samani_et0(tmin, tmax, ra) * DAYS_IN_MONTH
        _, aet = wb.monthly_soil_water_balance(RAIN.astype(float) * DAYS_IN_MONTH, pet, 120.0)
        np.testing.assert_allclose(out.water_availability.values[:, 0, j], aet / pet, rtol=1e-5)
    # warmer column: more demand for the same rain, so less water availability in the dry season
    assert (out.water_availability.values[5:9, 0, 1] <= out.water_availability.values[5:9, 0, 0] + 1e-6).all()


def test_penman_monteith_where_wind_and_humidity_are_given():
    # By hand: FAO-56 eq. 19 (ea from mean RH), eq. 43 (G from the neighbouring months, the year taken
    # round), eq. 6 (suitability.physiology.energy.penman_monteith_et0, checked against pyet and FAO-56
    # Example 17 in tests/physiology/test_energy.py), then the bucket as above.
    from suitability.model import HARGREAVES_SAMANI, PENMAN_MONTEITH, pet_method
    from suitability.physiology import atmosphere, energy

    ds = rainy_climate([14.0, 27.0])
    assert pet_method(ds.data_vars) == HARGREAVES_SAMANI  # no wind: Hargreaves-Samani
    ds["humidity"] = xr.full_like(ds["tmin"], 0.6)
    ds["wind_speed"] = xr.full_like(ds["tmin"], 2.5)
    assert pet_method(ds.data_vars) == PENMAN_MONTEITH
    out = water_from_rainfall(ds, 150.0)
    for j in range(2):
        tmin, tmax = ds.tmin.values[:, 0, j].astype(float), ds.tmax.values[:, 0, j].astype(float)
        ra = light.extraterrestrial_radiation(-15.0, REPRESENTATIVE_DAY)
        ea = atmosphere.actual_vapour_pressure_from_relative_humidity(60.0, tmin, tmax)
        mean = (tmin + tmax) / 2
        heat = 0.07 * (np.roll(mean, -1) - np.roll(mean, 1))
        pet = energy.penman_monteith_et0(tmin, tmax, ea, ds.shortwave.values[:, 0, j].astype(float), ra, 0.0, 101.3,
                                         2.5, heat)
        np.testing.assert_allclose(out.pet.values[:, 0, j], pet, rtol=1e-4)
        _, aet = wb.monthly_soil_water_balance(RAIN.astype(float) * DAYS_IN_MONTH, pet * DAYS_IN_MONTH, 150.0)
        np.testing.assert_allclose(out.water_availability.values[:, 0, j], aet / (pet * DAYS_IN_MONTH), rtol=1e-4)
    # more wind, more demand for the same rain (the aerodynamic term of eq. 6 grows with u2)
    windy = water_from_rainfall(ds.assign(wind_speed=ds["wind_speed"] * 2), 150.0)
    assert (windy.pet.values > out.pet.values).all()


def test_given_pet_and_capacity_layer_are_used_and_dask_stays_lazy():
    ds = rainy_climate([20.0, 20.0], chunks=True)
    ds["pet"] = xr.full_like(ds["tmin"], 4.0)
    ds["soil_water_capacity"] = xr.DataArray(np.array([[50.0, 300.0], [50.0, 300.0]], np.float32), dims=("y", "x"))
    out = water_from_rainfall(ds)
    assert out.water_availability.chunks is not None  # still lazy
    values = out.water_availability.values
    _, aet = wb.monthly_soil_water_balance(RAIN.astype(float) * DAYS_IN_MONTH, np.full(12, 4.0) * DAYS_IN_MONTH, 50.0)
    np.testing.assert_allclose(values[:, 0, 0], aet / (4.0 * DAYS_IN_MONTH), rtol=1e-5)
    assert values[:, 0, 1].sum() > values[:, 0, 0].sum()  # a bigger bucket carries more of the wet season over


def test_evaluate_runs_on_rainfall_and_drought_lowers_assimilation():
    wet = suitability.evaluate(rainy_climate([24.0], rain=np.full(12, 8.0, np.float32)), {"co2_ppm": 420})
    dry = suitability.evaluate(rainy_climate([24.0], rain=np.full(12, 0.3, np.float32)), {"co2_ppm": 420})
    # Less water, lower potential assimilation for both pathways (water availability scales stomatal g1,
    # DESIGN.md science defaults)
    for layer in ("c3_assimilation", "c4_assimilation"):
        assert float(dry[layer].values[0, 0]) < float(wet[layer].values[0, 0])
    # the derived availability is returned for the datacube (registry kind "derived")
    expected = water_from_rainfall(rainy_climate([24.0], rain=np.full(12, 0.3, np.float32))).water_availability
    np.testing.assert_allclose(dry["derived_water_availability"].values, expected.values, rtol=1e-6)
    assert "derived_water_availability" not in suitability.evaluate(synthetic_climate([24.0]), {"co2_ppm": 420})


def test_scenario_warming_raises_demand_of_derived_water():
    ds = rainy_climate([20.0])
    base = water_from_rainfall(ds)
    warm = water_from_rainfall(ds.assign(tmin=ds.tmin + 3, tmax=ds.tmax + 3))
    assert float(warm.pet.sum()) > float(base.pet.sum())
    assert float(warm.water_availability.sum()) <= float(base.water_availability.sum())


def _climate(**layers):
    base = {"tmin": {"path": "a.nc"}, "tmax": {"path": "a.nc"}, "shortwave": {"path": "s.tif"}}
    return ClimateConfig.model_validate({**base, **layers})


def test_config_rules_for_rainfall_layers():
    assert "precipitation" in _climate(precipitation={"path": "p.nc"}, pet={"path": "e.nc"})
    with pytest.raises(ValidationError, match="pet is given without precipitation"):
        _climate(water_availability={"path": "w.tif"}, pet={"path": "e.nc"})
    with pytest.raises(ValidationError, match="give precipitation or water_availability, not both"):
        _climate(water_availability={"path": "w.tif"}, precipitation={"path": "p.nc"})
    with pytest.raises(ValidationError, match="or precipitation"):
        _climate()
