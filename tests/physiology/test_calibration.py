"""Calibration checks of the default (grass) pair against published pathway boundaries and CO2 responses.

The day: a sunny mid-latitude summer day (22 MJ m-2 d-1 shortwave, LAI 3, a 10 °C daily range, 40° N, day
196, sea level, humidity from Tmin, well watered); the tie is the daily mean temperature at which the daily
net canopy assimilation of the two default sets is equal (``daily_canopy_assimilation``).

C3 acclimation: Kattge & Knorr (2007) Plant Cell Environ 30:1176 take the growth temperature Tg as the mean
air temperature of the preceding month (from memory); the daily mean of the test day stands for that month,
so Tg = the daily mean in the acclimated checks, given per cell as the model gives it
(``growth_temperature_c`` of the canopy, the month's mean air temperature; held within 11-35 °C). Without
acclimation (Tg fixed at 25 °C, the sets' default) the tie is lower: the xfail tests below record that known
deviation with its numbers.

Ties measured (daily mean, °C, at 280/350/420/560/700 ppm):
- before per-cell acclimation (Tg as a parameter override, main at 60a201d): 16.36/20.17/23.05/25.60/29.87
  acclimated, 14.24/16.67/22.10/25.74/29.79 with Tg = 25 °C;
- with per-cell acclimation (this file): the same to 0.01 °C (the ties lie inside 11-35 °C, where the
  range limit does not act).
The model's crossover layer (suitability.model.canopy_crossover) solves the same tie with the class
margin; with the margin set to 0 it gives these ties (the last test).
"""

import numpy as np
import pytest
from scipy.optimize import brentq

import xarray as xr

import suitability
from suitability.physiology import DEFAULT_SETS, daily_canopy_assimilation, leaf_assimilation

SEARCH_C = (0.0, 46.0)  # daily means searched [°C]; Tmax + 5 stays inside the leaf models' range


def _daily_net(pathway, mean_c, co2_ppm, params, growth_c=None):
    return float(daily_canopy_assimilation(
        pathway, tmin_c=mean_c - 5.0, tmax_c=mean_c + 5.0, shortwave_mj=22.0, latitude_deg=40.0,
        day_of_year=196, co2_ppm=co2_ppm, elevation_m=0.0, lai=3.0, water_availability=1.0, params=params,
        growth_temperature_c=growth_c).net)


def default_tie(co2_ppm, acclimated=True):
    """Daily mean [°C] where C3 stops out-assimilating C4; +inf if C3 wins throughout SEARCH_C."""
    def advantage(mean_c):
        growth = mean_c if acclimated else None  # None: the set's own Tg (25 °C)
        return (_daily_net("C3", mean_c, co2_ppm, DEFAULT_SETS["C3"], growth)
                - _daily_net("C4", mean_c, co2_ppm, DEFAULT_SETS["C4"]))

    grid = np.arange(SEARCH_C[0], SEARCH_C[1] + 0.01, 2.0)
    values = [advantage(t) for t in grid]
    assert values[0] > 0, "C4 favoured already at the coldest daily mean searched"
    for i in range(len(grid) - 1):
        if values[i] > 0 >= values[i + 1]:
            return brentq(advantage, grid[i], grid[i + 1], xtol=1e-3)
    return np.inf


@pytest.fixture(scope="module")
def ties():
    return {co2: default_tie(co2) for co2 in (280.0, 350.0, 560.0, 700.0)}


def test_default_tie_at_350ppm_is_near_22c(ties):
    # Collatz, Berry & Clark (1998) Oecologia 114:441: C3/C4 boundary about 22 °C at about 350 ppm;
    # accepted band 20-24 °C (the band). Measured at the time of writing: 20.17 °C.
    assert 20.0 <= ties[350.0] <= 24.0


