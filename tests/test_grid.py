"""Target grid and alignment (suitability.grid), checked against independent libraries and definitions.

Oracles: rasterio (``transform.xy`` cell centres, ``warp.reproject`` of a whole raster), pyproj's ``Geod``
(geodesic polygon areas, Karney 2013, J Geod 87:43, a different algorithm from the zone formula used in the
code), the UTM definition (false northing 10 000 000 m on the southern-hemisphere equator, scale 0.9996 on
the central meridian; Snyder 1987, USGS Prof. Paper 1395, ch. 8), Archimedes' hat-box theorem for sphere
zones, and the US survey foot (1200/3937 m; NIST Handbook 44, Appendix C). Coordinates are those of the
invented Kessarine Basin (open ocean near 24° S 56° E).
"""

from __future__ import annotations

import math

import dask.array as dsa
import numpy as np
import pytest
import rasterio
import rasterio.transform
import xarray as xr
from affine import Affine
from pyproj import CRS, Geod
from rasterio.warp import Resampling, reproject

from suitability.config import load_config
from suitability.errors import InputDataError
from suitability.grid import TargetGrid, align_to_grid

UTM40S = "EPSG:32740"


def write_tif(path, data, crs, transform, nodata=None):
    data = np.asarray(data, dtype="float32")
    if data.ndim == 2:
        data = data[None]
    with rasterio.open(path, "w", driver="GTiff", width=data.shape[2], height=data.shape[1], count=data.shape[0],
                       dtype="float32", crs=crs, transform=transform, nodata=nodata) as dst:
        dst.write(data)
    return path


# ------------------------------------------------------------------------------------------ construction


def test_explicit_bounds_are_snapped_outward_to_whole_cells():
    # Derived here: floor/ceil of the bounds to multiples of the 1000 m resolution.
    grid = TargetGrid.from_bounds(UTM40S, 1000, (300000.4, 7299999.0, 499999.5, 7460000.2))
    assert grid.bounds == (300000.0, 7299000.0, 500000.0, 7461000.0)
    assert grid.shape == (162, 200)
    assert grid.transform == Affine(1000, 0, 300000, 0, -1000, 7461000)


def test_float_noise_in_degree_bounds_adds_no_extra_column():
    # In IEEE 754 doubles 0.3 / 0.1 = 2.9999999999999996 and 0.7 / 0.1 = 6.999999999999999; plain floor/ceil
    # would give an extra column. 0.3..0.7 at 0.1 degrees is 4 cells.
    assert 0.3 / 0.1 != 3 and 0.7 / 0.1 != 7
    grid = TargetGrid.from_bounds("EPSG:4326", 0.1, (0.3, -0.7, 0.7, -0.3))
    assert grid.shape == (4, 4)
    assert grid.bounds == pytest.approx((0.3, -0.7, 0.7, -0.3), abs=1e-12)


def test_cell_centres_match_rasterio():
    # Oracle: rasterio.transform.xy(offset="center").
    grid = TargetGrid.from_bounds(UTM40S, (1000, 2000), (300000, 7300000, 320000, 7340000))
    xs, _ = rasterio.transform.xy(grid.transform, np.zeros(grid.width, int), np.arange(grid.width), offset="center")
    _, ys = rasterio.transform.xy(grid.transform, np.arange(grid.height), np.zeros(grid.height, int), offset="center")
    np.testing.assert_allclose(grid.x, xs, rtol=0, atol=1e-9)
    np.testing.assert_allclose(grid.y, ys, rtol=0, atol=1e-9)
    assert np.all(np.diff(grid.y) < 0) and np.all(np.diff(grid.x) > 0)


def test_like_raster_gives_its_grid_and_south_up_becomes_north_up(tmp_path):
    transform = Affine(500, 0, 310000, 0, -500, 7420000)
    path = write_tif(tmp_path / "like.tif", np.zeros((6, 8)), UTM40S, transform)
    grid = TargetGrid.from_raster(path)
    with rasterio.open(path) as src:  # oracle: the file's own metadata
        assert grid.transform == src.transform and grid.shape == (src.height, src.width)
        assert grid.crs == CRS.from_user_input(src.crs.to_wkt())
    south_up = write_tif(tmp_path / "south_up.tif", np.zeros((6, 8)), UTM40S, Affine(500, 0, 310000, 0, 500, 7417000))
    flipped = TargetGrid.from_raster(south_up)
    assert flipped.transform == transform and flipped.shape == (6, 8)


