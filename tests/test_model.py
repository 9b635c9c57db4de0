"""suitability.evaluate on in-memory xarray data: the Python API researchers use.

Expected directions are published (cited beside each check); the seasonal-sum identities are derived
here from the definitions in suitability/model.py. The climate values are synthetic.
"""

from __future__ import annotations

import numpy as np
import pytest
import xarray as xr

import suitability
from suitability.model import SEASONAL_LAYERS

from hand_derived import gamma_star_umol_mol, saturation_vapour_pressure_kpa


def synthetic_climate(mean_temperature_c, *, chunks=None) -> xr.Dataset:
    """A 2 x len(T) grid whose columns differ in mean temperature; a mild seasonal cycle; well watered."""
    temperature = np.asarray(mean_temperature_c, dtype=np.float32)
    months = np.arange(1, 13)
    season = (3.0 * np.cos(2 * np.pi * (months - 1) / 12.0)).astype(np.float32)[:, None, None]
    tmean = temperature[None, None, :] + season + np.zeros((12, 2, temperature.size), np.float32)
    ds = xr.Dataset(
        {
            "tmin": (("month", "y", "x"), tmean - 6.0),
            "tmax": (("month", "y", "x"), tmean + 6.0),
            "shortwave": (("month", "y", "x"), np.full_like(tmean, 20.0)),
            "water_availability": (("month", "y", "x"), np.full_like(tmean, 1.0)),
            "latitude": (("y", "x"), np.full((2, temperature.size), -15.0, np.float32)),
            "elevation": (("y", "x"), np.zeros((2, temperature.size), np.float32)),
        },
        coords={"month": months, "y": [1.5, 0.5], "x": np.arange(temperature.size) + 0.5},
    )
    return ds.chunk({"month": -1, "y": 1, "x": 2}) if chunks else ds


def test_every_layer_is_returned_with_its_shape_and_its_defining_relation():
    result = suitability.evaluate(synthetic_climate([10.0, 28.0]), {"co2_ppm": 420})
    for name in SEASONAL_LAYERS:
        assert result[name].shape == (2, 2), name
    assert result["c3_monthly_assimilation"].shape == (12, 2, 2)
    assert result["pathway_class"].dtype == np.uint8
    a3, a4 = (result[f"{p}_assimilation"].values.astype(float) for p in ("c3", "c4"))
    m3, m4 = (result[f"{p}_monthly_assimilation"].values.astype(float) for p in ("c3", "c4"))
    # Derived here (model.py): with every month in the season, the season total is the sum of the months.
    np.testing.assert_allclose(a3, m3.sum(axis=0), rtol=1e-5)
    np.testing.assert_allclose(a4, m4.sum(axis=0), rtol=1e-5)
    assert (a3 > 0).all() and (a4 > 0).all()  # well watered and lit: both gain carbon (so no clipping below)
    # DESIGN.md: pathway advantage = (A4 - A3) / (A4 + A3).
    np.testing.assert_allclose(result["pathway_advantage"].values, (a4 - a3) / (a4 + a3), rtol=0, atol=1e-6)
    # DESIGN.md / indicators.py: class 3 above the margin (0.05), 1 below -0.05, else 2.
    advantage = result["pathway_advantage"].values
    expected_class = np.where(advantage > 0.05, 3, np.where(advantage < -0.05, 1, 2))
    np.testing.assert_array_equal(result["pathway_class"].values, expected_class)
    # Derived here: months favouring C4 = months whose own index (M4 - M3)/(M4 + M3) exceeds the margin.
    monthly_index = (m4 - m3) / (m4 + m3)
    np.testing.assert_array_equal(result["c4_favoured_months"].values, (monthly_index > 0.05).sum(axis=0))
    # The canopy crossover (model.canopy_crossover): both columns share radiation, water and latitude and
    # differ only in temperature, and the warmest season month is January in both; the tie depends on the
    # month's conditions but not on where the month's own temperature lies, so both cells give the same
    # crossover within twice the solver's tolerance (tie_solver.TOLERANCE_C = 0.02 °C). Derived here.
    crossover = result["crossover_temperature"].values
    assert np.isfinite(crossover).all() and np.ptp(crossover) <= 0.04
    # Photorespiration share = 0.5 vo / vc = Γ*/Ci at every instant (FvCB identity, von Caemmerer 2000
    # eq. 2.1 and 2.3), so the season's share lies between the smallest and largest instantaneous Γ*/Ci:
    # Γ* at the coldest and warmest leaf temperatures (Tmin and Tmax of the months, Bernacchi et al. 2001);
    # Ci between Ca (lower bound of the share) and Ca g1/(g1 + √D) (Medlyn et al. 2011, g1 5.25 of the
    # default set from Lin et al. 2015), D at most e°(Tmax) - e°(Tmin) with the dew point at Tmin (FAO-56
    # eqs. 11 and 48). Derived here; the bounds are a factor of about 3 apart.
    share = result["photorespiration_share"].values[0]
    climate = synthetic_climate([10.0, 28.0])
    for column in range(2):
        tmin = climate["tmin"].values[:, 0, column].astype(float)
        tmax = climate["tmax"].values[:, 0, column].astype(float)
        lowest = min(gamma_star_umol_mol(t) for t in tmin) / 420.0
        highest = max(gamma_star_umol_mol(hi) * (5.25 + np.sqrt(saturation_vapour_pressure_kpa(hi)
                                                                - saturation_vapour_pressure_kpa(lo)))
                      / (5.25 * 420.0) for lo, hi in zip(tmin, tmax))
        assert lowest < share[column] < highest, (column, lowest, share[column], highest)
    assert share[1] > share[0]  # Γ* rises with temperature (Bernacchi et al. 2001): more at 28 than 10 °C


