"""The committed demo data of the Kessarine Basin (an INVENTED region; all data fictional) are exactly what
demo_region/generate.py makes, open with the usual readers, carry the CRSs and grids documented in
demo_region/README.md, and honour the design the README states.

Sources named per check: the generator itself (regenerated into a temporary folder), demo_region/README.md
(documented grids and invented design targets), FAO-56 = Allen et al. (1998) FAO Irrigation and Drainage
Paper 56 (worked examples 8 and 9; eqs. 21-25, 34, 35, 36), the independent `pyet` library (FAO-56 Ra),
and ISO 2533:1975 (standard-atmosphere lapse rate 6.5 K/km).
"""

from __future__ import annotations

import importlib.util
import subprocess
import sys
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import pyogrio
import pytest
import rasterio
import shapely
import xarray as xr
from pyet.rad_utils import extraterrestrial_r
from pyproj import CRS, Transformer

ROOT = Path(__file__).resolve().parents[1]
DATA = ROOT / "demo_region" / "data"
SCRIPT = ROOT / "demo_region" / "generate.py"
TARGET_BOUNDS = (300_000.0, 7_300_000.0, 500_000.0, 7_460_000.0)  # configs/demo.yaml region.grid.bounds
SHORTWAVE = [f"shortwave_{m:02d}.tif" for m in range(1, 13)]
# One quantisation step of each stored layer. Regenerating on this machine gives identical bytes; another
# platform's libm may flip a rare rounding by one step, so at most 0.1 % of the cells may differ, by one step.
GEOTIFF_STEP = {"elevation.tif": 0.1, "water_availability.tif": 0.1, **{name: 0.01 for name in SHORTWAVE}}
ALL_FILES = [*GEOTIFF_STEP, "temperature.nc", "districts.gpkg"]


def assert_equal_but_rare_rounding(old, new, step):
    """Equal except at most 0.1 % of the finite cells, and those by at most one quantisation step."""
    old, new = np.asarray(old, float), np.asarray(new, float)
    np.testing.assert_array_equal(np.isnan(old), np.isnan(new))
    differs = np.abs(old - new) > step * 1e-3
    assert differs.sum() <= 1e-3 * np.isfinite(old).sum(), f"{differs.sum()} cells differ"
    np.testing.assert_allclose(old, new, rtol=0, atol=step * 1.001)


@pytest.fixture(scope="module")
def generator():
    spec = importlib.util.spec_from_file_location("kessarine_generate", SCRIPT)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


@pytest.fixture(scope="module")
def regenerated(tmp_path_factory) -> Path:
    """Run the script exactly as documented (`python demo_region/generate.py`), into a temporary folder."""
    out = tmp_path_factory.mktemp("kessarine")
    subprocess.run([sys.executable, str(SCRIPT), "--out", str(out)], check=True, capture_output=True)
    return out


def test_committed_files_exist_and_stay_under_5_mb():
    # Source: project brief for demo_region (every listed file committed, under 5 MB in total).
    sizes = {name: (DATA / name).stat().st_size for name in ALL_FILES}
    assert sum(sizes.values()) < 5 * 1024 * 1024, sizes


@pytest.mark.parametrize("name", list(GEOTIFF_STEP))
def test_geotiff_pixels_equal_regenerated(name, regenerated):
    # Source: the generator (derived here); values must match to one quantisation step, nodata exactly.
    with rasterio.open(DATA / name) as committed, rasterio.open(regenerated / name) as fresh:
        assert committed.crs == fresh.crs and committed.transform == fresh.transform
        assert committed.shape == fresh.shape and committed.count == fresh.count
        assert committed.nodata == fresh.nodata == -9999.0
        assert committed.descriptions == fresh.descriptions
        old, new = committed.read(masked=True), fresh.read(masked=True)
    np.testing.assert_array_equal(old.mask, new.mask)
    assert_equal_but_rare_rounding(old.filled(np.nan), new.filled(np.nan), GEOTIFF_STEP[name])


def test_temperature_equals_regenerated(regenerated):
    # Source: the generator (derived here); packed integers (step 1 = 0.01 K), fill value kept as a number.
    with xr.open_dataset(DATA / "temperature.nc", mask_and_scale=False) as old, \
            xr.open_dataset(regenerated / "temperature.nc", mask_and_scale=False) as new:
        for coord in ("lat", "lon", "time"):
            np.testing.assert_array_equal(old[coord].values, new[coord].values)
        for name in ("tmin", "tmax"):
            assert old[name].dtype == np.int16 and old[name].attrs == new[name].attrs
            assert_equal_but_rare_rounding(old[name].values, new[name].values, 1)
            assert (old[name].values == -32768).sum() == (new[name].values == -32768).sum() > 0


