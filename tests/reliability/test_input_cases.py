"""Catalogue, input part: each bad input layer is refused by `suitability run` with exit code 3 before any
computing, with a message naming the file, the layer (and variable) and what was expected, no traceback,
and the output folder untouched; the cases that are not errors (partial overlap, scenario layers on
another grid or in other units) complete with a warning or the right conversion.

Checked against the project's contract for bad input (issue 6 catalogue; exit codes in suitability/cli.py).
Every bad file is a modified copy of the invented demo data (demo_region/README.md), made here.
"""

from __future__ import annotations

import shutil
from pathlib import Path

import numpy as np
import rasterio
import xarray as xr
from affine import Affine
from rasterio.warp import Resampling, calculate_default_transform, reproject

from .conftest import (
    DEMO_DATA,
    EXIT_INPUT,
    assert_clean_error,
    cli,
    demo_config,
    snapshot,
    write_config,
)

WATER = DEMO_DATA / "water_availability.tif"
TEMPERATURE = DEMO_DATA / "temperature.nc"


def _refused(tmp_path, output_folder, config, *needles):
    folder, before = output_folder
    path = write_config(tmp_path, config)
    output = assert_clean_error(cli("run", path, "--no-progress"), EXIT_INPUT, *needles)
    assert snapshot(folder) == before
    return output


def _copy_raster(source: Path, target: Path, *, transform=None, crs="keep", fill=None, units="keep") -> Path:
    """A copy of ``source`` with another transform, no CRS (crs=None), every cell ``fill``, or no units."""
    with rasterio.open(source) as src:
        profile = src.profile.copy()
        data = src.read()
        tags, band_units = src.tags(), src.units
    if transform is not None:
        profile["transform"] = transform
    if crs != "keep":
        profile["crs"] = crs
    if fill is not None:
        data[:] = fill
    with rasterio.open(target, "w", **profile) as dst:
        dst.write(data)
        if units == "keep":
            dst.update_tags(**tags)
            for band, unit in enumerate(band_units, start=1):
                dst.set_band_unit(band, unit)
        else:
            dst.update_tags(**{k: v for k, v in tags.items() if k != "units"})
    return target


def _shifted(transform: Affine, dx: float) -> Affine:
    return Affine(transform.a, transform.b, transform.c + dx, transform.d, transform.e, transform.f)


def _water_config(path: Path, **spec) -> dict:
    config = demo_config()
    config["climate"]["water_availability"] = {"path": str(path), "units": "percent", **spec}
    return config


# ------------------------------------------------------------------------------------------- files


def test_missing_file(tmp_path, output_folder):
    missing = tmp_path / "nowhere" / "elevation.tif"
    config = demo_config()
    config["climate"]["elevation"]["path"] = str(missing)
    _refused(tmp_path, output_folder, config, str(missing), "'elevation'", "does not exist")


def test_unreadable_geotiff(tmp_path, output_folder):
    bad = tmp_path / "water_availability.tif"
    bad.write_bytes(b"this is a spreadsheet export, not a raster\n" * 100)
    _refused(tmp_path, output_folder, _water_config(bad), str(bad), "'water_availability'", "expected a readable GeoTIFF")


def test_truncated_geotiff(tmp_path, output_folder):
    bad = tmp_path / "water_availability.tif"
    data = WATER.read_bytes()
    bad.write_bytes(data[: int(len(data) * 0.6)])  # a download or copy cut off at 60 %
    _refused(tmp_path, output_folder, _water_config(bad), str(bad), "'water_availability'", "truncated")


def test_truncated_netcdf(tmp_path, output_folder):
    bad = tmp_path / "temperature.nc"
    data = TEMPERATURE.read_bytes()
    bad.write_bytes(data[: int(len(data) * 0.6)])
    config = demo_config()
    config["climate"]["tmin"]["path"] = str(bad)
    _refused(tmp_path, output_folder, config, str(bad), "'tmin'", "unreadable or truncated file")


def test_geotiff_without_crs(tmp_path, output_folder):
    bad = _copy_raster(WATER, tmp_path / "water_no_crs.tif", crs=None)
    _refused(tmp_path, output_folder, _water_config(bad), str(bad), "'water_availability'", "no CRS",
             "expected a georeferenced GeoTIFF")