def test_like_raster_from_a_config_region(tmp_path):
    write_tif(tmp_path / "dem.tif", np.zeros((4, 5)), UTM40S, Affine(1000, 0, 300000, 0, -1000, 7404000))
    (tmp_path / "run.yaml").write_text(
        "region: {name: Kessarine Basin, like: dem.tif}\n"
        "climate:\n  tmean: {path: t.tif, units: degC}\n  shortwave: {path: s.tif, units: W m-2}\n"
        "  water_availability: {path: w.tif, units: '1'}\n"
        "scenarios: [{name: now, co2_ppm: 420}]\n"
    )
    cfg = load_config(tmp_path / "run.yaml")
    grid = TargetGrid.from_region(cfg.region, cfg.config_dir)
    assert grid.shape == (4, 5) and grid.bounds == (300000, 7400000, 305000, 7404000)


def test_like_raster_without_crs_or_missing_is_an_input_error(tmp_path):
    no_crs = tmp_path / "no_crs.tif"
    with rasterio.open(no_crs, "w", driver="GTiff", width=3, height=3, count=1, dtype="float32") as dst:
        dst.write(np.zeros((1, 3, 3), "float32"))
    with pytest.raises(InputDataError, match="no CRS"):
        TargetGrid.from_raster(no_crs)
    with pytest.raises(InputDataError, match="does not exist"):
        TargetGrid.from_raster(tmp_path / "absent.tif")


# ------------------------------------------------------------------------------------------ latitude, area


def test_latitude_on_the_utm_central_meridian_matches_the_meridian_arc():
    # UTM south: N = 10 000 000 - 0.9996 * s(0, phi), s = meridian arc from the equator; s from pyproj.Geod
    # (Karney's geodesic algorithm, independent of PROJ's transverse Mercator). Central meridian of zone 40: 57 E.
    for phi in (-24.0, -1.0, -60.0):
        s = Geod(ellps="WGS84").inv(57.0, 0.0, 57.0, phi)[2]
        northing = 10_000_000.0 - 0.9996 * s
        grid = TargetGrid(CRS.from_user_input(UTM40S), Affine(1000, 0, 499500, 0, -1000, northing + 500), 1, 1)
        assert float(grid.latitude().values[0, 0]) == pytest.approx(phi, abs=2e-5)  # float32 output


def test_latitude_is_lazy_chunked_and_equals_y_on_a_geographic_grid():
    grid = TargetGrid.from_bounds("EPSG:4326", 0.5, (55.0, -26.0, 57.0, -22.0))
    lat = grid.latitude(chunk=3)
    assert isinstance(lat.data, dsa.Array) and lat.chunks == ((3, 3, 2), (3, 1))
    assert lat.dtype == np.float32
    np.testing.assert_allclose(lat.values, np.broadcast_to(grid.y[:, None], grid.shape), atol=1e-5)


def test_projected_cell_area_is_the_map_plane_product_in_square_metres():
    grid = TargetGrid.from_bounds(UTM40S, (1000, 2000), (300000, 7300000, 310000, 7310000))
    area = grid.cell_area_m2()
    assert isinstance(area.data, dsa.Array) and area.dtype == np.float64
    np.testing.assert_array_equal(area.values, 2.0e6)
    # US survey foot = 1200/3937 m (NIST Handbook 44, App. C); EPSG:2227 is in US survey feet.
    feet = TargetGrid.from_bounds("EPSG:2227", 100, (6_000_000, 2_000_000, 6_000_500, 2_000_300))
    np.testing.assert_allclose(feet.cell_area_m2().values, (100 * 1200 / 3937) ** 2, rtol=1e-12)


def _geodesic_cell_area(lon0, lat0, dlon, dlat, n=200):
    """Area of a lon/lat cell by pyproj.Geod (Karney 2013), parallels densified to follow the latitude line."""
    lons = np.concatenate([np.linspace(lon0, lon0 + dlon, n), np.linspace(lon0 + dlon, lon0, n)])
    lats = np.concatenate([np.full(n, lat0), np.full(n, lat0 + dlat)])
    area, _ = Geod(ellps="WGS84").polygon_area_perimeter(lons, lats)
    return abs(area)


@pytest.mark.parametrize("lat0, size", [(-24.0, 0.05), (0.0, 1.0), (60.0, 1.0), (88.0, 2.0), (-90.0, 1.0)])
def test_geographic_cell_area_matches_geodesic_polygons(lat0, size):
    grid = TargetGrid.from_bounds("EPSG:4326", size, (56.0, lat0, 56.0 + size, lat0 + size))
    assert float(grid.cell_area_m2().values[0, 0]) == pytest.approx(_geodesic_cell_area(56.0, lat0, size, size), rel=1e-7)


