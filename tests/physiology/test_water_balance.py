"""Water from rainfall: Hargreaves-Samani reference evapotranspiration and the monthly soil-water bucket.

Sources beside each check: pyet (independent library, test oracle for PET); the Rockford, Illinois worked
water budget of Ritter, "The Physical Environment" (online textbook, water-balance pages; the stored pages
were read for the months used here); the rest is derived here from the equations of
Thornthwaite & Mather (1955, 1957) as stated in suitability/physiology/water_balance.py.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from suitability.physiology import light, water_balance as wb


def test_hargreaves_samani_matches_pyet():
    # Oracle: pyet.hargreaves (method 0), which divides by a temperature-dependent latent heat
    # lambda = 2.501 - 0.002361 T (FAO-56 eq. 3-1) where FAO-56 eq. 52 uses 0.408 = 1/2.45;
    # multiplying pyet's value by lambda and 0.408 gives FAO-56's form exactly (to the rounding of 0.408).
    pyet = pytest.importorskip("pyet")
    index = pd.date_range("2021-01-15", periods=12, freq="MS") + pd.Timedelta(days=14)
    tmin = pd.Series(np.linspace(2.0, 22.0, 12), index=index)
    tmax = tmin + np.linspace(6.0, 16.0, 12)
    tmean = (tmin + tmax) / 2
    for lat_deg in (-35.0, -20.0, 0.0, 15.0, 48.0):
        expected = pyet.hargreaves(tmean, tmax, tmin, np.deg2rad(lat_deg)) * pyet.calc_lambda(tmean) * 0.408
        ra = light.extraterrestrial_radiation(lat_deg, index.dayofyear.values)
        ours = wb.hargreaves_samani_et0(tmin.values, tmax.values, ra)
        np.testing.assert_allclose(ours, expected.values, rtol=2e-3)


def test_hargreaves_samani_invalid_range_is_nan_and_cold_is_zero():
    # Tmax < Tmin is not a temperature range: NaN, never a clamp (DEVELOPERS.md)
    assert np.isnan(wb.hargreaves_samani_et0(20.0, 10.0, 30.0))
    # Tmean + 17.8 < 0: no evaporative demand (derived here from eq. 52)
    assert wb.hargreaves_samani_et0(-30.0, -22.0, 10.0) == 0.0


def test_linear_bucket_reproduces_the_rockford_budget():
    # Ritter, The Physical Environment, water-balance pages, Rockford (Illinois) budget, linear bookkeeping:
    # September: storage 0 at the end of August, P 86 mm, PE 85 mm -> storage 1 mm, AE = PE = 85 mm.
    end, aet = wb.soil_water_step(0.0, 86.0, 85.0, 300.0, retention="linear")
    assert (end, aet) == (1.0, 85.0)
    # October: P - PE = 29 mm added to storage -> 30 mm; AE = PE.
    end, aet = wb.soil_water_step(1.0, 29.0 + 60.0, 60.0, 300.0, retention="linear")
    assert (end, aet) == (30.0, 60.0)
    # August: 16 mm in storage at the end of July, P 84 mm, PE 126 mm (P - PE = -42):
    # storage falls to 0, AE = 84 + 16 = 100 mm, deficit = 126 - 100 = 26 mm.
    end, aet = wb.soil_water_step(16.0, 84.0, 126.0, 300.0, retention="linear")
    assert end == 0.0 and aet == 100.0 and 126.0 - aet == 26.0


def test_exponential_retention_follows_accumulated_potential_water_loss():
    # Derived here from S = C exp(-APWL / C) (Thornthwaite & Mather 1957 retention, exponential form):
    # two dry months in a row from a full bucket equal one month with their summed loss.
    capacity = 150.0
    s1, a1 = wb.soil_water_step(capacity, 10.0, 60.0, capacity)
    s2, a2 = wb.soil_water_step(s1, 5.0, 45.0, capacity)
    np.testing.assert_allclose(s1, capacity * np.exp(-50.0 / capacity))
    np.testing.assert_allclose(s2, capacity * np.exp(-(50.0 + 40.0) / capacity))
    np.testing.assert_allclose(a1, 10.0 + capacity - s1)  # AE = P + what the soil gave up
    assert a1 < 60.0 and a2 < 45.0
    # wet month: storage refills up to the capacity, the rest is surplus; AE = PE
    s3, a3 = wb.soil_water_step(s2, 400.0, 50.0, capacity)
    assert s3 == capacity and a3 == 50.0


def test_balance_conserves_water_over_the_steady_year():
    # Derived here: in the repeating year storage returns to its start, so rainfall = AET + surplus with
    # surplus = sum over wet months of what exceeded the capacity (mass conservation of the bucket).
    rain = np.array([120, 100, 80, 40, 10, 0, 0, 5, 20, 60, 90, 130.0])
    pet = np.array([60, 70, 90, 110, 130, 150, 160, 140, 110, 80, 60, 50.0])
    for retention in wb.RETENTIONS:
        storage, aet = wb.monthly_soil_water_balance(rain, pet, 150.0, retention)
        start = np.concatenate([storage[-1:], storage[:-1]])
        surplus = np.where(rain >= pet, np.maximum(start + rain - pet - 150.0, 0.0), 0.0)
        np.testing.assert_allclose(rain.sum(), aet.sum() + surplus.sum(), atol=0.05)
        assert np.all(aet <= pet + 1e-12) and np.all(aet >= 0)
        alpha = wb.water_availability_from_balance(aet, pet)
        assert np.all((alpha >= 0) & (alpha <= 1))
        # rain-abundant months are unstressed; the most stressed month lies in the rainless season (Jun-Aug),
        # where the emptied soil leaves AET far below PET
        assert alpha[0] == 1.0 and int(np.argmin(alpha)) in (5, 6, 7) and alpha.min() < 0.5


def test_balance_is_elementwise_and_marks_bad_cells_nan():
    rain = np.tile(np.array([50, 40, 30, 20, 10, 0, 0, 10, 20, 30, 40, 50.0])[:, None], (1, 4))
    pet = np.full((12, 4), 45.0)
    rain[3, 1] = np.nan
    rain[2, 2] = -5.0  # negative rainfall is invalid input: NaN for that cell
    capacity = np.array([100.0, 100.0, 100.0, 0.0])  # zero capacity is invalid too
    storage, aet = wb.monthly_soil_water_balance(rain, pet, capacity)
    assert np.isfinite(aet[:, 0]).all()
    assert np.isnan(aet[:, 1:]).all() and np.isnan(storage[:, 1:]).all()
    single_storage, single_aet = wb.monthly_soil_water_balance(rain[:, 0], pet[:, 0], 100.0)
    np.testing.assert_allclose(aet[:, 0], single_aet)  # the same cell alone gives the same answer


def test_bigger_bucket_never_less_water():
    # Derived here: a larger capacity stores more of the wet-season surplus, so AET cannot fall.
    rain = np.array([150, 120, 90, 30, 5, 0, 0, 0, 10, 50, 100, 160.0])
    pet = np.array([70, 80, 95, 110, 120, 130, 140, 130, 110, 90, 75, 65.0])
    totals = [wb.monthly_soil_water_balance(rain, pet, c)[1].sum() for c in (25.0, 75.0, 150.0, 300.0)]
    assert all(b >= a - 1e-9 for a, b in zip(totals, totals[1:])) and totals[-1] > totals[0]
