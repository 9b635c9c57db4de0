"""Multi-year CF series to a monthly climatology over a period (suitability.inputs.periods).

Small invented CF files written in tmp_path with the conventions real downscaled files have: noleap and
360_day calendars, longitudes 0-360, int16 packed with scale_factor/add_offset, descending latitude,
daily steps. Expected climatologies are computed here independently with numpy from the values written
(derived here from the definition of a multi-year monthly mean).
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
import xarray as xr
from xarray.backends import BackendArray

from suitability.config import LayerSpec
from suitability.errors import InputDataError
from suitability.inputs import ShortPeriodWarning, open_layer
from suitability.inputs.readers import read_native

LAT = np.array([-20.1, -20.3, -20.5, -20.7])  # descending, as many model grids are
LON = np.array([55.1, 55.3, 55.5, 55.7, 55.9])


def spec(path, **kw) -> LayerSpec:
    return LayerSpec.model_validate({"path": str(path), **kw})


def series(path, values_of, *, calendar="noleap", years=(2041, 2070), daily=False, lon=LON, units="K",
           name="tas", pack=False, ramp=1.0):
    """A CF NetCDF with a time series; values_of(time index array of cftime dates) -> array (time,)."""
    if daily:
        last_day = 30 if calendar == "360_day" else 31
        times = xr.date_range(f"{years[0]}-01-01", f"{years[1]}-12-{last_day}", freq="D", calendar=calendar,
                              use_cftime=True)
    else:
        times = xr.date_range(f"{years[0]}-01-01", periods=12 * (years[1] - years[0] + 1), freq="MS",
                              calendar=calendar, use_cftime=True)
    per_step = np.asarray(values_of(times), dtype="float64")
    field = ramp * (0.01 * np.arange(LAT.size)[:, None] + 0.001 * np.arange(lon.size)[None, :])
    values = per_step[:, None, None] + field[None]
    ds = xr.Dataset(
        {name: (("time", "lat", "lon"), values.astype("float32"), {"units": units})},
        coords={"time": times,
                "lat": ("lat", LAT, {"standard_name": "latitude", "units": "degrees_north"}),
                "lon": ("lon", lon, {"standard_name": "longitude", "units": "degrees_east"})},
    )
    encoding = {"time": {"units": "days since 1950-01-01", "calendar": calendar}}
    if pack:
        encoding[name] = {"dtype": "int16", "scale_factor": 0.01, "add_offset": 280.0, "_FillValue": -32768}
    ds.to_netcdf(path, encoding=encoding)
    return path, per_step, times


def _oracle(per_step, times, first, last):
    """Mean per calendar month of the steps in [first, last] (numpy, independent of the package)."""
    years = np.array([t.year for t in times])
    months = np.array([t.month for t in times])
    keep = (years >= first) & (years <= last)
    return np.array([per_step[keep & (months == m)].mean() for m in range(1, 13)])


def _seasonal(times):
    return np.array([280.0 + 10 * np.sin(2 * np.pi * (t.month - 1) / 12) + 0.05 * (t.year - 2041) for t in times])


def test_noleap_monthly_series_over_a_period(tmp_path):
    path, per_step, times = series(tmp_path / "t.nc", _seasonal)
    layer = open_layer("tmean", spec(path, period=[2050, 2059]))
    assert layer.dims == ("month", "y", "x") and layer.chunks is not None  # lazy: still dask-backed
    expected = _oracle(per_step, times, 2050, 2059) - 273.15  # derived here: mean of the written values
    np.testing.assert_allclose(layer.values[:, 0, 0], expected, atol=1e-4)
    info = read_native("tmean", spec(path, period=[2050, 2059]), path, True, 512).time
    assert (info.calendar, info.period, info.years, info.steps, info.time_steps) == ("noleap", (2050, 2059), 10, "monthly", 360)


def test_whole_file_is_the_default_and_short_series_warn(tmp_path):
    path, per_step, times = series(tmp_path / "t.nc", _seasonal, years=(2041, 2045))
    with pytest.warns(ShortPeriodWarning, match="5 year"):
        layer = open_layer("tmean", spec(path))
    np.testing.assert_allclose(layer.values[:, 0, 0], _oracle(per_step, times, 2041, 2045) - 273.15, atol=1e-4)
    long_path, _, _ = series(tmp_path / "long.nc", _seasonal, years=(2041, 2050))
    with warnings.catch_warnings():
        warnings.simplefilter("error", ShortPeriodWarning)  # 10 years: no warning
        open_layer("tmean", spec(long_path))


@pytest.mark.parametrize("calendar", ["360_day", "noleap", "all_leap", "standard"])
def test_daily_series_in_any_calendar(tmp_path, calendar):
    def daily(times):  # a value depending on the month and the day, so day weighting matters
        return np.array([270.0 + t.month + 0.1 * t.day for t in times])

    path, per_step, times = series(tmp_path / "d.nc", daily, calendar=calendar, years=(2001, 2002), daily=True)
    with pytest.warns(ShortPeriodWarning):
        native = read_native("tmin", spec(path), path, True, 512)
    assert native.time.steps == "daily" and native.time.years == 2
    assert native.time.calendar in (calendar, "proleptic_gregorian", "gregorian")
    expected = _oracle(per_step, times, 2001, 2002)  # mean of every day of the month: the mean of daily minima
    np.testing.assert_allclose(native.data.values[:, 0, 0], expected, atol=1e-3)
    if calendar == "360_day":  # every month has 30 days: mean of 0.1 * day over 1..30 is 1.55
        np.testing.assert_allclose(expected, 270.0 + np.arange(1, 13) + 1.55)


def test_packed_int16_lon_0_360_descending_lat(tmp_path):
    lon = np.array([350.1, 350.3, 350.5, 350.7, 350.9])
    path, per_step, times = series(tmp_path / "p.nc", _seasonal, lon=lon, pack=True, years=(2041, 2050))
    layer = open_layer("tmean", spec(path))
    np.testing.assert_allclose(layer.x.values, lon - 360.0, atol=1e-9)  # 0..360 -> -180..180
    assert layer.y.values[0] > layer.y.values[-1]  # north-up
    # int16 with scale 0.01: each value within half a packing step of what was written
    np.testing.assert_allclose(layer.values[:, 0, 0], _oracle(per_step, times, 2041, 2050) - 273.15, atol=0.006)


def test_rainfall_in_kg_m2_s1_series(tmp_path):
    def rain(times):  # 2e-5 kg m-2 s-1 in every month = 1.728 mm d-1 (86400 s d-1; 1 kg m-2 = 1 mm of water)
        return np.full(len(times), 2e-5)

    path, _, _ = series(tmp_path / "pr.nc", rain, units="kg m-2 s-1", name="pr", years=(2041, 2050), ramp=0.0)
    layer = open_layer("precipitation", spec(path))
    np.testing.assert_allclose(layer.values[:, 0, 0], 2e-5 * 86400, rtol=1e-5)


def test_negative_rainfall_is_refused(tmp_path):
    path, _, _ = series(tmp_path / "pr.nc", lambda t: np.full(len(t), -1e-5), units="kg m-2 s-1", name="pr",
                        years=(2041, 2050), ramp=0.0)
    with pytest.raises(InputDataError, match="negative values") as info:
        open_layer("precipitation", spec(path))
    assert "pr.nc" in str(info.value) and "'precipitation'" in str(info.value)


def test_totals_per_month_declared_per_day_are_refused(tmp_path):
    # 60-250 mm in a month declared as mm d-1: a median above 40 mm d-1 (threshold: common practice, no source)
    path, _, _ = series(tmp_path / "pr.nc", lambda t: np.array([60.0 + 15 * (x.month % 12) for x in t]),
                        units="mm d-1", name="pr", years=(2041, 2050))
    with pytest.raises(InputDataError, match="look like totals per month") as info:
        open_layer("precipitation", spec(path))
    assert "pr.nc" in str(info.value)
    with pytest.raises(InputDataError, match="per month or year"):  # and mm per month is refused outright
        open_layer("precipitation", spec(path, units="mm month-1"))


def test_twelve_steps_keep_working_and_record_the_calendar(tmp_path):
    path, per_step, times = series(tmp_path / "c.nc", _seasonal, years=(2000, 2000))
    native = read_native("tmean", spec(path, period=[2041, 2070]), path, True, 512)  # a climatology: period not applied
    assert native.time.steps == "climatology" and native.time.calendar == "noleap"
    np.testing.assert_allclose(native.data.values[:, 0, 0], per_step, atol=1e-4)


def test_period_outside_the_files_years_is_refused(tmp_path):
    path, _, _ = series(tmp_path / "t.nc", _seasonal, years=(2041, 2060))
    with pytest.raises(InputDataError, match=r"period 2041-2070 is outside the file's years 2041-2060") as info:
        open_layer("tmean", spec(path, period=[2041, 2070]))
    assert str(path) in str(info.value) and "'tmean'" in str(info.value)


def test_undecodable_calendar_is_refused(tmp_path):
    times = np.arange(36, dtype="float64")
    ds = xr.Dataset({"tas": (("time", "lat", "lon"), np.full((36, LAT.size, LON.size), 290.0, "float32"), {"units": "K"})},
                    coords={"time": ("time", times, {"units": "days since 2000-01-01", "calendar": "martian_sols"}),
                            "lat": LAT, "lon": LON})
    ds.to_netcdf(tmp_path / "bad.nc")
    with pytest.raises(InputDataError, match="cannot decode the time axis") as info:
        open_layer("tmean", spec(tmp_path / "bad.nc"))
    assert "bad.nc" in str(info.value) and "'tmean'" in str(info.value)


def test_period_in_config_validation():
    assert LayerSpec.model_validate({"path": "a.nc", "period": [2041, 2070]}).period == (2041, 2070)
    with pytest.raises(ValueError, match="first_year <= last_year"):
        LayerSpec.model_validate({"path": "a.nc", "period": [2070, 2041]})
    with pytest.raises(ValueError, match="two whole years"):
        LayerSpec.model_validate({"path": "a.nc", "period": ["2041", 2070.5]})


def test_wind_at_10_m_is_brought_to_2_m_and_km_per_hour_declared_as_m_per_s_is_refused(tmp_path):
    # FAO-56 eq. 47: u2 = u10 · 4.87 / ln(67.8 · 10 − 5.42) = 0.748 u10 (the factor of FAO-56 Example 14)
    path, _, _ = series(tmp_path / "sfcWind.nc", lambda t: np.full(len(t), 4.0), units="m s-1", name="sfcWind",
                        years=(2041, 2050), ramp=0.0)
    at_2m = open_layer("wind_speed", spec(path, height_m=10))
    np.testing.assert_allclose(at_2m.values, 4.0 * 4.87 / np.log(67.8 * 10 - 5.42), rtol=1e-6)
    np.testing.assert_allclose(open_layer("wind_speed", spec(path)).values, 4.0, rtol=1e-6)  # given at 2 m
    fast, _, _ = series(tmp_path / "kmh.nc", lambda t: np.full(len(t), 14.4 * 3), units="m s-1", name="sfcWind",
                        years=(2041, 2050), ramp=0.0)  # 43.2: km h-1 values declared in m s-1
    with pytest.raises(InputDataError, match="look like km h-1") as info:
        open_layer("wind_speed", spec(fast))
    assert "kmh.nc" in str(info.value) and "'wind_speed'" in str(info.value)
    with pytest.raises(ValueError, match="wind_speed layer only"):
        from suitability.config import ClimateLayers

        ClimateLayers.model_validate({"tmin": {"path": "t.nc", "height_m": 10}})


def test_monthly_means_skip_missing_values_as_xarray_groupby_does():
    # Reference: xarray's groupby("time.month").mean() (NaN skipped), on a lazy series in 7-step chunks so
    # that chunks hold parts of months; every value of month 3 at one cell is missing -> NaN there.
    import dask.array as da

    from suitability.inputs.periods import _monthly_means

    times = xr.date_range("2001-01-01", periods=36, freq="MS", calendar="noleap", use_cftime=True)
    rng = np.random.default_rng(7)
    values = rng.normal(285.0, 5.0, (36, 3, 4)).astype("float32")
    values[5, 1, 2] = np.nan
    values[[2, 14, 26], 0, 0] = np.nan
    series = xr.DataArray(da.from_array(values, chunks=(7, -1, -1)), dims=("time", "y", "x"),
                          coords={"time": times}, name="tmin")
    months = np.array([t.month for t in times])
    ours = _monthly_means(series, months).values
    reference = xr.DataArray(values, dims=("time", "y", "x"), coords={"time": times}).groupby("time.month").mean().values
    np.testing.assert_allclose(ours, reference, rtol=1e-6, equal_nan=True)
    assert np.isnan(ours[2, 0, 0]) and np.isfinite(ours[5, 1, 2])


class _RecordingSeries(BackendArray):
    """A (time, y, x) array that records the cells of every read (an xarray backend array, outer indexing)."""

    def __init__(self, values):
        self.values, self.shape, self.dtype, self.cells_read = values, values.shape, values.dtype, []

    def __getitem__(self, key):
        from xarray.core import indexing

        def read(raw):
            out = self.values[np.ix_(*[np.arange(n)[k] if isinstance(k, slice) else np.atleast_1d(k)
                                       for k, n in zip(raw, self.shape)])]
            self.cells_read.append(out.shape[1] * out.shape[2])
            return out

        return indexing.explicit_indexing_adapter(key, self.shape, indexing.IndexingSupport.OUTER, read)


def _lazy_series(values, times):
    from suitability.inputs.native import lazy_array

    backend = _RecordingSeries(values)
    coords = {"time": times, "y": np.arange(values.shape[1]) * -1.0, "x": np.arange(values.shape[2]) * 1.0}
    return lazy_array(backend, ("time", "y", "x"), coords, "tas"), backend


def test_a_window_of_the_monthly_means_reads_only_that_window_of_the_series(monkeypatch):
    # Reference: xarray's groupby("time.month").mean() of the whole series, at the window. A window read
    # must not read the rest of the series (the checks before a run read 64 small windows of 30 years).
    from suitability.inputs import periods

    times = xr.date_range("2001-01-01", periods=120, freq="MS", calendar="noleap", use_cftime=True)
    values = np.random.default_rng(3).normal(285.0, 5.0, (120, 40, 50)).astype("float32")
    values[7, 12, 21] = np.nan
    lazy, backend = _lazy_series(values, times)
    months = np.array([t.month for t in times])
    means = periods._monthly_means(lazy, months)
    assert backend.cells_read == []  # lazy: nothing read yet
    monkeypatch.setattr(periods, "_PIECE_VALUES", 20 * 6 * 4)  # 20 steps per piece: several pieces
    window = means.isel(y=slice(10, 16), x=slice(20, 24)).values
    reference = xr.DataArray(values, dims=("time", "y", "x"), coords={"time": times}).groupby("time.month").mean()
    np.testing.assert_allclose(window, reference.values[:, 10:16, 20:24], rtol=1e-6)
    assert set(backend.cells_read) == {6 * 4} and len(backend.cells_read) == 6  # 120 steps in pieces of 20


def test_sample_of_a_series_reads_a_small_part_of_the_file_and_equals_the_whole_means(tmp_path):
    # The checks' sample of a 30-year series: windows of sample_width(360) = 6 cells, one read per row of
    # windows; equal to the same cells of the monthly means computed over the whole field.
    from suitability.inputs.checks import read_sample, sample_width

    assert (sample_width(None), sample_width(12), sample_width(360), sample_width(30 * 365)) == (32, 32, 6, 4)
    times = xr.date_range("2041-01-01", periods=360, freq="MS", calendar="noleap", use_cftime=True)
    values = np.random.default_rng(5).normal(290.0, 3.0, (360, 300, 300)).astype("float32")
    lazy, backend = _lazy_series(values, times)
    from suitability.inputs.periods import _monthly_means

    means = _monthly_means(lazy, np.array([t.month for t in times]))
    sample = read_sample(means, "t.nc: layer 'tmin'", sample_width(360))
    assert sample.shape == (12, 48, 48)
    assert len(backend.cells_read) == 8 and max(backend.cells_read) <= 6 * 300  # 8 rows of windows
    rows = np.concatenate([np.arange(s, s + 6) for s in np.linspace(0, 294, 8).round().astype(int)])
    whole = xr.DataArray(values, dims=("time", "y", "x"), coords={"time": times}).groupby("time.month").mean().values
    np.testing.assert_allclose(sample, whole[:, rows][:, :, rows], rtol=1e-6)


def test_a_declared_nodata_value_of_a_series_is_skipped_in_its_monthly_means(tmp_path):
    # -999 stands for missing values in some steps at one cell; the means are those of the other years
    # (derived here with numpy), as when the file marks them with _FillValue.
    path, per_step, times = series(tmp_path / "t.nc", _seasonal, years=(2041, 2050))
    with xr.open_dataset(path) as ds:
        data = ds.load()
    data["tas"][[0, 12, 24], 1, 2] = -999.0  # three Januaries at one cell
    data.to_netcdf(tmp_path / "gaps.nc")
    layer = open_layer("tmean", spec(tmp_path / "gaps.nc", nodata=-999.0, units="K")).values
    field = 0.01 * 1 + 0.001 * 2
    months = np.array([t.month for t in times])
    january = [i for i in np.flatnonzero(months == 1) if i not in (0, 12, 24)]
    np.testing.assert_allclose(layer[0, 1, 2], per_step[january].mean() + field - 273.15, atol=1e-4)
    np.testing.assert_allclose(layer[:, 0, 0], _oracle(per_step, times, 2041, 2050) - 273.15, atol=1e-4)


def test_in_a_run_each_file_is_opened_once_and_closed_at_the_end(tmp_path, monkeypatch):
    # Within one_handle_per_file (a run, check) a NetCDF file is opened once for all its layers, which keeps
    # libhdf5 from the crash of a file open several times (HDF5 issue 3649); the layers stay apart (the
    # reader clears a layer's attributes); at the end the file is closed, so it can be written again and is
    # then read anew.
    from suitability.inputs import cf

    opened = []
    uncached = cf._open_uncached
    monkeypatch.setattr(cf, "_open_uncached", lambda *args: opened.append(args[0]) or uncached(*args))
    path, per_step, times = series(tmp_path / "t.nc", _seasonal, years=(2041, 2050))
    with cf.one_handle_per_file():
        first = open_layer("tmean", spec(path)).values
        again = open_layer("tmax", spec(path))
        assert again.attrs["declared_units"] == "K" and again.attrs["source_layer"] == "tmax"
        np.testing.assert_allclose(again.values, first)
        assert len(opened) == 1
    series(path, lambda t: _seasonal(t) + 1.5, years=(2041, 2050))  # refused while the file is open
    with cf.one_handle_per_file():
        np.testing.assert_allclose(open_layer("tmean", spec(path)).values, first + 1.5, atol=1e-4)
    assert len(opened) == 2
