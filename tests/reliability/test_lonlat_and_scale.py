"""Issue 13, class 4: inputs that are valid but were refused or silently misread. A global
longitude/latitude layer covers a projected region; a 0..360 file whose region crosses 180 degrees is
read as it is; GeoTIFF scale and offset are applied; what the reader did on reading appears in ``check``.

Checked against the GDAL data model (band value = stored value x scale + offset, GDAL raster data model
documentation) and the CF conventions (scale_factor / add_offset, CF 1.8 section 8.1). Values are derived
here from the files written. The demo region is invented (demo_region/README.md).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
import rasterio
import xarray as xr
from affine import Affine

from suitability.config import validate_section
from suitability.config.schema import LayerSpec
from suitability.grid import TargetGrid, align_to_grid
from suitability.inputs import inspect_inputs, open_layer
from suitability.inputs.checks import coverage_share
from suitability.inputs.readers import read_native

from .conftest import DEMO_DATA, cli, demo_config, write_config

WATER = DEMO_DATA / "water_availability.tif"


def _spec(path, **extra):
    return validate_section(LayerSpec, {"path": str(path), **extra}, "climate.layer")


def _global_elevation(path: Path, value: float = 350.0) -> Path:
    with rasterio.open(path, "w", driver="GTiff", width=720, height=360, count=1, dtype="float32",
                       crs="EPSG:4326", transform=Affine(0.5, 0, -180, 0, -0.5, 90)) as dst:
        dst.write(np.full((1, 360, 720), value, dtype="float32"))
        dst.set_band_unit(1, "m")
    return path


@pytest.mark.parametrize("crs, bounds, resolution", [
    ("EPSG:32740", (300000, 7300000, 500000, 7460000), 1000),      # the demo's UTM region
    ("EPSG:6933", (5_300_000, -3_100_000, 5_500_000, -2_900_000), 2000),  # equal-area (EASE-Grid 2.0)
    ("EPSG:3031", (-1e6, -1e6, 1e6, 1e6), 50_000),                 # polar, around the South Pole
])
def test_a_global_lonlat_layer_covers_a_projected_region(tmp_path, crs, bounds, resolution):
    layer = open_layer("elevation", _spec(_global_elevation(tmp_path / "g.tif"), units="m"))
    grid = TargetGrid.from_bounds(crs, resolution, bounds)
    assert coverage_share(layer, grid) == pytest.approx(1.0)


def test_a_global_lonlat_layer_runs_on_the_demo_region(tmp_path):
    config = demo_config(scenarios=1)
    config["climate"]["elevation"] = {"path": str(_global_elevation(tmp_path / "g.tif")), "units": "m"}
    result = cli("run", write_config(tmp_path, config), "--no-progress")
    assert result.exit_code == 0, result.output
    assert "does not overlap" not in result.output


def _int16_water(path: Path, scale: float, offset: float) -> tuple[Path, np.ndarray]:
    with rasterio.open(WATER) as src:
        profile, percent = src.profile, src.read().astype("float64")
    valid = percent != profile["nodata"]
    stored = np.where(valid, np.round((percent - offset) / scale), -32768).astype("int16")
    profile.update(dtype="int16", nodata=-32768)
    with rasterio.open(path, "w", **profile) as dst:
        dst.write(stored)
        dst.scales = [scale] * profile["count"]
        dst.offsets = [offset] * profile["count"]
        for band in range(1, profile["count"] + 1):
            dst.set_band_unit(band, "percent")
    expected = np.where(valid, stored * scale + offset, np.nan)  # GDAL: value = stored x scale + offset
    return path, expected


@pytest.mark.parametrize("scale, offset", [(0.01, 0.0), (0.005, 0.0), (0.01, 5.0)])
def test_geotiff_scale_and_offset_are_applied(tmp_path, scale, offset):
    path, expected_percent = _int16_water(tmp_path / "water_int16.tif", scale, offset)
    layer = open_layer("water_availability", _spec(path, units="percent"))
    values = layer.values
    np.testing.assert_allclose(values, expected_percent / 100.0, atol=1e-6, equal_nan=True)
    native = read_native("water_availability", _spec(path), path, True, 512)
    assert native.transformations == (f"applied the file's scale {scale:g} and offset {offset:g}",)


def test_check_lists_what_was_done_on_reading(tmp_path):
    path, _ = _int16_water(tmp_path / "water_int16.tif", 0.01, 0.0)
    config = demo_config(scenarios=1)
    config["climate"]["water_availability"] = {"path": str(path), "units": "percent"}
    result = cli("check", write_config(tmp_path, config))
    assert result.exit_code == 0, result.output
    flat = " ".join(result.output.split())
    assert "on reading: applied the file's scale 0.01 and offset 0" in flat
    reports = inspect_inputs(__import__("suitability.config", fromlist=["load_config"]).load_config(
        write_config(tmp_path, config)))
    water = next(r for r in reports if r.layer == "water_availability")
    assert not water.problems
    temperature = next(r for r in reports if r.layer == "tmin")  # the demo NetCDF stores latitudes north to south
    assert not any("flipped" in w for w in temperature.warnings)


def _lonlat_nc(path: Path, lon: np.ndarray, lat: np.ndarray, value_of_lon) -> Path:
    data = np.broadcast_to(value_of_lon(lon)[None, None, :], (12, lat.size, lon.size)).astype("float64")
    ds = xr.Dataset({"tmean": (("month", "lat", "lon"), data, {"units": "degC"})},
                    coords={"month": np.arange(1, 13), "lat": ("lat", lat, {"units": "degrees_north"}),
                            "lon": ("lon", lon, {"units": "degrees_east"})})
    ds.to_netcdf(path)
    return path


def test_a_0_360_file_crossing_180_is_read_and_aligned(tmp_path):
    lon = np.arange(160.25, 200.0, 0.5)   # 160..200 east: crosses 180
    lat = np.arange(-10.25, -30.0, -0.5)
    path = _lonlat_nc(tmp_path / "t.nc", lon, lat, lambda x: 10.0 + 0.1 * (x - 160.0))
    layer = open_layer("tmean", _spec(path, variable="tmean"))
    native = read_native("tmean", _spec(path, variable="tmean"), path, True, 512)
    assert not any("wrapped" in t for t in native.transformations)  # kept as 160..200
    grid = TargetGrid.from_bounds("EPSG:4326", 0.5, (170, -25, 190, -15))
    aligned = align_to_grid(layer, grid, "bilinear").isel(month=0).values
    assert not np.isnan(aligned).any()
    # Value at the cell centre 189.75 E: 10 + 0.1 x 29.75 = 12.975 (derived here from the ramp).
    assert aligned[0, -1] == pytest.approx(12.975, abs=1e-4)


def test_a_0_360_global_file_is_wrapped_and_says_so(tmp_path):
    lon = np.arange(0.25, 360.0, 0.5)
    lat = np.arange(89.75, -90.0, -0.5)
    path = _lonlat_nc(tmp_path / "g.nc", lon, lat, lambda x: np.where(x > 180, 1.0, 2.0))
    native = read_native("tmean", _spec(path, variable="tmean"), path, True, 512)
    assert "longitudes 0..360 wrapped to -180..180" in native.transformations
    x = native.data["x"].values
    assert x.min() == pytest.approx(-179.75) and x.max() == pytest.approx(179.75)
    np.testing.assert_allclose(np.diff(x), 0.5)
    # West of Greenwich the value of the 180..360 half (derived here from the file written).
    assert float(native.data.sel(x=-90.25, y=0.25, method="nearest").isel(month=0)) == 1.0


def _global_lon_ramp() -> xr.DataArray:
    lon = np.arange(-179.75, 180.0, 0.5)
    lat = np.arange(89.75, -90.0, -0.5)
    values = np.broadcast_to(lon[None, :], (lat.size, lon.size)).astype("float32")  # value = longitude
    return xr.DataArray(values, dims=("y", "x"), coords={"y": lat, "x": lon}, name="tmean").rio.write_crs("EPSG:4326")


@pytest.mark.parametrize("bounds", [(170, -25, 190, -15), (-190, -25, -170, -15)])
def test_a_lonlat_region_across_the_antimeridian_is_whole(bounds):
    grid = TargetGrid.from_bounds("EPSG:4326", 0.5, bounds)
    aligned = align_to_grid(_global_lon_ramp(), grid, "bilinear").values
    assert not np.isnan(aligned).any()
    # The cell centres 170.25 E and 170.25 W carry the layer's longitude there (derived here from the ramp).
    assert aligned[0, 0] == pytest.approx(170.25) and aligned[0, -1] == pytest.approx(-170.25)


def test_a_regional_0_360_layer_meets_a_region_given_in_negative_longitudes(tmp_path):
    lon = np.arange(160.25, 200.0, 0.5)
    lat = np.arange(-10.25, -30.0, -0.5)
    path = _lonlat_nc(tmp_path / "t.nc", lon, lat, lambda x: 10.0 + 0.1 * (x - 160.0))
    layer = open_layer("tmean", _spec(path, variable="tmean"))
    grid = TargetGrid.from_bounds("EPSG:4326", 0.5, (-190, -25, -170, -15))  # the same place as 170..190 E
    assert coverage_share(layer, grid) == pytest.approx(1.0)
    aligned = align_to_grid(layer, grid, "bilinear").isel(month=0).values
    assert not np.isnan(aligned).any()
    assert aligned[0, -1] == pytest.approx(12.975, abs=1e-4)  # 170.25 W = 189.75 E: 10 + 0.1 x 29.75