def test_districts_equal_regenerated(regenerated):
    # Source: the generator (derived here); vertices snapped to 1 m, so compare within 1 m.
    old, new = gpd.read_file(DATA / "districts.gpkg"), gpd.read_file(regenerated / "districts.gpkg")
    assert old[["district", "code"]].equals(new[["district", "code"]])
    assert all(a.equals_exact(b, tolerance=1.0) for a, b in zip(old.geometry, new.geometry))


def test_geotiff_crs_and_grids_as_documented():
    # Source: demo_region/README.md "Files" table.
    with rasterio.open(DATA / "elevation.tif") as dem:
        assert CRS.from_user_input(dem.crs).to_epsg() == 3857 and dem.res == (750.0, 750.0)
        assert dem.dtypes == ("float32",)
        covered = Transformer.from_crs("EPSG:32740", dem.crs, always_xy=True).transform_bounds(*TARGET_BOUNDS)
        assert dem.bounds.left < covered[0] and dem.bounds.bottom < covered[1]
        assert dem.bounds.right > covered[2] and dem.bounds.top > covered[3]
    for name in SHORTWAVE:
        with rasterio.open(DATA / name) as sw:
            assert sw.crs.to_epsg() == 32740 and sw.res == (2000.0, 2000.0) and sw.units == ("W m-2",)
            assert tuple(sw.bounds) == (298_000.0, 7_298_000.0, 502_000.0, 7_462_000.0)
    with rasterio.open(DATA / "water_availability.tif") as water:
        assert water.crs.to_epsg() == 32740 and water.res == (1000.0, 1000.0)
        assert tuple(water.bounds) == TARGET_BOUNDS and water.shape == (160, 200) and water.count == 12
        assert water.descriptions == tuple(f"month {m:02d}" for m in range(1, 13))
        assert water.units == ("percent",) * 12
    assert gpd.read_file(DATA / "districts.gpkg").crs.to_epsg() == 32740


def test_temperature_file_is_cf_latlon_packed_kelvin():
    # Source: demo_region/README.md (lat/lon without grid mapping, 0.01°, latitude descending, int16 packed
    # Kelvin, 12 mid-month CF times) and the CF conventions' packing rule value = packed * scale + offset.
    with xr.open_dataset(DATA / "temperature.nc") as ds:
        assert not any("grid_mapping" in ds[v].attrs or "grid_mapping" in ds[v].encoding for v in ds)
        assert ds.lat.attrs["units"] == "degrees_north" and ds.lon.attrs["units"] == "degrees_east"
        assert np.all(np.diff(ds.lat) < 0)
        np.testing.assert_allclose(np.diff(ds.lon), 0.01, atol=1e-9)
        assert list(ds.time.dt.month.values) == list(range(1, 13))
        assert list(ds.time.dt.day.values) == [16, 15, 16, 16, 16, 16, 16, 16, 16, 16, 16, 16]
        for name in ("tmin", "tmax"):
            assert ds[name].attrs["units"] == "K" and ds[name].encoding["dtype"] == np.int16
            assert ds[name].encoding["scale_factor"] == 0.01 and ds[name].encoding["add_offset"] == 273.15
            assert 260.0 < float(ds[name].min()) and float(ds[name].max()) < 315.0
        assert (ds.tmin.isnull() == ds.tmax.isnull()).all()
        assert ((ds.tmin < ds.tmax) | ds.tmin.isnull()).all()


@pytest.mark.parametrize("name", ALL_FILES)
def test_every_file_says_it_is_fictional(name):
    # Source: project rule that all demo data state they are invented (README "Fictional").
    path = DATA / name
    if name.endswith(".tif"):
        with rasterio.open(path) as src:
            note = src.tags()["note"]
    elif name.endswith(".nc"):
        with xr.open_dataset(path) as ds:
            note = ds.attrs["note"]
            assert "fictional" in ds.tmin.attrs["note"]
    else:
        note = pyogrio.read_info(path, layer="districts")["layer_metadata"]["note"]
    assert "fictional" in note and "Kessarine" in note


