"""Reading climate layers (suitability.inputs): formats, units, CRS handling, errors, inspection.

Every fixture is a small invented file written in tmp_path with rasterio or xarray, placed in the invented
Kessarine Basin (open ocean near 23° S 55° E, UTM zone 40S). Conversion factors come from the SI
(BIPM, The International System of Units, 9th ed. 2019: 1 W = 1 J s-1, 1 d = 86 400 s, prefixes
µ = 1e-6, h = 1e2, k = 1e3, M = 1e6, % = 0.01, t/°C = T/K - 273.15, §2.3.1 and Table 8); the layer
definitions (water_stress = 1 - water_availability, valid ranges) are the glossary of suitability/variables.py.
CF conventions (CF-1.10, §4.1-4.4: latitude/longitude coordinates, units, calendars) define the NetCDF
cases; cftime supplies the non-standard calendars.
"""

from __future__ import annotations

import warnings

import dask.array as dsa
import numpy as np
import pandas as pd
import pytest
import rasterio
import rioxarray  # noqa: F401
import xarray as xr
import yaml
from affine import Affine

from suitability.config import LayerSpec, load_config
from suitability.errors import InputDataError
from suitability.grid import TargetGrid
from suitability.inputs import (
    InputCoverageWarning,
    inspect_inputs,
    layer_files,
    linear_conversion,
    load_climate,
    load_mask,
    open_layer,
)

UTM40S = "EPSG:32740"
# The region of these tests: 20 x 20 cells of 2 km, about 55.0-55.4 E, 23.1-23.5 S.
REGION = TargetGrid.from_bounds(UTM40S, 2000, (300000, 7400000, 340000, 7440000))
REGION_TRANSFORM = REGION.transform
MONTHS = np.arange(1, 13)


def spec(path, **kw) -> LayerSpec:
    return LayerSpec.model_validate({"path": str(path), **kw})


def tif(path, bands, crs=UTM40S, transform=REGION_TRANSFORM, nodata=None, units=None, dtype="float32"):
    bands = np.asarray(bands)
    if bands.ndim == 2:
        bands = bands[None]
    with rasterio.open(path, "w", driver="GTiff", width=bands.shape[2], height=bands.shape[1], count=bands.shape[0],
                       dtype=dtype, crs=crs, transform=transform, nodata=nodata) as dst:
        dst.write(bands.astype(dtype))
        if units:
            dst.units = [units] * bands.shape[0]
    return path


def monthly(value_of_month, shape=REGION.shape) -> np.ndarray:
    """12 bands, band m filled with value_of_month(m)."""
    return np.stack([np.full(shape, value_of_month(m), dtype="float64") for m in MONTHS])


def lonlat(path, name, values, units, *, ascending_lat=False, time=None, calendar="standard", attrs=None,
           lon0=54.9, lat0=-22.9, res=0.02, engine=None):
    """A CF NetCDF (or Zarr) on a lon/lat grid without grid mapping, north edge lat0, west edge lon0."""
    *lead, height, width = values.shape
    lat = lat0 - res * (np.arange(height) + 0.5)
    lon = lon0 + res * (np.arange(width) + 0.5)
    data = values
    if ascending_lat:
        lat, data = lat[::-1], values[..., ::-1, :]
    coords = {"lat": ("lat", lat, {"standard_name": "latitude", "units": "degrees_north"}),
              "lon": ("lon", lon, {"standard_name": "longitude", "units": "degrees_east"})}
    dims = ("lat", "lon")
    if lead:
        dims = ("time", *dims)
        coords["time"] = time if time is not None else pd.date_range("2000-01-01", periods=lead[0], freq="MS") + pd.Timedelta(days=14)
    ds = xr.Dataset({name: (dims, data, {"units": units, **(attrs or {})})}, coords=coords)
    if "time" in ds.coords and calendar != "standard":
        ds["time"].encoding.update(calendar=calendar, units="days since 2000-01-01")
    if engine == "zarr":
        ds.to_zarr(path, mode="w")
    else:
        ds.to_netcdf(path)
    return path


# ============================================================================================ units