def test_netcdf_without_the_named_variable(tmp_path, output_folder):
    config = demo_config()
    config["climate"]["tmax"]["variable"] = "tasmax"
    _refused(tmp_path, output_folder, config, str(TEMPERATURE), "'tmax'", "no variable 'tasmax'",
             "the file has tmin, tmax")


def test_time_axis_with_11_months(tmp_path, output_folder):
    bad = tmp_path / "temperature_11.nc"
    with xr.open_dataset(TEMPERATURE) as ds:
        ds.isel(time=slice(0, 11)).to_netcdf(bad)
    config = demo_config()
    config["climate"]["tmax"]["path"] = str(bad)
    _refused(tmp_path, output_folder, config, str(bad), "'tmax'", "variable 'tmax'", "has 11 steps",
             "expected 12 (one per month)")


def test_months_that_differ_between_variables(tmp_path, output_folder):
    # tmin holds January..December; this tmax file holds January..November and January of the next
    # year (12 steps, so only the months themselves show the difference).
    bad = tmp_path / "tmax_shifted.nc"
    with xr.open_dataset(TEMPERATURE) as ds:
        tmax = ds[["tmax"]].load()
    times = tmax["time"].values.copy()
    times[11] = np.datetime64("2001-01-16T12:00:00")
    tmax.assign_coords(time=times).to_netcdf(bad)
    config = demo_config()
    config["climate"]["tmax"]["path"] = str(bad)
    _refused(tmp_path, output_folder, config, str(bad), "'tmax'", "expected each month 1..12 once",
             "(missing [12])", "(repeated [1])")


def test_month_pattern_with_months_missing(tmp_path, output_folder):
    for month in range(1, 13):
        if month not in (7, 11):
            shutil.copy(DEMO_DATA / f"shortwave_{month:02d}.tif", tmp_path / f"sw_{month:02d}.tif")
    pattern = tmp_path / "sw_{month:02d}.tif"
    config = demo_config()
    config["climate"]["shortwave"]["path"] = str(pattern)
    _refused(tmp_path, output_folder, config, str(pattern), "'shortwave'", "month(s) 7 (sw_07.tif), 11 (sw_11.tif)",
             "expected one file per month 1..12")


# ------------------------------------------------------------------------------------------- units


def test_undeclared_units(tmp_path, output_folder):
    bare = _copy_raster(WATER, tmp_path / "water_no_units.tif", units=None)
    config = demo_config()
    config["climate"]["water_availability"] = {"path": str(bare)}
    _refused(tmp_path, output_folder, config, str(bare), "'water_availability'", "no units", "declare them in the config")


def test_unknown_units(tmp_path, output_folder):
    config = demo_config()
    config["climate"]["elevation"]["units"] = "hands high"
    _refused(tmp_path, output_folder, config, "elevation.tif", "'elevation'", "units 'hands high' are not understood",
             "expected units convertible to m")


def test_kelvin_values_declared_as_celsius(tmp_path, output_folder):
    config = demo_config()
    config["climate"]["tmin"]["units"] = "degC"  # the demo file holds 250-310 K
    _refused(tmp_path, output_folder, config, str(TEMPERATURE), "'tmin'", "declared in °C", "look like kelvin",
             "declare units: K")


def test_watts_declared_as_daily_megajoules(tmp_path, output_folder):
    config = demo_config()
    config["climate"]["shortwave"]["units"] = "MJ m-2 d-1"  # the demo files hold W m-2 (about 150-330)
    _refused(tmp_path, output_folder, config, "shortwave_{month:02d}.tif", "'shortwave'", "declared as MJ m-2 d-1",
             "look like W m-2", "declare units: W m-2")


def test_percent_declared_as_a_fraction(tmp_path, output_folder):
    config = demo_config()
    config["climate"]["water_availability"]["units"] = "1"  # the demo file holds percent (0-100)
    _refused(tmp_path, output_folder, config, str(WATER), "'water_availability'", "declared as a fraction",
             "look like percent", "declare units: percent")


# ------------------------------------------------------------------------------------------- values and extent


def test_all_nodata_input(tmp_path, output_folder):
    empty = _copy_raster(WATER, tmp_path / "water_empty.tif", fill=-9999.0)
    _refused(tmp_path, output_folder, _water_config(empty), str(empty), "'water_availability'", "every cell is nodata",
             "expected some valid values")