def test_lake_is_nodata_in_every_layer_that_masks_it():
    # Source: demo_region/README.md (a lake of nodata near 401 km E, 7384 km N, in every band).
    lake_x, lake_y = 401_000.0, 7_384_000.0
    with rasterio.open(DATA / "water_availability.tif") as water:
        bands = water.read(masked=True)
        row, col = water.index(lake_x, lake_y)
    assert np.all(bands.mask == bands.mask[0]) and 30 < bands.mask[0].sum() < 100
    assert bands.mask[:, row, col].all()
    with rasterio.open(DATA / "elevation.tif") as dem:
        x, y = Transformer.from_crs("EPSG:32740", dem.crs, always_xy=True).transform(lake_x, lake_y)
        assert dem.read(1, masked=True).mask[dem.index(x, y)]
    with xr.open_dataset(DATA / "temperature.nc") as ds:
        lon, lat = Transformer.from_crs("EPSG:32740", "EPSG:4326", always_xy=True).transform(lake_x, lake_y)
        assert ds.tmax.sel(lat=lat, lon=lon, method="nearest").isnull().all()
        assert ds.tmax.isnull().sum(("lat", "lon")).min() > 20


def test_fao56_radiation_worked_examples(generator):
    # Source: Allen et al. (1998) FAO-56, Example 8: 20° S on 3 September (J = 246), Ra = 32.2 MJ m-2 d-1;
    # Example 9: same day and latitude, N = 11.7 h.
    assert generator.extraterrestrial_radiation_mj(-20.0, 246) == pytest.approx(32.2, abs=0.05)
    assert generator.daylight_hours(-20.0, 246) == pytest.approx(11.7, abs=0.05)


def test_radiation_agrees_with_pyet_over_a_year(generator):
    # Source: independent library pyet (extraterrestrial_r, FAO-56 eq. 21) at the basin's latitudes.
    days = pd.date_range("2001-01-01", "2001-12-31", freq="D")
    for latitude in (-22.9, -23.7, -24.5):
        expected = extraterrestrial_r(days, np.deg2rad(latitude)).to_numpy()
        ours = generator.extraterrestrial_radiation_mj(latitude, days.dayofyear.to_numpy())
        np.testing.assert_allclose(ours, expected, rtol=1e-6)


def test_shortwave_lies_between_overcast_and_clear_sky(generator):
    # Source: FAO-56 eq. 35 with as = 0.25, bs = 0.50 bounds Rs between as·Ra (n = 0) and the clear-sky
    # Rso = (as + bs) Ra (eq. 36); Ra from pyet, averaged over the days of each month.
    with rasterio.open(DATA / "shortwave_01.tif") as src:
        cols, rows = np.meshgrid(np.arange(src.width), np.arange(src.height))
        x, y = rasterio.transform.xy(src.transform, rows, cols)
    _, latitude = Transformer.from_crs("EPSG:32740", "EPSG:4326", always_xy=True).transform(x, y)
    latitude = np.asarray(latitude).reshape(rows.shape)
    days = pd.date_range("2001-01-01", "2001-12-31", freq="D")
    # Ra is smooth in latitude: tabulate it every ~0.01° across the basin and interpolate per cell.
    table_latitudes = np.linspace(latitude.min() - 0.01, latitude.max() + 0.01, 200)
    daily = np.stack([extraterrestrial_r(days, np.deg2rad(lat)).to_numpy() for lat in table_latitudes], 1)
    for month, name in enumerate(SHORTWAVE, start=1):
        monthly_ra = daily[days.month == month].mean(axis=0) * 1e6 / 86400.0  # MJ m-2 d-1 -> W m-2
        ra = np.interp(latitude, table_latitudes, monthly_ra)
        with rasterio.open(DATA / name) as src:
            rs = src.read(1)
        assert np.all(rs >= 0.25 * ra - 0.01) and np.all(rs <= 0.75 * ra + 0.01), name
        # invented cloud: the design keeps n/N between 0.2 and 0.8 everywhere (README), not at the bounds
        assert np.all(rs > 0.35 * ra) and np.all(rs < 0.65 * ra), name