@pytest.mark.parametrize(
    "declared, canonical, value, expected, source",
    [
        ("K", "degC", 293.15, 20.0, "SI Brochure 2019 §2.3.1: t/°C = T/K - 273.15"),
        ("W m-2", "MJ m-2 d-1", 200.0, 200.0 * 86400 / 1e6, "SI: 1 W = 1 J s-1, 1 d = 86 400 s"),
        ("umol m-2 s-1", "mol m-2 d-1", 500.0, 500.0 * 1e-6 * 86400, "SI prefix µ = 1e-6, 1 d = 86 400 s"),
        ("percent", "1", 85.0, 0.85, "SI Brochure: % = 0.01"),
        ("%", "1", 85.0, 0.85, "SI Brochure: % = 0.01"),
        ("hPa", "kPa", 15.0, 1.5, "SI prefixes h = 1e2, k = 1e3"),
        ("C", "degC", 12.5, 12.5, "same unit under a common file spelling"),
        ("degrees C", "degC", 12.5, 12.5, "same unit under a common file spelling"),
        ("fraction", "1", 0.4, 0.4, "same unit"),
        ("km", "m", 1.2, 1200.0, "SI prefix k = 1e3"),
    ],
)
def test_linear_conversion_factors(declared, canonical, value, expected, source):
    scale, offset = linear_conversion(declared, canonical)
    assert scale * value + offset == pytest.approx(expected, rel=1e-12, abs=1e-12)


@pytest.mark.parametrize("declared, canonical", [("K", "MJ m-2 d-1"), ("MJ m-2 month-1", "MJ m-2 d-1"), ("blorps", "m")])
def test_unconvertible_or_unknown_units_are_refused(declared, canonical):
    # Kelvin is no energy flux; a per-month total has no fixed per-day equivalent (months are 28-31 days).
    with pytest.raises(ValueError):
        linear_conversion(declared, canonical)


def test_kelvin_geotiff_is_read_lazily_as_float32_celsius(tmp_path):
    values = 290.0 + monthly(lambda m: m)  # 291.15.. K-ish values, month m -> 290 + m K
    path = tif(tmp_path / "tmin.tif", values)
    layer = open_layer("tmin", spec(path, units="K"), chunk=8)
    assert isinstance(layer.data, dsa.Array) and layer.dtype == np.float32
    assert layer.dims == ("month", "y", "x") and list(layer.month.values) == list(MONTHS)
    assert layer.chunks == ((12,), (8, 8, 4), (8, 8, 4))
    assert layer.attrs["units"] == "degC" and layer.name == "tmin"
    # SI Brochure 2019 §2.3.1: t/°C = T/K - 273.15 (float32 storage: 1e-4 tolerance).
    np.testing.assert_allclose(layer.values[:, 0, 0], 290.0 + MONTHS - 273.15, atol=1e-4)


def test_shortwave_in_w_m2_from_month_pattern_becomes_mj_per_day(tmp_path):
    for m in MONTHS:
        tif(tmp_path / f"sw_{m:02d}.tif", np.full(REGION.shape, 100.0 + 10 * m), units="W m-2")
    layer = open_layer("shortwave", spec(tmp_path / "sw_{month:02d}.tif"))  # units from the files
    # SI: 1 W m-2 = 86 400 J m-2 d-1 = 0.0864 MJ m-2 d-1.
    np.testing.assert_allclose(layer.values[:, 5, 5], (100.0 + 10 * MONTHS) * 0.0864, rtol=1e-6)
    assert layer.attrs["declared_units"] == "W m-2"


def test_photon_flux_radiation_is_returned_as_par(tmp_path):
    path = tif(tmp_path / "rad.tif", monthly(lambda m: 400.0 + m))
    layer = open_layer("shortwave", spec(path, units="µmol m-2 s-1"))
    assert layer.name == "par" and layer.attrs["units"] == "mol m-2 d-1"
    # SI: 1 µmol m-2 s-1 = 1e-6 * 86 400 mol m-2 d-1 = 0.0864 mol m-2 d-1.
    np.testing.assert_allclose(layer.values[:, 0, 0], (400.0 + MONTHS) * 0.0864, rtol=1e-6)


def test_par_in_energy_units_is_refused(tmp_path):
    path = tif(tmp_path / "par.tif", monthly(lambda m: 100.0))
    with pytest.raises(InputDataError, match="photon flux"):
        open_layer("par", spec(path, units="W m-2"))


def test_water_stress_percent_becomes_water_availability_fraction(tmp_path):
    path = tif(tmp_path / "stress.tif", monthly(lambda m: 5.0 * m))
    layer = open_layer("water_stress", spec(path, units="percent"))
    # variables.py: stress 0 = unstressed .. 1 = no water, availability the reverse; % = 0.01 (SI).
    assert layer.name == "water_availability" and layer.attrs["units"] == "1"
    np.testing.assert_allclose(layer.values[:, 3, 3], 1.0 - 0.05 * MONTHS, rtol=1e-6)