def test_default_tie_rises_with_co2(ties):
    # Ehleringer, Cerling & Helliker (1997) Oecologia 112:285: the crossover rises with CO2 (sign check).
    # 280 ppm lies below the Collatz et al. (1998) 350-ppm band and 560/700 ppm above it. Measured at the
    # time of writing: 16.36, 20.17, 25.60, 29.87 °C.
    assert ties[280.0] < ties[350.0] < ties[560.0] <= ties[700.0]
    assert ties[280.0] < 20.0
    assert ties[560.0] > 24.0 and ties[700.0] > 24.0


@pytest.mark.xfail(strict=True, reason="known deviation: without C3 acclimation (Tg = 25 °C) the default tie is "
                                      "16.7 °C at 350 ppm (14.2 at 280, 25.7 at 560, 29.8 at 700), below the "
                                      "Collatz et al. (1998) band")
def test_default_tie_without_acclimation_at_350ppm():
    # Collatz, Berry & Clark (1998): 20-24 °C at ~350 ppm, as above, with Tg held at 25 °C.
    assert 20.0 <= default_tie(350.0, acclimated=False) <= 24.0


def _c3_co2_response(growth_temperature_c, params=None):
    # Light-saturated leaf at 25 °C: 1700 µmol m-2 s-1 absorbed (~2000 incident at 0.85 absorptance), VPD
    # 1.5 kPa (common practice, no source); relative change of net A from 370 to 550 ppm.
    p = {"parameter_set": params or DEFAULT_SETS["C3"], "growth_temperature_c": growth_temperature_c}
    low, high = (leaf_assimilation("C3", 25.0, 1700.0, co2, vpd_kpa=1.5, params=p).net for co2 in (370.0, 550.0))
    return high / low - 1.0


@pytest.mark.parametrize("c3_set", ["c3_temperate_grass", "c3_cereal"])
def test_c3_light_saturated_co2_response_near_face(c3_set):
    # Ainsworth & Long (2005) New Phytol 165:351: in free-air CO2 enrichment (475-600 ppm; the abstract,
    # seen) light-saturated leaf photosynthesis rose by about 31 % (from memory). FACE values are whole
    # field leaves, acclimated to their growth CO2 and temperature, so the band is wide: 20-40 % (ours, common
    # practice, no source). Leaves grown in a temperate summer: Tg = 20 °C (common practice, no source), with
    # Kattge & Knorr (2007) acclimation. Measured at the time of writing: grass +30.7 %, cereal +25.3 %.
    assert 0.20 <= _c3_co2_response(20.0, c3_set) <= 0.40


@pytest.mark.xfail(strict=True, reason="known deviation: with Tg = 25 °C the light-saturated C3 leaf is limited by "
                                      "electron transport at 550 ppm (Jmax/Vcmax 1.715) and gains only +19 %")
def test_c3_co2_response_without_acclimation():
    # Ainsworth & Long (2005), as above, at Tg = 25 °C.
    assert 0.20 <= _c3_co2_response(25.0) <= 0.40


def test_the_crossover_layer_solves_the_same_tie():
    # Derived here: the model's canopy crossover (suitability.model.canopy_crossover) of a cell with the test
    # day in July (representative day 196), with the class margin set to 0 so that it is the equality tie,
    # equals default_tie within the solver's tolerance (0.02 °C) and brentq's (1e-3 °C).
    months = np.arange(1, 13)
    ones = np.ones((12, 1, 1), np.float32)
    climate = xr.Dataset(
        {"tmin": (("month", "y", "x"), 20.0 * ones - 5.0), "tmax": (("month", "y", "x"), 20.0 * ones + 5.0),
         "shortwave": (("month", "y", "x"), 22.0 * ones), "water_availability": (("month", "y", "x"), ones),
         "latitude": (("y", "x"), np.full((1, 1), 40.0, np.float32))},
        coords={"month": months, "y": [0.5], "x": [0.5]})
    result = suitability.evaluate(climate, {"co2_ppm": 350.0}, classes={"contested_margin": 0.0})
    july = float(result["monthly_crossover_temperature"].sel(month=7).values[0, 0])
    assert july == pytest.approx(default_tie(350.0), abs=0.03)