def test_season_totals_are_sums_of_the_monthly_totals():
    result = suitability.evaluate(synthetic_climate([10.0, 28.0]), {"co2_ppm": 420}, season={"months": [1, 2, 3]})
    monthly = result["c3_monthly_assimilation"]
    # derived here: season total = sum of the season's monthly totals; months outside the season are NaN
    np.testing.assert_allclose(result["c3_assimilation"], monthly.sel(month=[1, 2, 3]).sum("month"), rtol=1e-5)
    assert np.isnan(monthly.sel(month=6)).all()


def test_cool_cells_favour_c3_and_hot_cells_favour_c4():
    # Collatz et al. 1998 / Ehleringer et al. 1997: C4 favoured where warm, C3 where cool, at present CO2.
    result = suitability.evaluate(synthetic_climate([8.0, 30.0]), {"co2_ppm": 420})
    classes = result["pathway_class"].values[0]
    assert classes[0] == 1 and classes[1] == 3


def test_more_co2_lowers_and_warming_raises_the_c4_advantage():
    climate = synthetic_climate([14.0, 20.0, 26.0])
    base = suitability.evaluate(climate, {"co2_ppm": 420})["pathway_advantage"]
    more_co2 = suitability.evaluate(climate, {"co2_ppm": 700})["pathway_advantage"]
    warmer = suitability.evaluate(climate, {"co2_ppm": 420, "temperature_offset_c": 3})["pathway_advantage"]
    assert (more_co2 < base).all()  # Ehleringer et al. 1997: higher CO2 favours C3
    assert (warmer > base).all()  # Collatz et al. 1998: warmer months favour C4


def test_dask_input_stays_lazy_and_gives_identical_numbers():
    eager = suitability.evaluate(synthetic_climate([12.0, 18.0, 24.0, 30.0]), {"co2_ppm": 500})
    lazy = suitability.evaluate(synthetic_climate([12.0, 18.0, 24.0, 30.0], chunks=True), {"co2_ppm": 500})
    assert lazy["pathway_advantage"].chunks is not None
    for name in SEASONAL_LAYERS:
        np.testing.assert_array_equal(eager[name].values, lazy[name].values)