def test_units_come_from_the_file_and_missing_units_are_an_error(tmp_path):
    with_units = tif(tmp_path / "vpd.tif", monthly(lambda m: 10.0), units="hPa")
    np.testing.assert_allclose(open_layer("vpd", spec(with_units)).values, 1.0)  # SI: 10 hPa = 1 kPa
    without = tif(tmp_path / "vpd_bare.tif", monthly(lambda m: 1.0))
    with pytest.raises(InputDataError, match="no units") as info:
        open_layer("vpd", spec(without))
    assert str(without) in str(info.value) and "'vpd'" in str(info.value)


def test_declared_units_override_the_files(tmp_path):
    path = tif(tmp_path / "hum.tif", monthly(lambda m: 0.5), units="percent")  # the file's attribute is wrong
    np.testing.assert_allclose(open_layer("humidity", spec(path, units="1")).values, 0.5)


# ============================================================================================ plausibility


@pytest.mark.parametrize(
    "layer, values, declared, suggestion",
    [
        ("tmax", 295.0, "degC", "declare units: K"),       # 295 °C is no air temperature; 295 K is 21.85 °C
        ("tmin", 12.0, "K", "declare units: degC"),        # 12 K is no air temperature
        ("shortwave", 220.0, "MJ m-2 d-1", "W m-2"),       # > 50 MJ m-2 d-1 exceeds surface daily means
        ("water_availability", 80.0, "1", "percent"),      # a fraction of 80
        ("humidity", 65.0, "fraction", "percent"),
    ],
)
def test_implausible_declared_units_are_refused_with_a_suggestion(tmp_path, layer, values, declared, suggestion):
    # Plausibility bounds: common practice, no source (air temperature -60..60 °C; top-of-atmosphere
    # daily radiation stays below about 45 MJ m-2 d-1, FAO-56 Table 2.6 from memory).
    path = tif(tmp_path / f"{layer}.tif", monthly(lambda m: values))
    with pytest.raises(InputDataError, match=suggestion) as info:
        open_layer(layer, spec(path, units=declared))
    assert str(path) in str(info.value)


def test_values_outside_the_valid_range_become_nan_not_clamped(tmp_path):
    values = monthly(lambda m: 20.0)
    values[0, 2, 3] = 75.0    # above the glossary's 60 °C
    values[5, 4, 4] = -80.0   # below -60 °C
    layer = open_layer("tmax", spec(tif(tmp_path / "t.tif", values), units="degC")).values
    assert np.isnan(layer[0, 2, 3]) and np.isnan(layer[5, 4, 4])
    assert np.isfinite(layer).sum() == values.size - 2
    assert np.all(layer[np.isfinite(layer)] == 20.0)


# ============================================================================================ GeoTIFF


def test_twelve_band_geotiff_bands_are_months_in_order(tmp_path):
    path = tif(tmp_path / "w.tif", monthly(lambda m: m / 100.0))
    layer = open_layer("water_availability", spec(path, units="1"))
    np.testing.assert_allclose(layer.values[:, 0, 0], MONTHS / 100.0, rtol=1e-6)


def test_static_layer_band_selection_and_band_count_errors(tmp_path):
    path = tif(tmp_path / "terrain.tif", np.stack([np.full(REGION.shape, 100.0), np.full(REGION.shape, 2.5)]))
    assert open_layer("lai", spec(path, band=2, units="m2 m-2")).values[0, 0] == 2.5
    assert open_layer("elevation", spec(path, band=1, units="m")).dims == ("y", "x")
    with pytest.raises(InputDataError, match="expected 1 band"):
        open_layer("elevation", spec(path, units="m"))
    with pytest.raises(InputDataError, match="has 2 band"):
        open_layer("elevation", spec(path, band=3, units="m"))
    with pytest.raises(InputDataError, match="expected 12 bands"):
        open_layer("tmin", spec(path, units="degC"))


def test_file_nodata_is_masked_and_a_config_nodata_replaces_it(tmp_path):
    values = np.full(REGION.shape, 100.0)
    values[3:6, 3:6] = 0.0      # sea level, a valid elevation
    values[0, 0] = -9999.0      # the real nodata
    path = tif(tmp_path / "dem.tif", values, nodata=0.0)  # the file wrongly calls 0 nodata
    as_filed = open_layer("elevation", spec(path, units="m")).values
    assert np.isnan(as_filed[3:6, 3:6]).all()            # the file's nodata is masked
    assert np.isnan(as_filed[0, 0])                      # -9999 m is outside the glossary's -500..9000 m
    overridden = open_layer("elevation", spec(path, units="m", nodata=-9999)).values
    assert np.all(overridden[3:6, 3:6] == 0.0) and np.isnan(overridden[0, 0])
    assert np.isfinite(overridden).sum() == values.size - 1


def test_integer_geotiff_is_returned_as_float32(tmp_path):
    path = tif(tmp_path / "dem16.tif", np.full(REGION.shape, 1234), dtype="int16", nodata=-32768)
    layer = open_layer("elevation", spec(path, units="m"))
    assert layer.dtype == np.float32 and layer.values[0, 0] == 1234.0


