"""The canopy crossover layers (suitability.model.canopy_crossover) and their solver (suitability.tie_solver).

Main checks:
* the solver finds known roots of analytic functions, the nearest one on the side the start points to,
  and codes "no tie in range" as -inf / +inf (derived here);
* on a small synthetic grid: in every cell and season month, the month's mean temperature is above its
  crossover exactly when the month favours C4 (its advantage index above the class margin), and the
  seasonal layer is the warmest season month's (derived here from the definitions);
* the crossover is the tie of the numpy physiology itself: scipy's brentq on the daily canopies of one cell
  and month (temperatures shifted together, growth temperature following) gives the same temperature;
* cells that differ only in water or radiation have different crossovers (it is per cell), and the
  crossover rises with CO2 (Ehleringer, Cerling & Helliker 1997). The climate values are invented.
"""

from __future__ import annotations

import numpy as np
import pytest
import xarray as xr
from scipy.optimize import brentq

import suitability
from suitability import indicators, tie_solver
from suitability.model import REPRESENTATIVE_DAY
from suitability.physiology import daily_canopy_assimilation


def _solve(function, start, lower=-40.0, upper=40.0):
    def excess(offsets, active):
        return np.where(active, function(offsets), np.nan)

    start = np.asarray(start, float)
    return tie_solver.nearest_tie(excess, start, np.full(start.shape, lower), np.full(start.shape, upper))


def test_solver_finds_the_roots_of_lines_and_curves():
    # Derived here: g(x) = x - c has its root at c; g(x) = tanh(x - c) too (a curved case).
    roots = np.array([-13.7, -0.5, 0.3, 7.25, 29.9])
    for shape in (lambda x: x - roots, lambda x: np.tanh(x - roots)):
        found = _solve(shape, shape(np.zeros(roots.shape)))
        np.testing.assert_allclose(found, roots, atol=tie_solver.TOLERANCE_C)


def test_solver_takes_the_nearest_tie_on_the_side_of_the_start_and_codes_none_as_inf():
    # Derived here: g > 0 (favoured) on (2, 9) only. From 0 (not favoured) upward the nearest tie is 2; from
    # 5 (favoured) downward it is 2 as well (shifts are relative: offsets -3); a start never favoured up to the
    # limit gives +inf, one favoured down to the limit -inf.
    def band(x, centre):
        return np.where((centre + x > 2.0) & (centre + x < 9.0), 1.0, -1.0) + 0.0 * x

    centres = np.array([0.0, 5.0])
    found = _solve(lambda x: band(x, centres), band(np.zeros(2), centres))
    np.testing.assert_allclose(centres + found, [2.0, 2.0], atol=tie_solver.TOLERANCE_C)
    never = _solve(lambda x: -1.0 + 0.0 * x, np.array([-1.0]))
    always = _solve(lambda x: 1.0 + 0.0 * x, np.array([1.0]))
    assert never[0] == np.inf and always[0] == -np.inf
    assert np.isnan(_solve(lambda x: x, np.array([np.nan]))[0])  # not searched


def test_solver_steps_at_most_its_largest_step_and_finds_a_band_that_wide():
    # Derived here: g rises slowly (its line points to a tie 99 degC away) but is > 0 only on [7, 13.05],
    # a band just wider than the largest bracketing step (tie_solver.MAX_STEP_C = 6 degC). The guided
    # steps must not jump over it: no step longer than MAX_STEP_C, and the tie found is 7.
    offsets_asked = []

    def excess(offsets, active):
        offsets_asked.append(offsets[active].copy())
        x = offsets
        return np.where(active, np.where((x >= 7.0) & (x <= 7.0 + tie_solver.MAX_STEP_C + 0.05), 1.0,
                                         -1.0 + 0.01 * x), np.nan)

    found = tie_solver.nearest_tie(excess, np.array([-1.0]), np.array([-40.0]), np.array([40.0]))
    np.testing.assert_allclose(found, [7.0], atol=tie_solver.TOLERANCE_C)
    asked = [float(o[0]) for o in offsets_asked]
    first_in_band = next(i for i, x in enumerate(asked) if x >= 7.0)
    steps = np.diff([0.0] + asked[:first_in_band + 1])
    assert first_in_band >= 1 and np.all(steps > 0) and np.all(steps <= tie_solver.MAX_STEP_C + 1e-12)


def grid_climate(mean_c, shortwave, water) -> xr.Dataset:
    """An invented 1 x n grid: per column a mean temperature, radiation and water; a mild seasonal cycle."""
    months = np.arange(1, 13)
    n = len(mean_c)
    cycle = (4.0 * np.cos(2 * np.pi * (months - 1) / 12.0))[:, None, None]
    tmean = (np.asarray(mean_c, float)[None, None, :] + cycle + np.zeros((12, 1, n))).astype(np.float32)

    def field(values):
        return (np.asarray(values, float)[None, None, :] + np.zeros((12, 1, n))).astype(np.float32)

    return xr.Dataset(
        {"tmin": (("month", "y", "x"), tmean - 5.0), "tmax": (("month", "y", "x"), tmean + 5.0),
         "shortwave": (("month", "y", "x"), field(shortwave)),
         "water_availability": (("month", "y", "x"), field(water)),
         "latitude": (("y", "x"), np.full((1, n), -20.0, np.float32))},
        coords={"month": months, "y": [0.5], "x": np.arange(n) + 0.5})