def test_a_block_evaluated_in_stripes_of_rows_on_several_threads_gives_identical_numbers():
    # The model works cell by cell, so a block cut into stripes of rows (model.evaluate_runs,
    # threads_per_block) must give the same numbers as the whole block, in every layer and every run.
    from suitability.model import ModelRun, evaluate_runs

    temperatures = [8.0, 14.0, 20.0, 26.0, 32.0]
    climate = synthetic_climate(temperatures)
    climate = xr.concat([climate.assign_coords(y=climate.y + 2 * k) for k in range(4)], dim="y")  # 8 rows
    warmer = xr.DataArray(np.arange(8, dtype=np.float32) * 1.5, dims="y")  # every row its own climate
    climate = climate.assign(tmin=climate.tmin + warmer, tmax=climate.tmax + warmer,
                             latitude=climate.latitude - 3.0 * warmer)
    climate = climate.chunk({"month": -1, "y": -1, "x": -1})  # one block
    runs = [ModelRun({"co2_ppm": 420}, None), ModelRun({"co2_ppm": 560, "temperature_offset_c": 2.0}, None)]
    whole = evaluate_runs(climate, runs)
    striped = evaluate_runs(climate, runs, threads_per_block=3)  # stripes of 3, 2 and 3 rows
    for one, other in zip(whole, striped):
        assert set(one.data_vars) == set(other.data_vars)
        for name in one.data_vars:
            np.testing.assert_array_equal(one[name].values, other[name].values)


def test_threads_are_shared_out_within_blocks_only_where_blocks_are_fewer_than_threads():
    from suitability.runtime import Runtime

    threads = Runtime("threads", None, 2, 512)
    assert threads.threads_per_block((500, 500)) == 2  # one block, two threads
    assert threads.threads_per_block((1000, 600)) == 1  # four blocks
    assert Runtime("threads", None, 8, 512).threads_per_block((1000, 600)) == 2
    assert Runtime("local-cluster", None, 2, 512).threads_per_block((500, 500)) == 1  # worker processes


def test_nodata_cells_stay_nodata():
    climate = synthetic_climate([12.0, 28.0])
    climate["tmin"][:, 0, 0] = np.nan
    result = suitability.evaluate(climate, {"co2_ppm": 420})
    assert np.isnan(result["pathway_advantage"].values[0, 0])
    assert result["pathway_class"].values[0, 0] == 255
    assert np.isfinite(result["pathway_advantage"].values[1, 0])


def test_temperature_rule_season_excludes_cold_months():
    result = suitability.evaluate(synthetic_climate([6.0, 25.0]), {"co2_ppm": 420}, season={"min_mean_temperature_c": 5.0})
    monthly = result["c3_monthly_assimilation"].values
    # derived here: the 6 °C column has a cosine of amplitude 3 °C, so months near July (mean < 5 °C) drop out
    assert np.isnan(monthly[6, 0, 0]) and np.isfinite(monthly[0, 0, 0])
    assert np.isfinite(monthly[:, 0, 1]).all()
    # Exactly: the mean is 6 + 3 cos(2π (m - 1)/12) < 5 °C where cos(2π (m - 1)/12) < -1/3, i.e. for
    # (m - 1) · 30° between 109.5° and 250.5°: months 5 to 9 (derived here). The 25 °C column keeps all months.
    dropped = [int(m) for m in result["month"].values[np.isnan(monthly[:, 0, 0])]]
    assert dropped == [5, 6, 7, 8, 9]
    assert np.isfinite(monthly[:, :, 1]).all()


def test_missing_layer_is_a_clear_error():
    climate = synthetic_climate([20.0]).drop_vars("shortwave")
    with pytest.raises(ValueError, match="shortwave"):
        suitability.evaluate(climate, {"co2_ppm": 420})