@pytest.mark.parametrize("kind", ["missing", "garbage", "truncated", "no_crs"])
def test_unusable_geotiffs_are_input_errors_naming_the_file(tmp_path, kind):
    path = tmp_path / "bad.tif"
    if kind == "garbage":
        path.write_bytes(np.random.default_rng(0).bytes(4000))
    elif kind == "truncated":
        tif(tmp_path / "good.tif", np.random.default_rng(0).random((12, 200, 200)))
        data = (tmp_path / "good.tif").read_bytes()
        path.write_bytes(data[: len(data) // 3])
    elif kind == "no_crs":
        with rasterio.open(path, "w", driver="GTiff", width=4, height=4, count=12, dtype="float32") as dst:
            dst.write(np.zeros((12, 4, 4), "float32"))
    with pytest.raises(InputDataError) as info:
        open_layer("tmin", spec(path, units="degC"))
    assert str(path) in str(info.value)
    expected = {"missing": "does not exist", "garbage": "cannot open", "truncated": "truncated", "no_crs": "no CRS"}[kind]
    assert expected in str(info.value)


def test_month_pattern_with_missing_months_names_them(tmp_path):
    for m in MONTHS:
        if m not in (3, 11):
            tif(tmp_path / f"t_{m}.tif", np.full(REGION.shape, 20.0))
    with pytest.raises(InputDataError, match=r"month\(s\) 3 \(t_3.tif\), 11 \(t_11.tif\)"):
        open_layer("tmax", spec(tmp_path / "t_{month}.tif", units="degC"))


def test_month_pattern_files_on_different_grids_are_refused(tmp_path):
    for m in MONTHS:
        transform = REGION_TRANSFORM if m != 6 else REGION_TRANSFORM @ Affine.translation(1, 0)
        tif(tmp_path / f"t_{m:02d}.tif", np.full(REGION.shape, 20.0), transform=transform)
    with pytest.raises(InputDataError, match="t_06.tif: month 6"):
        open_layer("tmax", spec(tmp_path / "t_{month:02d}.tif", units="degC"))


def test_all_nodata_layer_is_an_error(tmp_path):
    path = tif(tmp_path / "empty.tif", monthly(lambda m: -9999.0), nodata=-9999.0)
    with pytest.raises(InputDataError, match="every cell is nodata"):
        open_layer("tmin", spec(path, units="degC"))


# ============================================================================================ NetCDF / Zarr


def _lonlat_ramp(months=12, height=40, width=40):
    """Month m, row i, column j -> 280 + m + 0.01 i + 0.001 j (kelvin), a field whose origin is easy to see."""
    m = np.arange(1, months + 1)[:, None, None]
    i = np.arange(height)[None, :, None]
    j = np.arange(width)[None, None, :]
    return (280.0 + m + 0.01 * i + 0.001 * j).astype("float32")


def test_netcdf_lat_lon_without_grid_mapping_is_wgs84_and_months_come_from_time(tmp_path):
    path = lonlat(tmp_path / "t.nc", "tas", _lonlat_ramp(), "K")
    layer = open_layer("tmean", spec(path, variable="tas"))
    assert layer.rio.crs.to_epsg() == 4326  # CF lat/lon without grid_mapping: taken as WGS 84 (documented)
    assert list(layer.month.values) == list(MONTHS)
    assert layer.y.values[0] > layer.y.values[-1]  # north-up
    np.testing.assert_allclose(layer.values[:, 0, 0], 280.0 + MONTHS - 273.15, atol=1e-4)  # SI K -> °C


def test_ascending_and_descending_latitude_give_the_same_layer(tmp_path):
    values = _lonlat_ramp()
    down = open_layer("tmean", spec(lonlat(tmp_path / "d.nc", "t", values, "K"), variable="t"))
    up = open_layer("tmean", spec(lonlat(tmp_path / "u.nc", "t", values, "K", ascending_lat=True), variable="t"))
    np.testing.assert_array_equal(up.values, down.values)
    np.testing.assert_array_equal(up.y.values, down.y.values)
    grid_down = load_climate({"tmean": spec(tmp_path / "d.nc", variable="t")}, REGION)["tmean"].values
    grid_up = load_climate({"tmean": spec(tmp_path / "u.nc", variable="t")}, REGION)["tmean"].values
    np.testing.assert_array_equal(grid_up, grid_down)


@pytest.mark.parametrize("calendar", ["noleap", "360_day"])
def test_non_standard_calendars_and_time_order(tmp_path, calendar):
    import cftime

    cls = {"noleap": cftime.DatetimeNoLeap, "360_day": cftime.Datetime360Day}[calendar]
    order = [7, 8, 9, 10, 11, 12, 1, 2, 3, 4, 5, 6]  # a July-to-June climatology (CF-1.10 §4.4.1 calendars)
    time = [cls(2000 + (m < 7), m, 15) for m in order]
    values = np.stack([np.full((40, 40), 273.15 + m, "float32") for m in order])
    path = lonlat(tmp_path / "t.nc", "tmin", values, "K", time=xr.DataArray(time, dims="time"), calendar=calendar)
    layer = open_layer("tmin", spec(path, variable="tmin"))
    np.testing.assert_allclose(layer.values[:, 0, 0], MONTHS, atol=1e-4)  # month m holds m °C, sorted


def test_integer_months_since_time_axis_is_read_as_calendar_months(tmp_path):
    # CF-1.10 §4.4 allows "months since" units; xarray cannot decode them in the standard calendar, so the
    # reader counts whole calendar months from the reference date (a documented decision).
    order = [7, 8, 9, 10, 11, 12, 1, 2, 3, 4, 5, 6]
    values = np.stack([np.full((40, 40), 273.15 + m, "float32") for m in order])
    time = xr.DataArray(np.arange(12), dims="time", attrs={"units": "months since 1999-07-01", "calendar": "standard"})
    lat = -22.9 - 0.02 * (np.arange(40) + 0.5)
    lon = 54.9 + 0.02 * (np.arange(40) + 0.5)
    ds = xr.Dataset({"tmin": (("time", "lat", "lon"), values, {"units": "K"})}, coords={"time": time, "lat": lat, "lon": lon})
    ds.to_netcdf(tmp_path / "t.nc")
    layer = open_layer("tmin", spec(tmp_path / "t.nc", variable="tmin"))
    np.testing.assert_allclose(layer.values[:, 0, 0], MONTHS, atol=1e-4)


def test_plain_month_dimension_is_accepted(tmp_path):
    lat = -22.9 - 0.02 * (np.arange(40) + 0.5)
    lon = 54.9 + 0.02 * (np.arange(40) + 0.5)
    values = np.stack([np.full((40, 40), 0.05 * m, "float32") for m in MONTHS])
    ds = xr.Dataset({"wa": (("month", "lat", "lon"), values, {"units": "1"})},
                    coords={"month": MONTHS, "lat": lat, "lon": lon})
    ds.to_netcdf(tmp_path / "wa.nc")
    layer = open_layer("water_availability", spec(tmp_path / "wa.nc"))  # single variable: name optional
    np.testing.assert_allclose(layer.values[:, 1, 1], 0.05 * MONTHS, rtol=1e-6)


def test_zarr_store_with_a_time_axis(tmp_path):
    path = lonlat(tmp_path / "t.zarr", "tmax", _lonlat_ramp(), "K", engine="zarr")
    layer = open_layer("tmax", spec(path, variable="tmax"))
    np.testing.assert_allclose(layer.values[:, 0, 0], 280.0 + MONTHS - 273.15, atol=1e-4)
    assert len(layer_files(spec(path))) > 1  # every file of the store (for checksums)


def test_size_one_extra_dimension_is_dropped_and_larger_is_refused(tmp_path):
    values = _lonlat_ramp()[:, None]  # (time, height, lat, lon)
    lat = -22.9 - 0.02 * (np.arange(40) + 0.5)
    lon = 54.9 + 0.02 * (np.arange(40) + 0.5)
    time = pd.date_range("2000-01-01", periods=12, freq="MS") + pd.Timedelta(days=14)
    ds = xr.Dataset({"tas": (("time", "height", "lat", "lon"), values, {"units": "K"})},
                    coords={"time": time, "height": [2.0], "lat": lat, "lon": lon})
    ds.to_netcdf(tmp_path / "h.nc")
    assert open_layer("tmean", spec(tmp_path / "h.nc", variable="tas")).dims == ("month", "y", "x")
    xr.concat([ds, ds.assign_coords(height=[10.0])], "height").to_netcdf(tmp_path / "h2.nc")
    with pytest.raises(InputDataError, match="unexpected dimension 'height'"):
        open_layer("tmean", spec(tmp_path / "h2.nc", variable="tas"))


@pytest.mark.parametrize("steps, months, expected", [
    (11, None, "11 steps; expected 12"),
    (12, [1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11, 11], "missing [12]"),
])
def test_time_axis_must_hold_each_month_once(tmp_path, steps, months, expected):
    values = _lonlat_ramp(months=steps)
    time = None
    if months is not None:
        time = pd.to_datetime([f"2000-{m:02d}-15" if i < 11 else f"2001-{m:02d}-15" for i, m in enumerate(months)])
    path = lonlat(tmp_path / "t.nc", "tmin", values, "K", time=time)
    with pytest.raises(InputDataError, match=expected.replace("[", r"\[").replace("]", r"\]")) as info:
        open_layer("tmin", spec(path, variable="tmin"))
    assert str(path) in str(info.value)


def test_static_netcdf_with_one_time_step(tmp_path):
    path = lonlat(tmp_path / "dem.nc", "z", np.full((1, 40, 40), 350.0, "float32"), "m")
    layer = open_layer("elevation", spec(path, variable="z"))
    assert layer.dims == ("y", "x") and float(layer[0, 0]) == 350.0


def test_missing_variable_lists_the_variables_of_the_file(tmp_path):
    ds = xr.Dataset({"tasmin": (("lat", "lon"), np.zeros((3, 3))), "tasmax": (("lat", "lon"), np.zeros((3, 3)))},
                    coords={"lat": [-23.0, -23.1, -23.2], "lon": [55.0, 55.1, 55.2]})
    ds.to_netcdf(tmp_path / "t.nc")
    with pytest.raises(InputDataError, match="no variable 'tmin'; the file has tasmin, tasmax"):
        open_layer("tmin", spec(tmp_path / "t.nc", variable="tmin", units="K"))
    with pytest.raises(InputDataError, match="name the variable"):
        open_layer("tmin", spec(tmp_path / "t.nc", units="K"))


def test_projected_netcdf_without_grid_mapping_is_an_error(tmp_path):
    ds = xr.Dataset({"z": (("y", "x"), np.zeros((4, 4)), {"units": "m"})},
                    coords={"y": 7440000 - 1000 * np.arange(4), "x": 300000 + 1000 * np.arange(4)})
    ds.to_netcdf(tmp_path / "z.nc")
    with pytest.raises(InputDataError, match="no CRS"):
        open_layer("elevation", spec(tmp_path / "z.nc", variable="z"))


def test_projected_netcdf_in_km_gets_metre_coordinates(tmp_path):
    # ECOSYSTEM.md trap: x/y in km read as metres give 1 m cells. CF-1.10 §4: coordinate `units` apply.
    x_m, y_m = REGION.x, REGION.y
    values = np.arange(REGION.height * REGION.width, dtype="float32").reshape(REGION.shape)
    ds = xr.Dataset({"z": (("y", "x"), values, {"units": "m"})},
                    coords={"y": ("y", y_m / 1000, {"units": "km"}), "x": ("x", x_m / 1000, {"units": "km"})})
    ds = ds.rio.write_crs(UTM40S)
    ds.to_netcdf(tmp_path / "z_km.nc")
    layer = open_layer("elevation", spec(tmp_path / "z_km.nc", variable="z"))
    np.testing.assert_allclose(layer.x.values, x_m)
    np.testing.assert_allclose(layer.y.values, y_m)
    aligned = load_climate({"elevation": spec(tmp_path / "z_km.nc", variable="z")}, REGION)["elevation"]
    np.testing.assert_array_equal(aligned.values, values)  # same grid once in metres


def test_longitudes_0_to_360_are_handled(tmp_path):
    # A global 1-degree field in 0..360 longitudes whose value is the longitude in -180..180 (CF-1.10 §4.2).
    lon = np.arange(0.5, 360, 1.0)
    lat = np.arange(89.5, -90, -1.0)
    values = np.broadcast_to(((lon + 180) % 360 - 180).astype("float32"), (lat.size, lon.size))
    ds = xr.Dataset({"z": (("lat", "lon"), values, {"units": "m"})}, coords={"lat": lat, "lon": lon})
    ds.to_netcdf(tmp_path / "g.nc")
    grid = TargetGrid.from_bounds("EPSG:4326", 1.0, (-60, -30, -50, -20))  # west of Greenwich
    aligned = load_climate({"elevation": spec(tmp_path / "g.nc", variable="z", resampling="nearest")}, grid)["elevation"]
    np.testing.assert_allclose(aligned.values[0], np.arange(-59.5, -50, 1.0))


@pytest.mark.parametrize("kind", ["garbage", "truncated"])
def test_unreadable_netcdf_is_an_input_error(tmp_path, kind):
    path = tmp_path / "t.nc"
    if kind == "garbage":
        path.write_bytes(b"CDF\x01" + np.random.default_rng(1).bytes(500))
    else:
        lonlat(tmp_path / "good.nc", "tmin", _lonlat_ramp(), "K")
        data = (tmp_path / "good.nc").read_bytes()
        path.write_bytes(data[: len(data) // 2])
    with pytest.raises(InputDataError) as info:
        open_layer("tmin", spec(path, variable="tmin"))
    assert str(path) in str(info.value)


# ============================================================================================ the climate


def _climate_files(tmp_path):
    """A complete invented climate: lon/lat NetCDF temperature, UTM GeoTIFF radiation and water."""
    lonlat(tmp_path / "temperature.nc", "tmin", _lonlat_ramp(), "K")
    with xr.open_dataset(tmp_path / "temperature.nc") as ds:
        both = ds.load().assign(tmax=ds["tmin"] + 8.0)
    both["tmax"].attrs["units"] = "K"
    both.to_netcdf(tmp_path / "temperature2.nc")
    tif(tmp_path / "sw.tif", monthly(lambda m: 200.0 + m), units="W m-2")
    tif(tmp_path / "water.tif", monthly(lambda m: 50.0 + m), units="percent")
    return {
        "tmin": spec(tmp_path / "temperature2.nc", variable="tmin"),
        "tmax": spec(tmp_path / "temperature2.nc", variable="tmax"),
        "shortwave": spec(tmp_path / "sw.tif"),
        "water_stress": spec(tmp_path / "water.tif"),
    }


def test_load_climate_aligns_every_layer_on_the_grid(tmp_path):
    climate = load_climate(_climate_files(tmp_path), REGION, chunk=8)
    assert set(climate.data_vars) == {"tmin", "tmax", "shortwave", "water_availability"}
    for name, layer in climate.data_vars.items():
        assert layer.dims == ("month", "y", "x") and layer.dtype == np.float32, name
        assert layer.chunks == ((12,), (8, 8, 4), (8, 8, 4)), name
        assert isinstance(layer.data, dsa.Array), name
    np.testing.assert_array_equal(climate.x.values, REGION.x)  # exactly the grid's coordinates
    np.testing.assert_array_equal(climate.y.values, REGION.y)
    xr.align(climate, REGION.template(8), join="exact")
    values = climate.compute()
    # Same-grid GeoTIFFs pass through unchanged: W m-2 x 0.0864 (SI); 1 - percent/100 (glossary).
    np.testing.assert_allclose(values.shortwave.values[:, 0, 0], (200.0 + MONTHS) * 0.0864, rtol=1e-6)
    np.testing.assert_allclose(values.water_availability.values[:, 0, 0], 1 - (50.0 + MONTHS) / 100, rtol=1e-6)
    # Reprojected temperature keeps the monthly offsets of the ramp and tmax - tmin = 8 K = 8 °C.
    np.testing.assert_allclose((values.tmax - values.tmin).values, 8.0, atol=1e-4)
    np.testing.assert_allclose(np.diff(values.tmin.values[:, 10, 10]), 1.0, atol=1e-4)


def test_partial_overlap_warns_with_the_share_and_leaves_nan(tmp_path):
    west_half = tif(tmp_path / "sw.tif", monthly(lambda m: 200.0)[:, :, :10], units="W m-2")  # 10 of 20 columns
    with pytest.warns(InputCoverageWarning, match=r"covers 50\.0% of the region"):
        climate = load_climate({"shortwave": spec(west_half)}, REGION)
    values = climate.shortwave.values
    assert np.isfinite(values[:, :, :10]).all() and np.isnan(values[:, :, 10:]).all()


def test_no_overlap_is_an_error(tmp_path):
    far = tif(tmp_path / "sw.tif", monthly(lambda m: 200.0), units="W m-2", transform=REGION_TRANSFORM @ Affine.translation(500, 0))
    with pytest.raises(InputDataError, match="does not overlap the region") as info:
        load_climate({"shortwave": spec(far)}, REGION)
    assert str(far) in str(info.value)


def test_full_overlap_gives_no_warning(tmp_path):
    with warnings.catch_warnings():
        warnings.simplefilter("error", InputCoverageWarning)
        load_climate({"shortwave": spec(tif(tmp_path / "sw.tif", monthly(lambda m: 200.0), units="W m-2"))}, REGION)


def test_two_layers_giving_the_same_quantity_are_refused(tmp_path):
    # variables.py: water_stress is returned as water_availability, so both cannot be given.
    both = {"water_availability": spec(tif(tmp_path / "a.tif", monthly(lambda m: 0.5)), units="1"),
            "water_stress": spec(tif(tmp_path / "s.tif", monthly(lambda m: 0.5)), units="1")}
    with pytest.raises(InputDataError, match="another layer already gives"):
        load_climate(both, REGION)


def test_region_mask(tmp_path):
    mask = np.ones(REGION.shape)
    mask[:5] = 0
    mask[-1, -1] = 255
    path = tif(tmp_path / "mask.tif", mask, dtype="uint8", nodata=255)
    region = type("Region", (), {"mask": path})()
    keep = load_mask(region, REGION).values
    assert keep.dtype == bool and not keep[:5].any() and not keep[-1, -1] and keep[5:-1].all()


# ============================================================================================ inspection


def test_inspect_inputs_reports_each_layer_and_collects_problems(tmp_path):
    files = _climate_files(tmp_path)
    bad = tif(tmp_path / "hot.tif", monthly(lambda m: 296.0))  # kelvin values
    config = {
        "region": {"name": "Kessarine Basin", "grid": {"crs": UTM40S, "resolution": 2000,
                                                         "bounds": list(REGION.bounds)}},
        "climate": {name: {k: (str(v) if k == "path" else v) for k, v in s.model_dump().items() if v is not None}
                    for name, s in files.items()},
        "scenarios": [{"name": "now", "co2_ppm": 420},
                      {"name": "hot", "co2_ppm": 420, "climate": {"tmax": {"path": str(bad), "units": "degC"}}}],
    }
    (tmp_path / "run.yaml").write_text(yaml.safe_dump(config))
    reports = inspect_inputs(load_config(tmp_path / "run.yaml"))
    by_key = {(r.scenario, r.layer): r for r in reports}
    assert set(by_key) == {(None, "tmin"), (None, "tmax"), (None, "shortwave"), (None, "water_stress"), ("hot", "tmax")}
    tmin = by_key[(None, "tmin")]
    assert (tmin.driver, tmin.crs, tmin.declared_units, tmin.canonical_units) == ("netCDF", "EPSG:4326", "K", "degC")
    assert tmin.native_resolution == pytest.approx((0.02, 0.02))
    assert tmin.overlap_share == pytest.approx(1.0) and tmin.nodata_share == 0.0 and not tmin.problems
    stress = by_key[(None, "water_stress")]
    assert stress.output_name == "water_availability" and stress.file_units == "percent"
    hot = by_key[("hot", "tmax")]
    assert hot.problems and "declare units: K" in hot.problems[0]


def test_inspect_inputs_counts_out_of_range_values(tmp_path):
    values = monthly(lambda m: 20.0)
    values[:, :2, :] = 99.0  # 2 of 20 rows hotter than the glossary's 60 °C
    tif(tmp_path / "t.tif", values, units="degC")
    for name in ("sw", "w"):
        tif(tmp_path / f"{name}.tif", monthly(lambda m: 0.5), units={"sw": "MJ m-2 d-1", "w": "1"}[name])
    (tmp_path / "run.yaml").write_text(yaml.safe_dump({
        "region": {"name": "Kessarine Basin", "grid": {"crs": UTM40S, "resolution": 2000, "bounds": list(REGION.bounds)}},
        "climate": {"tmean": {"path": "t.tif"}, "shortwave": {"path": "sw.tif"}, "water_availability": {"path": "w.tif"}},
        "scenarios": [{"name": "now", "co2_ppm": 420}],
    }))
    report = next(r for r in inspect_inputs(load_config(tmp_path / "run.yaml")) if r.layer == "tmean")
    assert report.out_of_range_share == pytest.approx(0.1)  # 2 / 20 rows
    assert any("outside -60..60" in w for w in report.warnings)
    assert not report.problems


def test_layer_files_expands_month_patterns(tmp_path):
    files = layer_files(spec(tmp_path / "sw_{month:02d}.tif"))
    assert [f.name for f in files] == [f"sw_{m:02d}.tif" for m in MONTHS]


def test_inspect_inputs_reports_the_region_mask(tmp_path):
    for name, units in (("t", "degC"), ("sw", "MJ m-2 d-1"), ("w", "1")):
        tif(tmp_path / f"{name}.tif", monthly(lambda m: 0.5), units=units)
    west = tif(tmp_path / "mask.tif", np.ones((REGION.height, 5)), dtype="uint8")  # 5 of 20 columns
    (tmp_path / "run.yaml").write_text(yaml.safe_dump({
        "region": {"name": "Kessarine Basin", "mask": "mask.tif",
                   "grid": {"crs": UTM40S, "resolution": 2000, "bounds": list(REGION.bounds)}},
        "climate": {"tmean": {"path": "t.tif"}, "shortwave": {"path": "sw.tif"}, "water_availability": {"path": "w.tif"}},
        "scenarios": [{"name": "now", "co2_ppm": 420}],
    }))
    report = next(r for r in inspect_inputs(load_config(tmp_path / "run.yaml")) if r.layer == "mask")
    assert report.path == str(west) and report.crs == UTM40S
    assert report.overlap_share == pytest.approx(0.25)  # 5 / 20 columns, derived here