def test_no_overlap_with_the_region(tmp_path, output_folder):
    with rasterio.open(WATER) as src:
        far = _shifted(src.transform, 1_000_000.0)  # 1000 km east of the region
    away = _copy_raster(WATER, tmp_path / "water_elsewhere.tif", transform=far)
    _refused(tmp_path, output_folder, _water_config(away), str(away), "'water_availability'",
             "does not overlap the region", "region bounds")


def test_partial_overlap_warns_with_the_share_and_leaves_nodata_outside(tmp_path):
    # The demo water file is exactly the region's grid (x 300-500 km); shifted 100 km east it covers
    # x 400-600 km, so half of the region by construction (derived here).
    with rasterio.open(WATER) as src:
        east = _shifted(src.transform, 100_000.0)
    half = _copy_raster(WATER, tmp_path / "water_half.tif", transform=east)
    config = _water_config(half)
    config["scenarios"] = config["scenarios"][:1]
    result = cli("run", write_config(tmp_path, config), "--no-progress")
    assert result.exit_code == 0, result.output
    flat = " ".join(result.output.split())
    assert f"warning: {half}: layer 'water_availability' covers 50.0% of the region; cells outside it are NaN" in flat
    assert "Traceback" not in result.output and "warnings.warn" not in result.output
    with rasterio.open(tmp_path / "out" / "baseline" / "pathway_class.tif") as src:
        classes = src.read(1)
    assert (classes[:, :100] == 255).all()  # columns 0-99 are x 300-400 km: outside the layer
    assert (classes[:, 101:] != 255).mean() > 0.9  # inside, only the demo lake is nodata


# ------------------------------------------------------------------------------------------- scenario layers


def _scenario_with_own_layer(layer: str, spec: dict) -> dict:
    config = demo_config(scenarios=1)
    config["scenarios"].append({"name": "own_layer", "co2_ppm": 420, "climate": {layer: spec}})
    return config


def _advantage_change(tmp_path) -> np.ndarray:
    with rasterio.open(tmp_path / "out" / "own_layer" / "advantage_change.tif") as src:
        return src.read(1)


def test_scenario_layer_on_another_grid_is_aligned_not_refused(tmp_path):
    # The baseline water layer reprojected to longitude/latitude (EPSG:4326, about 0.01°): the same values
    # on another grid, with the same CO2, must give nearly the same map (derived here: the only difference
    # is resampling at the cell scale).
    target = tmp_path / "water_lonlat.tif"
    with rasterio.open(WATER) as src:
        transform, width, height = calculate_default_transform(src.crs, "EPSG:4326", src.width, src.height, *src.bounds)
        profile = src.profile | {"crs": "EPSG:4326", "transform": transform, "width": width, "height": height}
        with rasterio.open(target, "w", **profile) as dst:
            for band in range(1, src.count + 1):
                reproject(rasterio.band(src, band), rasterio.band(dst, band), resampling=Resampling.bilinear)
                dst.set_band_unit(band, "percent")
    config = _scenario_with_own_layer("water_availability", {"path": str(target), "units": "percent"})
    result = cli("run", write_config(tmp_path, config), "--no-progress")
    assert result.exit_code == 0, result.output
    change = _advantage_change(tmp_path)
    valid = np.isfinite(change)
    assert valid.mean() > 0.9
    assert np.median(np.abs(change[valid])) < 0.01


def test_scenario_layer_in_other_units_is_converted(tmp_path):
    # tmax in °C instead of K (value - 273.15, CF/SI definition of the Celsius scale): after conversion the
    # scenario equals the baseline, so the advantage change is zero up to float32 rounding (derived here).
    target = tmp_path / "tmax_celsius.nc"
    with xr.open_dataset(TEMPERATURE) as ds:
        celsius = (ds["tmax"] - 273.15).astype("float32")
    celsius.attrs = {"units": "degC"}
    celsius.to_dataset(name="tmax_c").to_netcdf(target)
    config = _scenario_with_own_layer("tmax", {"path": str(target), "variable": "tmax_c", "units": "degC"})
    result = cli("run", write_config(tmp_path, config), "--no-progress")
    assert result.exit_code == 0, result.output
    change = _advantage_change(tmp_path)
    with rasterio.open(tmp_path / "out" / "baseline" / "pathway_advantage.tif") as src:
        baseline_valid = np.isfinite(src.read(1))
    np.testing.assert_array_equal(np.isfinite(change), baseline_valid)
    assert np.abs(change[baseline_valid]).max() < 1e-3
