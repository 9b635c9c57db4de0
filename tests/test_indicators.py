"""Indicators: advantage index, classes, months favoured, photorespiration share, change layers.

The expected numbers are derived here from the definitions in suitability/indicators.py (normalised
difference; class thresholds), which in turn follow the DESIGN of the layers; no external source applies.
"""

import dask.array as da
import numpy as np
import pytest
import xarray as xr

from suitability import indicators


def test_advantage_is_normalised_difference():
    # derived here: (A4 - A3) / (A4 + A3) for A3 = 30, A4 = 90 is 60 / 120 = 0.5
    assert indicators.advantage_index(30.0, 90.0) == pytest.approx(0.5)
    assert indicators.advantage_index(90.0, 30.0) == pytest.approx(-0.5)


def test_advantage_counts_negative_totals_as_zero_and_handles_both_zero():
    # derived here: a pathway with a net loss has no potential; the other then has index +1 or -1
    assert indicators.advantage_index(-5.0, 10.0) == pytest.approx(1.0)
    assert indicators.advantage_index(10.0, -5.0) == pytest.approx(-1.0)
    assert indicators.advantage_index(-5.0, -1.0) == 0.0
    assert np.isnan(indicators.advantage_index(np.nan, 1.0))


def test_advantage_of_arrays_keeps_dtype_and_handles_zero_nan_and_lazy_inputs():
    # derived here, element by element: both zero (or losses) 0; NaN in either NaN; the rest as above
    c3 = np.array([0.0, -2.0, np.nan, 30.0, 5.0, 0.0], np.float32)
    c4 = np.array([0.0, 0.0, 4.0, np.nan, 0.0, 7.0], np.float32)
    expected = [0.0, 0.0, np.nan, np.nan, -1.0, 1.0]
    got = indicators.advantage_index(c3, c4)
    assert got.dtype == np.float32
    np.testing.assert_array_equal(got, np.array(expected, np.float32))
    lazy = indicators.advantage_index(xr.DataArray(da.from_array(c3, chunks=3)), xr.DataArray(c4))
    assert isinstance(lazy.data, da.Array)  # stays lazy
    np.testing.assert_array_equal(lazy.values, np.array(expected, np.float32))


def test_classes_with_margin():
    advantage = np.array([-0.5, -0.051, -0.05, 0.0, 0.05, 0.0501, 0.9, np.nan])
    classes = indicators.pathway_class(advantage, 0.05)
    assert classes.dtype == np.uint8
    assert classes.tolist() == [1, 1, 2, 2, 2, 3, 3, 255]
    with pytest.raises(ValueError):
        indicators.pathway_class(advantage, 1.5)


def test_c4_favoured_months_counts_only_season_months():
    monthly_c3 = np.array([[10.0], [10.0], [10.0], [10.0]])
    monthly_c4 = np.array([[20.0], [10.0], [30.0], [30.0]])
    in_season = np.array([[True], [True], [True], [False]])
    # derived here: months 1 and 3 have index 1/3 and 1/2 (> 0.05), month 2 has 0, month 4 is out of season
    assert indicators.c4_favoured_months(monthly_c3, monthly_c4, in_season).tolist() == [2.0]


def test_photorespiration_share():
    # vc = A_gross + R_photo (von Caemmerer 2000, eq. 2.1 rearranged): 25 / (75 + 25) = 0.25
    assert indicators.photorespiration_share(75.0, 25.0) == pytest.approx(0.25)
    assert np.isnan(indicators.photorespiration_share(0.0, 0.0))


def test_change_layers_and_transition_codes_stay_lazy():
    base = xr.DataArray(da.from_array(np.array([[1, 2], [3, 255]], np.uint8), chunks=1), dims=("y", "x"))
    scen = xr.DataArray(da.from_array(np.array([[3, 2], [1, 1]], np.uint8), chunks=1), dims=("y", "x"))
    transition = indicators.class_transition(base, scen)
    assert transition.chunks is not None  # still lazy
    assert transition.values.tolist() == [[13, 22], [31, 255]]
    change = indicators.advantage_change(np.array([0.1, np.nan]), np.array([0.4, 0.2]))
    assert change[0] == pytest.approx(0.3) and np.isnan(change[1])
