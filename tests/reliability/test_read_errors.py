"""Issue 13, class 9: errors at compute time reported under the right code. A failure to read an input
while computing (a damaged tile or chunk outside the windows sampled before computing) names the input
file and layer and exits 3 (input data), not 4 ("computing c3_assimilation.tif ... failed").

Checked against the exit codes documented in suitability/cli.py and suitability/errors.py. The damaged
files are made here; the demo region is invented (demo_region/README.md).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
import rasterio
import xarray as xr
from affine import Affine
from rasterio.windows import Window

from suitability.errors import InputDataError, OutputError
from suitability.inputs.native import GuardedRead, guarded_chunk

from .conftest import EXIT_INPUT, assert_clean_error, cli, demo_config, write_config


class _FailingArray:
    """Stands for a lazily opened DataArray whose second row of blocks cannot be read."""

    shape, dtype, ndim, dims = (4, 4), np.dtype("float32"), 2, ("y", "x")

    def __getitem__(self, key):
        rows = key[0]
        if rows.start >= 2:
            raise RuntimeError("HDF error: inflate failed")
        return xr.DataArray(np.ones((rows.stop - rows.start, key[1].stop - key[1].start)))


def test_guarded_chunks_read_good_blocks_and_name_the_file_on_a_bad_one():
    lazy = xr.DataArray(np.arange(16.0).reshape(4, 4), dims=("y", "x"))
    chunked = guarded_chunk(lazy, {"y": 2, "x": 2}, "/data/t.nc: layer 'tmin'")
    np.testing.assert_array_equal(chunked.values, lazy.values)  # the same values, read block by block
    assert chunked.data.chunks == ((2, 2), (2, 2))
    reader = GuardedRead(_FailingArray(), "/data/t.nc: layer 'tmin'")
    assert reader[0:2, 0:4].shape == (2, 4)
    with pytest.raises(InputDataError, match=r"/data/t.nc: layer 'tmin'.*HDF error: inflate failed"):
        reader[2:4, 0:4]


def _damaged_elevation(folder: Path) -> Path:
    """An 8192 x 8192 tiled GeoTIFF over the demo grid whose tile (12, 12) is overwritten with garbage.

    The checks before computing read 8 windows of 32 cells per axis at rows/columns 0, 1166, 2333, ...
    (suitability.inputs.checks.read_sample), in dask chunks of 512: the chunk holding rows and columns
    768-831 (tile 12 of 64 cells) is never read by them (derived here)."""
    path = folder / "elevation.tif"
    with rasterio.open(path, "w", driver="GTiff", width=8192, height=8192, count=1, dtype="float32", nodata=-9999,
                       crs="EPSG:32740", transform=Affine(200000 / 8192, 0, 300000, 0, -160000 / 8192, 7460000),
                       tiled=True, blockxsize=64, blockysize=64, compress="deflate") as dst:
        block = np.full((1024, 8192), 350.0, dtype="float32")
        for row in range(0, 8192, 1024):
            dst.write(block, 1, window=Window(0, row, 8192, 1024))
        dst.set_band_unit(1, "m")
    with rasterio.open(path) as src:
        offset = int(src.get_tag_item("BLOCK_OFFSET_12_12", "TIFF", bidx=1))
        size = int(src.get_tag_item("BLOCK_SIZE_12_12", "TIFF", bidx=1))
    with open(path, "r+b") as handle:
        handle.seek(offset)
        handle.write(b"\xff" * size)
    return path


@pytest.mark.slow  # a run that reads a 8192 x 8192 input
def test_a_damaged_tile_outside_the_sampled_windows_exits_3_naming_the_input(tmp_path):
    elevation = _damaged_elevation(tmp_path)
    config = demo_config(scenarios=1)
    config["climate"]["elevation"] = {"path": str(elevation), "units": "m"}
    path = write_config(tmp_path, config)
    checked = cli("check", path)
    assert checked.exit_code == 0, checked.output  # the sample does not reach the damaged tile
    output = assert_clean_error(cli("run", path, "--no-progress"), EXIT_INPUT, str(elevation), "layer 'elevation'",
                                "cannot read the values")
    assert "computing c3_assimilation.tif" not in output
    assert not (tmp_path / "out" / "baseline" / "pathway_class.tif").exists()


def test_a_damaged_zarr_chunk_names_the_store_and_layer(tmp_path):
    from suitability.config import validate_section
    from suitability.config.schema import LayerSpec
    from suitability.inputs import open_layer

    lat = -22.9 - 0.02 * (np.arange(64) + 0.5)
    lon = 54.9 + 0.02 * (np.arange(64) + 0.5)
    values = np.full((12, 64, 64), 290.0)
    ds = xr.Dataset({"tmax": (("month", "lat", "lon"), values, {"units": "K"})},
                    coords={"month": np.arange(1, 13), "lat": ("lat", lat, {"units": "degrees_north"}),
                            "lon": ("lon", lon, {"units": "degrees_east"})})
    store = tmp_path / "t.zarr"
    ds.to_zarr(store, mode="w", encoding={"tmax": {"chunks": (12, 16, 16)}})
    chunk_files = sorted(p for p in (store / "tmax").rglob("*") if p.is_file() and not p.name.startswith(("zarr", ".z")))
    assert len(chunk_files) == 16
    chunk_files[-1].write_bytes(b"not a compressed chunk")
    spec = validate_section(LayerSpec, {"path": str(store), "variable": "tmax", "units": "K"}, "climate.tmax")
    # A store this small is read whole by the sample before computing, which finds the damage already.
    with pytest.raises(InputDataError, match=rf"{store}: layer 'tmax' \(variable 'tmax'\): cannot read the values") as caught:
        open_layer("tmax", spec, chunk=512).compute()
    assert "Zstd" in str(caught.value) or "decompress" in str(caught.value).lower() or "codec" in str(caught.value).lower()


def test_an_output_error_that_wraps_an_input_error_is_reported_as_input(tmp_path):
    from suitability import pipeline

    cfg = pipeline.load_config(write_config(tmp_path, demo_config(scenarios=1)))
    cause = InputDataError("/data/t.nc: layer 'tmin': cannot read the values (HDF error)")
    with pytest.raises(InputDataError, match=r"/data/t.nc: layer 'tmin'.*while computing scenario 'baseline'"):
        with pipeline._input_errors_named(cfg, [cfg.baseline_scenario]):
            raise OutputError("computing c3_assimilation.tif for out/baseline failed") from cause
    with pytest.raises(OutputError, match="disk is full"):  # a real output problem stays one
        with pipeline._input_errors_named(cfg, [cfg.baseline_scenario]):
            raise OutputError("writing failed; the disk is full")
