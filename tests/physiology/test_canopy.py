"""Tests of suitability.physiology.canopy: the daily sun/shade canopy integration.

Main check: the Gaussian daily integral (Goudriaan 1986; Goudriaan & van Laar 1994) against a 96-step
midpoint integration of the same leaf and canopy model. Plus plausibility bands, pathway contrasts
(Ehleringer & Björkman 1977; Collatz et al. 1998), night respiration against scipy quadrature, invalid
inputs, polar days and xarray/dask behaviour. Arrays are small to keep this file fast.
"""

import dask
import dask.array as da
import numpy as np
import pytest
import xarray as xr
from scipy import integrate

from suitability.physiology import canopy
from suitability.physiology.leaf import leaf_assimilation
from suitability.physiology.light import extraterrestrial_radiation

RELATIVE_TOLERANCE = 0.005  # the accuracy target of the Gaussian integration against 96 steps


def realistic_days(count, seed):
    """Random but plausible growing-season days (invented inputs for the integration check)."""
    rng = np.random.default_rng(seed)
    tmin = rng.uniform(0.0, 25.0, count)
    tmax = np.clip(tmin + rng.uniform(4.0, 18.0, count), 10.0, 40.0)
    tmin = np.minimum(tmin, tmax - 4.0)
    latitude = rng.uniform(-40.0, 40.0, count)
    day = rng.integers(1, 366, count).astype(float)
    # Shortwave 5-30 MJ m-2 d-1, but not above 78 % of Ra: a clear-sky transmissivity, common practice.
    shortwave = np.minimum(rng.uniform(5.0, 30.0, count), 0.78 * extraterrestrial_radiation(latitude, day))
    lai = rng.uniform(0.5, 6.0, count)
    return dict(tmin_c=tmin, tmax_c=tmax, shortwave_mj=shortwave, latitude_deg=latitude, day_of_year=day,
                lai=lai)


@pytest.mark.parametrize("pathway,params,co2,stressed", [
    ("C3", None, 400.0, False), ("C4", None, 400.0, False), ("C3", None, 700.0, False), ("C4", None, 280.0, False),
    ("C3", "collatz1991", 400.0, False), ("C4", "vc2000", 400.0, False),
    ("C3", None, 400.0, True), ("C4", None, 400.0, True),
])
def test_gaussian_daily_integral_matches_96_step_reference(pathway, params, co2, stressed):
    # Independent of the quadrature choice: the 96-step midpoint rule over 24 h of the same model.
    seed = int(co2) + (1 if pathway == "C3" else 2) + (10 if params else 0) + (20 if stressed else 0)
    days = realistic_days(60, seed=seed)
    if stressed:  # water availability 0.3-1 and elevations 0-3000 m (invented spread)
        rng = np.random.default_rng(seed)
        days.update(water_availability=rng.uniform(0.3, 1.0, 60), elevation_m=rng.uniform(0.0, 3000.0, 60))
    gauss = canopy.daily_canopy_assimilation(pathway, co2_ppm=co2, params=params, **days)
    reference = canopy.daily_canopy_assimilation_reference(pathway, co2_ppm=co2, params=params, steps=96, **days)
    np.testing.assert_allclose(gauss.gross, reference.gross, rtol=RELATIVE_TOLERANCE)
    # Net can be near zero on dim cool days, so its error is measured against gross assimilation.
    assert np.all(np.abs(gauss.net - reference.net) <= RELATIVE_TOLERANCE * reference.gross)
    if pathway == "C3":
        np.testing.assert_allclose(gauss.photorespiration, reference.photorespiration, rtol=RELATIVE_TOLERANCE)


def test_maize_like_c4_canopy_on_a_bright_summer_day_is_plausible():
    # Common practice, no source: well-watered C4 crop canopies fix of the order of 10-25 g C m-2 d-1
    # in midsummer; eddy-covariance maize GPP peaks near 25-30 g C m-2 d-1 (from memory). The net
    # here subtracts leaf respiration only (no stem and root respiration), so it may reach the upper
    # end: the band is 10-30 for net and at most 35 for gross.
    result = canopy.daily_canopy_assimilation("C4", tmin_c=18.0, tmax_c=32.0, shortwave_mj=27.0,
                                              latitude_deg=35.0, day_of_year=190, co2_ppm=400.0, lai=4.0)
    assert 10.0 <= result.net <= 30.0
    assert result.net < result.gross <= 35.0
    assert result.photorespiration == pytest.approx(0.0, abs=0.05 * result.gross)