def test_temperature_follows_standard_lapse_rate(generator):
    # Source: ISO 2533:1975 standard atmosphere, -6.5 K per km, which the README says the data follow.
    with xr.open_dataset(DATA / "temperature.nc") as ds:
        lon, lat = np.meshgrid(ds.lon.values, ds.lat.values)
        x, y = Transformer.from_crs("EPSG:4326", "EPSG:32740", always_xy=True).transform(lon, lat)
        z = generator.elevation_m(x, y)
        for month in (0, 6):
            tmax = ds.tmax[month].values
            valid = np.isfinite(tmax)
            slope = np.polyfit(z[valid], tmax[valid], 1)[0]
            assert slope * 1000 == pytest.approx(-6.5, abs=0.01)


def test_temperature_design_targets():
    # Source: demo_region/README.md design targets (invented; a subtropical southern-hemisphere climate,
    # common practice, no source): January warmer than July everywhere; lowland (< 300 m) Tmax 31-34 °C
    # in January and 22.5-25.5 °C in July; highland (2500-3000 m) July Tmin between -1.5 and 3 °C.
    with rasterio.open(DATA / "elevation.tif") as dem, xr.open_dataset(DATA / "temperature.nc") as ds:
        lon, lat = np.meshgrid(ds.lon.values, ds.lat.values)
        x, y = Transformer.from_crs("EPSG:4326", dem.crs, always_xy=True).transform(lon, lat)
        z = np.array(list(dem.sample(zip(x.ravel(), y.ravel()), masked=True))).reshape(x.shape)
        t = ds[["tmin", "tmax"]] - 273.15
        assert np.nanmin(t.tmax[0].values - t.tmax[6].values) > 0  # NaN only over the lake
        lowland, highland = (z > 0) & (z < 300), (z >= 2500) & (z <= 3000)
        assert lowland.sum() > 1000 and highland.sum() > 1000
        january, july = t.tmax[0].values, t.tmax[6].values
        assert 31 <= january[lowland].min() and january[lowland].max() <= 34
        assert 22.5 <= july[lowland].min() and july[lowland].max() <= 25.5
        tmin_july = t.tmin[6].values[highland]
        assert -1.5 <= tmin_july.min() and tmin_july.max() <= 3.0


def test_water_availability_seasons():
    # Source: demo_region/README.md design targets (invented): dry season Jun-Sep 30-60 %, wet season
    # Dec-Mar 85-100 %, and the low east drier than the low west in the dry season.
    with rasterio.open(DATA / "water_availability.tif") as src:
        water = src.read(masked=True)
        cols, rows = np.meshgrid(np.arange(src.width), np.arange(src.height))
        x, y = (np.asarray(v).reshape(rows.shape) for v in rasterio.transform.xy(src.transform, rows, cols))
    assert water.min() >= 0 and water.max() <= 100
    dry, wet = water[5:9].mean(axis=0), water[[11, 0, 1, 2]]
    assert water[5:9].min() >= 30 and water[5:9].max() <= 60 and wet.min() >= 85
    with rasterio.open(DATA / "elevation.tif") as dem:
        mx, my = Transformer.from_crs("EPSG:32740", dem.crs, always_xy=True).transform(x.ravel(), y.ravel())
        z = np.array([v[0] for v in dem.sample(zip(mx, my))]).reshape(x.shape)
    low = (z > 0) & (z < 600) & ~dry.mask
    west, east = dry[low & (x < 350_000)].mean(), dry[low & (x >= 400_000)].mean()
    assert low.sum() > 2000 and east < west - 2


def test_districts_tile_most_of_the_grid_with_one_partly_outside():
    # Source: demo_region/README.md: 8 invented districts, text `district`, integer `code` 1-8, covering
    # most of the grid, and only Cindrevale reaching beyond it.
    districts = gpd.read_file(DATA / "districts.gpkg")
    assert len(districts) == 8 and districts.district.is_unique
    assert list(districts.code) == list(range(1, 9)) and districts.code.dtype.kind == "i"
    assert districts.is_valid.all()
    grid = shapely.box(*TARGET_BOUNDS)
    inside_share = districts.intersection(grid).area / districts.area
    assert list(districts.district[inside_share < 0.999]) == ["Cindrevale"]
    assert 0.85 < inside_share[districts.district == "Cindrevale"].item() < 0.99
    assert districts.union_all().intersection(grid).area / grid.area > 0.9
    pairwise = sum(a.intersection(b).area for i, a in enumerate(districts.geometry)
                   for b in districts.geometry[i + 1:])
    assert pairwise < 1.0  # m²: districts do not overlap