MEANS = [6.0, 14.0, 20.0, 24.0, 28.0, 33.0, 20.0, 20.0]
SHORTWAVE = [22.0, 22.0, 22.0, 22.0, 22.0, 22.0, 12.0, 22.0]
WATER = [1.0, 1.0, 1.0, 1.0, 1.0, 1.0, 1.0, 0.3]


@pytest.fixture(scope="module", params=["compiled", "numpy"])
def evaluated(request):
    climate = grid_climate(MEANS, SHORTWAVE, WATER)
    return climate, suitability.evaluate(climate, {"co2_ppm": 420}, engine=request.param)


def test_monthly_favour_and_the_crossover_agree_in_every_cell_and_month(evaluated):
    # Derived here from the definitions: month mean above the crossover <=> advantage index > 0.05.
    climate, result = evaluated
    mean = 0.5 * (climate["tmin"].values.astype(float) + climate["tmax"].values.astype(float))
    c3 = result["c3_monthly_assimilation"].values.astype(float)
    c4 = result["c4_monthly_assimilation"].values.astype(float)
    crossover = result["monthly_crossover_temperature"].values.astype(float)
    in_season = np.isfinite(c3)
    favoured = indicators.advantage_index(c3, c4) > 0.05
    assert in_season.sum() > 60 and favoured[in_season].any() and (~favoured[in_season]).any()
    assert np.array_equal(np.isnan(crossover), ~in_season)
    assert np.array_equal((mean > crossover)[in_season], favoured[in_season])
    np.testing.assert_array_equal(((mean > crossover) & in_season).sum(axis=0), result["c4_favoured_months"].values)
    warmest = np.argmax(np.where(in_season, mean, -np.inf), axis=0)
    np.testing.assert_array_equal(result["crossover_temperature"].values,
                                  np.take_along_axis(crossover, warmest[None], axis=0)[0])


def test_the_seasonal_crossover_alone_solves_the_warmest_month_only_and_is_the_same(evaluated, request):
    # Without the monthly layer (the pipeline without a datacube) only each cell's warmest season month is
    # solved: the seasonal layer must be bitwise the one taken from the monthly solution, the monthly layer
    # absent, and the solver must have been asked about one month per cell (counted on the engine's calls).
    from suitability import model

    climate, result = evaluated
    engine = request.node.callspec.params["evaluated"]
    asked = []
    original = model._months

    def counting(block, settings, *args):
        asked.append(int(block.in_season.sum()))
        return original(block, settings, *args)

    model._months = counting
    try:
        alone = suitability.evaluate(climate, {"co2_ppm": 420}, engine=engine, monthly_layers=False)
    finally:
        model._months = original
    assert not {"monthly_crossover_temperature", "c3_monthly_assimilation", "c4_monthly_assimilation"} & set(alone)
    np.testing.assert_array_equal(alone["crossover_temperature"].values, result["crossover_temperature"].values)
    np.testing.assert_array_equal(alone["pathway_class"].values, result["pathway_class"].values)
    n_cells = climate["latitude"].size
    season_months = int(np.isfinite(result["c3_monthly_assimilation"].values).sum())
    # the model pass asks for every season month; each solver pass for at most one month of each cell
    assert season_months > 2 * n_cells
    assert asked[0] == season_months and len(asked) > 2 and max(asked[1:]) <= n_cells


def test_the_crossover_is_per_cell(evaluated):
    # Derived here: the same mean temperature (20 °C columns) with less radiation or less water gives another
    # tie; the same conditions at other temperatures the same tie within twice the solver tolerance.
    _, result = evaluated
    january = result["monthly_crossover_temperature"].values[0, 0]
    assert abs(january[2] - january[6]) > 0.3 and abs(january[2] - january[7]) > 0.3
    same = january[[1, 2, 3, 4, 5]]
    assert np.ptp(same[np.isfinite(same)]) <= 2 * tie_solver.TOLERANCE_C


def test_the_crossover_is_the_tie_of_the_numpy_physiology():
    # Independent of the solver: scipy's brentq on the numpy daily canopies of one cell (column 2) in January,
    # Tmin and Tmax shifted together, C3 acclimated to the month mean (the model's default), margin 0.05.
    climate = grid_climate(MEANS, SHORTWAVE, WATER)
    result = suitability.evaluate(climate, {"co2_ppm": 420})
    cell = climate.isel(month=0, y=0, x=2)

    def excess(mean_c):
        shift = mean_c - 0.5 * float(cell.tmin + cell.tmax)
        nets = [float(daily_canopy_assimilation(
            pathway, tmin_c=float(cell.tmin) + shift, tmax_c=float(cell.tmax) + shift,
            shortwave_mj=float(cell.shortwave), latitude_deg=-20.0, day_of_year=int(REPRESENTATIVE_DAY[0]),
            co2_ppm=420.0, water_availability=float(cell.water_availability), lai=3.0,
            growth_temperature_c=mean_c).net) for pathway in ("C3", "C4")]
        return float(indicators.advantage_index(nets[0], nets[1])) - 0.05

    expected = brentq(excess, 10.0, 40.0, xtol=1e-4)
    assert float(result["monthly_crossover_temperature"].values[0, 0, 2]) == pytest.approx(expected, abs=0.05)


def test_the_crossover_rises_with_co2():
    # Ehleringer, Cerling & Helliker (1997) Oecologia 112:285: the C3/C4 crossover rises with CO2.
    climate = grid_climate([22.0], [22.0], [1.0])
    ties = [float(suitability.evaluate(climate, {"co2_ppm": co2})["crossover_temperature"].values[0, 0])
            for co2 in (280.0, 420.0, 560.0)]
    assert ties[0] < ties[1] < ties[2]