def test_geographic_cell_areas_on_a_sphere_follow_the_hat_box_theorem():
    # Archimedes: a sphere zone between phi1 and phi2 over delta_lambda has area R^2 delta_lambda (sin phi2 - sin phi1).
    radius = 6_371_000.0
    grid = TargetGrid.from_bounds(CRS.from_proj4(f"+proj=longlat +R={radius} +no_defs"), 1.0, (0, -30, 2, -27))
    expected = [radius**2 * math.radians(1) * (math.sin(math.radians(-30 + i + 1)) - math.sin(math.radians(-30 + i)))
                for i in range(3)][::-1]  # rows run north to south
    np.testing.assert_allclose(grid.cell_area_m2().values[:, 0], expected, rtol=1e-12)


def test_whole_globe_sums_to_the_ellipsoid_area():
    # WGS 84 surface area 510 065 621.7 km2 (from memory; also the sum of Geod areas checked above).
    grid = TargetGrid.from_bounds("EPSG:4326", 1.0, (-180, -90, 180, 90))
    assert float(grid.cell_area_m2().sum()) / 1e6 == pytest.approx(510_065_621.7, rel=1e-9)


def test_template_carries_grid_coords_crs_and_chunks():
    grid = TargetGrid.from_bounds(UTM40S, 1000, (300000, 7300000, 310000, 7306000))
    template = grid.template(chunk=4)
    np.testing.assert_array_equal(template.x.values, grid.x)
    np.testing.assert_array_equal(template.y.values, grid.y)
    assert CRS.from_user_input(template.rio.crs.to_wkt()) == grid.crs
    assert template.rio.transform() == grid.transform
    assert template.chunks == ((4, 2), (4, 4, 2))


# ------------------------------------------------------------------------------------------ alignment


def _lonlat_source(values: np.ndarray, res=0.05, west=55.0, north=-23.0, chunks=16) -> xr.DataArray:
    months, height, width = values.shape
    x = west + res * (np.arange(width) + 0.5)
    y = north - res * (np.arange(height) + 0.5)
    data = dsa.from_array(values, chunks=(months, chunks, chunks))
    return xr.DataArray(data, dims=("month", "y", "x"), coords={"month": np.arange(1, months + 1), "y": y, "x": x},
                        name="ramp").rio.write_crs("EPSG:4326")


def _ramps(height, width, hole=None):
    """Band 0: the column index, band 1: the row index (errors then read as positions in source cells)."""
    cols = np.broadcast_to(np.arange(width, dtype="float32"), (height, width))
    rows = np.broadcast_to(np.arange(height, dtype="float32")[:, None], (height, width))
    values = np.stack([cols, rows]).copy()
    if hole is not None:
        values[:, hole[0], hole[1]] = np.nan
    return values


def _rasterio_reproject(values, source_res, grid, resampling):
    """Oracle: one rasterio.warp.reproject (GDAL warper) of the whole source onto the grid.

    XSCALE/YSCALE=1 is the GDAL warp option align_to_grid uses (4-neighbour bilinear without the kernel
    widening GDAL applies when downsampling); it does not change "average".
    """
    out = np.full((values.shape[0], *grid.shape), np.nan, np.float32)
    reproject(values, out, src_transform=Affine(source_res, 0, 54.9, 0, -source_res, -22.9), src_crs="EPSG:4326",
              dst_transform=grid.transform, dst_crs=grid.crs.to_wkt(), resampling=Resampling[resampling],
              src_nodata=np.nan, dst_nodata=np.nan, XSCALE=1, YSCALE=1)
    return out