def test_c3_canopy_on_a_mild_bright_day_is_plausible():
    # Common practice, no source: a well-watered C3 crop canopy (wheat-like) at about 20 °C and high
    # light fixes of the order of 8-20 g C m-2 d-1 net; photorespiration is a sizeable share of gross.
    result = canopy.daily_canopy_assimilation("C3", tmin_c=10.0, tmax_c=24.0, shortwave_mj=25.0,
                                              latitude_deg=45.0, day_of_year=160, co2_ppm=400.0, lai=4.0)
    assert 8.0 <= result.net <= 20.0
    share = result.photorespiration / (result.gross + result.photorespiration)
    # Photorespiration share of C3 leaves in air near 20-25 °C: about 15-30 % (from memory, e.g.
    # Sharkey 1988 Physiol Plant 73:147).
    assert 0.10 <= share <= 0.35


def test_pathway_contrast_follows_temperature():
    # Ehleringer & Björkman (1977); Collatz et al. (1998): above the crossover (about 22 °C near
    # 350-400 ppm) C4 out-assimilates C3, below it C3 does.
    hot = dict(tmin_c=24.0, tmax_c=38.0, shortwave_mj=27.0, latitude_deg=15.0, day_of_year=120,
               co2_ppm=400.0, lai=3.0)
    cool = dict(tmin_c=2.0, tmax_c=14.0, shortwave_mj=12.0, latitude_deg=-38.0, day_of_year=200,
                co2_ppm=400.0, lai=3.0)
    assert canopy.daily_canopy_assimilation("C4", **hot).net > canopy.daily_canopy_assimilation("C3", **hot).net
    assert canopy.daily_canopy_assimilation("C3", **cool).net > canopy.daily_canopy_assimilation("C4", **cool).net


def test_diffuse_light_raises_canopy_assimilation(monkeypatch):
    # Spitters (1986, Agric For Meteorol 38:231, Part II) and de Pury & Farquhar (1997) (from memory): at
    # the same global radiation a canopy assimilates more when more of the light is diffuse, because it
    # reaches the light-limited shaded leaves. The model's own diffuse share lies between the extremes.
    # Water is not limiting here (a supply far above the demand), so light alone is compared.
    day = dict(tmin_c=16.0, tmax_c=30.0, shortwave_mj=26.0, latitude_deg=30.0, day_of_year=170,
               co2_ppm=400.0, lai=3.0, max_water_supply_mm=1e6)
    default = canopy.daily_canopy_assimilation("C3", **day).gross
    monkeypatch.setattr(canopy, "diffuse_fraction_daily", lambda clearness: 0.0 * clearness)
    all_beam = canopy.daily_canopy_assimilation("C3", **day).gross
    monkeypatch.setattr(canopy, "diffuse_fraction_daily", lambda clearness: 0.0 * clearness + 1.0)
    all_diffuse = canopy.daily_canopy_assimilation("C3", **day).gross
    assert all_beam < default < all_diffuse


@pytest.mark.parametrize("pathway,params", [("C3", "bernacchi2001"), ("C3", "collatz1991"),
                                            ("C4", "collatz1992"), ("C4", "vc2000")])
def test_no_water_means_no_net_uptake(pathway, params):
    # Common practice, no source: with stomata shut (water availability 0) a canopy cannot gain carbon.
    days = realistic_days(12, seed=3)
    result = canopy.daily_canopy_assimilation(pathway, co2_ppm=400.0, water_availability=0.0, params=params,
                                              **days)
    assert np.all(result.net <= 0.0)
    watered = canopy.daily_canopy_assimilation(pathway, co2_ppm=400.0, water_availability=1.0, params=params,
                                               **days)
    assert np.all(watered.net > result.net)


def test_dark_day_is_night_respiration_integrated_over_24_h():
    # Derived here: with no light, the daily net is -LAI ∫ Rd(T(t)) dt over 24 h, which scipy's adaptive
    # quadrature computes from the leaf model's dark respiration at the cosine temperature course.
    lai, tmin, tmax = 2.5, 8.0, 26.0
    for pathway in ("C3", "C4"):
        def dark_net(hour):
            temperature = canopy.daily_temperature(tmin, tmax, hour)
            return float(leaf_assimilation(pathway, temperature, 0.0, 400.0).net)
        expected, _ = integrate.quad(dark_net, 0.0, 24.0)
        expected *= lai * 3600.0 * 1e-6 * 12.011
        result = canopy.daily_canopy_assimilation(pathway, tmin_c=tmin, tmax_c=tmax, shortwave_mj=0.0,
                                                  latitude_deg=10.0, day_of_year=100, co2_ppm=400.0, lai=lai)
        assert result.net < 0.0
        assert result.net == pytest.approx(expected, rel=1e-3)
        assert result.gross == pytest.approx(0.0, abs=1e-12)


@pytest.mark.parametrize("pathway,params", [
    ("C3", "bernacchi2001"), ("C3", "collatz1991"), ("C4", "collatz1992"), ("C4", "vc2000"),
])
def test_dark_day_loses_carbon_under_stress_at_altitude(pathway, params):
    # Common practice, no source: leaves in darkness only respire, so a day without light loses carbon
    # (net < 0, gross 0) whatever the water supply or air pressure.
    result = canopy.daily_canopy_assimilation(pathway, tmin_c=25.0, tmax_c=38.0, shortwave_mj=0.0,
                                              latitude_deg=35.7, day_of_year=59, co2_ppm=400.0, lai=5.0,
                                              water_availability=0.437, elevation_m=2822.0, params=params)
    assert result.net < 0.0
    assert result.gross == pytest.approx(0.0, abs=1e-9)


def test_daily_temperature_course():
    # Common practice, no source: the cosine course peaks at Tmax at 14:00, reaches Tmin at 02:00 and
    # averages (Tmin + Tmax)/2 over 24 h.
    assert canopy.daily_temperature(5.0, 25.0, 14.0) == pytest.approx(25.0)
    assert canopy.daily_temperature(5.0, 25.0, 2.0) == pytest.approx(5.0)
    hours = (np.arange(240) + 0.5) / 10.0
    assert canopy.daily_temperature(5.0, 25.0, hours).mean() == pytest.approx(15.0)


def test_polar_day_and_night_give_numbers():
    # FAO-56 eq. 25 clipped: at 80° in late June one pole has 24 h of daylight, the other none.
    common = dict(tmin_c=2.0, tmax_c=12.0, day_of_year=172, co2_ppm=400.0, lai=2.0)
    polar_day = canopy.daily_canopy_assimilation("C3", shortwave_mj=25.0, latitude_deg=80.0, **common)
    polar_night = canopy.daily_canopy_assimilation("C3", shortwave_mj=0.0, latitude_deg=-80.0, **common)
    assert np.isfinite([polar_day.net, polar_day.gross, polar_night.net, polar_night.gross]).all()
    assert polar_day.gross > 0.0
    assert polar_night.gross == pytest.approx(0.0, abs=1e-12) and polar_night.net < 0.0
    # Radiation reported in polar night (inconsistent input) has no daylight to act in.
    lit_night = canopy.daily_canopy_assimilation("C3", shortwave_mj=3.0, latitude_deg=-80.0, **common)
    assert lit_night.net == pytest.approx(polar_night.net)


def test_bare_ground_exchanges_nothing():
    # Derived here: with LAI = 0 there are no leaves, so no assimilation and no respiration.
    result = canopy.daily_canopy_assimilation("C4", tmin_c=15.0, tmax_c=30.0, shortwave_mj=20.0,
                                              latitude_deg=0.0, day_of_year=80, co2_ppm=400.0, lai=0.0)
    assert (result.net, result.gross, result.photorespiration) == (0.0, 0.0, 0.0)