@pytest.mark.parametrize("resampling", ["bilinear", "average"])
@pytest.mark.parametrize("source_res", [0.05, 0.004])  # coarser and finer than the 2 km target cells
def test_alignment_matches_a_whole_raster_rasterio_reproject(resampling, source_res):
    grid = TargetGrid.from_bounds(UTM40S, 2000, (300000, 7360000, 400000, 7440000))  # about 55.0-56.0 E, 23.1-23.9 S
    height, width = round(1.2 / source_res), round(1.6 / source_res)
    hole = (slice(height // 3, height // 2), slice(width // 4, width // 2))
    clean, holed = _ramps(height, width), _ramps(height, width, hole)
    chunks = max(16, height // 5)
    out = align_to_grid(_lonlat_source(holed, res=source_res, west=54.9, north=-22.9, chunks=chunks), grid, resampling, chunk=16)
    assert isinstance(out.data, dsa.Array)  # still lazy
    assert out.dims == ("month", "y", "x") and out.chunks[0] == (2,)
    got = out.values
    got_clean = align_to_grid(_lonlat_source(clean, res=source_res, west=54.9, north=-22.9, chunks=chunks), grid,
                              resampling, chunk=16).values
    expected, expected_clean = (_rasterio_reproject(v, source_res, grid, resampling) for v in (holed, clean))
    assert np.isfinite(expected_clean).all()  # the source covers the whole grid
    # The grid is smaller than one warp block (grid.ALIGNMENT_BLOCK), so "bilinear" is GDAL's whole-raster
    # answer to the bit. "average" of the finer source differs by up to 0.015 source cells (seen here;
    # odc-geo hands GDAL only the part of the source under the block, which probably explains it).
    if resampling == "bilinear":
        np.testing.assert_array_equal(got, expected)
    # Values are source cell positions, so a half-cell registration error would show as 0.5.
    assert np.max(np.abs(got_clean - expected_clean)) < 0.05
    # With a nodata hole: cells the hole does not reach agree as closely.
    untouched = np.isfinite(expected) & (expected == expected_clean)
    assert untouched.mean() > 0.6
    assert np.max(np.abs(got[untouched] - expected[untouched])) < 0.05
    # Nodata agrees except on the edge of the hole, where a position difference of a few hundredths of a
    # cell can move a cell in or out.
    nan = np.isnan(expected)
    edge = np.zeros_like(nan)
    for axis in (1, 2):
        for shift in (-1, 1):
            edge |= nan != np.roll(nan, shift, axis=axis)
    assert nan.sum() > 20
    assert not np.any((np.isnan(got) != nan) & ~edge)
    # Coordinates are exactly the grid's.
    np.testing.assert_array_equal(out.x.values, grid.x)
    np.testing.assert_array_equal(out.y.values, grid.y)
    xr.align(out, grid.template(16), join="exact")


@pytest.mark.parametrize("resampling", ["nearest", "bilinear", "average"])
def test_aligned_values_do_not_depend_on_the_chunk_size(resampling):
    """compute.chunk_size must not change the maps. GDAL's warper approximates the transform along each
    row of the window it warps to within 1/8 of a source cell (its documented default error threshold of
    0.125 pixels, gdalwarp -et), so warping 64-cell blocks gave other values than 512-cell blocks: up to
    1.9 m of elevation on the demo's 3857 layer. 600 columns: more than one warp block."""
    grid = TargetGrid.from_bounds(UTM40S, 1000, (200000, 7300000, 800000, 7400000))
    source_res = 0.02
    values = _ramps(round(1.3 / source_res), round(6.5 / source_res))
    source = _lonlat_source(values, res=source_res, west=53.8, north=-23.3, chunks=100)
    results = {chunk: align_to_grid(source, grid, resampling, chunk=chunk) for chunk in (64, 250, 512, 1000)}
    assert results[64].chunks[1:] == ((64, 36), (64,) * 9 + (24,))
    reference = results[512].values
    assert np.isfinite(reference).all()  # the source covers the whole grid
    for chunk in (64, 250, 1000):
        np.testing.assert_array_equal(results[chunk].values, reference, err_msg=f"chunk {chunk}")


def test_alignment_on_the_same_grid_copies_values_and_takes_the_grid_coords():
    grid = TargetGrid.from_bounds(UTM40S, 1000, (300000, 7300000, 320000, 7312000))
    values = np.random.default_rng(1).random((12, *grid.shape)).astype("float32")
    # Coordinates off by float noise, as separately computed coordinates often are (ECOSYSTEM.md trap).
    layer = xr.DataArray(values, dims=("month", "y", "x"),
                         coords={"month": np.arange(1, 13), "y": grid.y + 1e-7, "x": grid.x - 1e-7}).rio.write_crs(UTM40S)
    out = align_to_grid(layer, grid, "bilinear", chunk=8)
    np.testing.assert_array_equal(out.values, values)
    np.testing.assert_array_equal(out.x.values, grid.x)
    assert out.chunks == ((12,), (8, 4), (8, 8, 4))


def test_alignment_of_a_south_up_layer_flips_it():
    grid = TargetGrid.from_bounds(UTM40S, 1000, (300000, 7300000, 304000, 7303000))
    values = np.arange(12, dtype="float32").reshape(3, 4)
    south_up = xr.DataArray(values[::-1], dims=("y", "x"), coords={"y": grid.y[::-1], "x": grid.x}).rio.write_crs(UTM40S)
    np.testing.assert_array_equal(align_to_grid(south_up, grid, "nearest", 512).values, values)


def test_alignment_outside_the_layer_is_nan():
    grid = TargetGrid.from_bounds(UTM40S, 1000, (300000, 7300000, 310000, 7304000))
    half = TargetGrid.from_bounds(UTM40S, 1000, (300000, 7300000, 305000, 7304000))  # west half only
    layer = half.template(512) + 1.0
    out = align_to_grid(layer, grid, "nearest", 512).values
    assert np.all(out[:, :5] == 1.0) and np.all(np.isnan(out[:, 5:]))