def test_invalid_elements_are_nan_and_the_rest_computed():
    # Project contract (docs/contracts.md): bad elements give NaN, never an exception mid-array.
    tmin = np.array([10.0, np.nan, 10.0, 10.0, 10.0, 30.0, 10.0])
    tmax = np.array([25.0, 25.0, 25.0, 25.0, 25.0, 20.0, 25.0])
    shortwave = np.array([20.0, 20.0, -1.0, 20.0, 20.0, 20.0, 20.0])
    latitude = np.array([20.0, 20.0, 20.0, 95.0, 20.0, 20.0, 20.0])
    lai = np.array([3.0, 3.0, 3.0, 3.0, -1.0, 3.0, 3.0])
    elevation = np.array([0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 20000.0])
    result = canopy.daily_canopy_assimilation("C3", tmin_c=tmin, tmax_c=tmax, shortwave_mj=shortwave,
                                              latitude_deg=latitude, day_of_year=100, co2_ppm=400.0,
                                              lai=lai, elevation_m=elevation)
    for field in (result.net, result.gross, result.photorespiration):
        assert np.isfinite(field).tolist() == [True] + [False] * 6
    # Derived here: elements are independent, so the valid element equals the same day computed alone.
    alone = canopy.daily_canopy_assimilation("C3", tmin_c=10.0, tmax_c=25.0, shortwave_mj=20.0, latitude_deg=20.0,
                                             day_of_year=100, co2_ppm=400.0, lai=3.0, elevation_m=0.0)
    for name in ("net", "gross", "photorespiration"):
        assert getattr(result, name)[0] == pytest.approx(float(getattr(alone, name)), rel=1e-12), name
    # FvCB: photorespiration = vc Γ*/C < gross = vc (1 - Γ*/C) while C > 2 Γ* (about 100 µmol mol-1 or less
    # at 25 °C, Bernacchi et al. 2001); net = gross - Rd < gross.
    assert 0.0 < result.photorespiration[0] < result.gross[0] and result.net[0] < result.gross[0]


def test_unknown_parameter_set_is_a_clear_error():
    # Project contract (docs/contracts.md): an unknown parameter-set name is a ValueError.
    with pytest.raises(ValueError):
        canopy.daily_canopy_assimilation("C3", tmin_c=10.0, tmax_c=20.0, shortwave_mj=15.0, latitude_deg=0.0,
                                         day_of_year=10, co2_ppm=400.0, params="no_such_set")


def _raise_if_computed(*args, **kwargs):
    raise AssertionError("the canopy model computed a dask graph while building it")


def test_xarray_and_dask_inputs_give_identical_numbers_and_stay_lazy():
    # Reference values: the numpy path of the same function.
    days = realistic_days(12, seed=7)
    eager = canopy.daily_canopy_assimilation("C4", co2_ppm=400.0, **days)

    def lazy(values):
        return xr.DataArray(da.from_array(values.reshape(3, 4), chunks=2), dims=("y", "x"),
                            coords={"y": [10.0, 20.0, 30.0]})

    with dask.config.set(scheduler=_raise_if_computed):
        result = canopy.daily_canopy_assimilation("C4", co2_ppm=400.0, **{k: lazy(v) for k, v in days.items()})
    fields = ("net", "gross", "photorespiration")
    for name in fields:
        value = getattr(result, name)
        assert isinstance(value, xr.DataArray) and isinstance(value.data, da.Array), name
        assert value.dims == ("y", "x") and value["y"].values.tolist() == [10.0, 20.0, 30.0]
    computed = dask.compute(*(getattr(result, name) for name in fields))
    for name, value in zip(fields, computed):
        np.testing.assert_allclose(value.values.ravel(), getattr(eager, name), rtol=1e-12, atol=1e-12)

    in_memory = canopy.daily_canopy_assimilation(
        "C4", co2_ppm=400.0, **{k: xr.DataArray(v.reshape(3, 4), dims=("y", "x")) for k, v in days.items()})
    np.testing.assert_allclose(in_memory.net.values.ravel(), eager.net, rtol=1e-12)

    # Plain dask arrays, one of them a numpy array, another a scalar.
    mixed = {k: da.from_array(v, chunks=4) for k, v in days.items()}
    mixed["lai"] = days["lai"]
    mixed["tmin_c"] = 12.0
    with dask.config.set(scheduler=_raise_if_computed):
        plain_dask = canopy.daily_canopy_assimilation("C3", co2_ppm=400.0, **mixed)
    assert isinstance(plain_dask.net, da.Array)
    expected = canopy.daily_canopy_assimilation("C3", co2_ppm=400.0, **{**days, "tmin_c": 12.0})
    np.testing.assert_allclose(plain_dask.net.compute(), expected.net, rtol=1e-12)
