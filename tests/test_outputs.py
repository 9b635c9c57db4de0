"""Tests of suitability.outputs: COG layers, NetCDF datacube, manifest, checksums, folder checks.

External references used below:
- COG: rio-cogeo's validator, ``rio_cogeo.cogeo.cog_validate(path, strict=True)`` (Python API; the CLI's
  exit code is not trustworthy), a port of GDAL's ``validate_cloud_optimized_geotiff.py``.
- TIFF tags read with ``tifffile`` (an independent TIFF reader, not GDAL): tag numbers and values from the
  TIFF 6.0 specification (Adobe 1992): Compression 259 (8 = Adobe Deflate; 50000 = ZSTD, registered by
  GDAL/libtiff), Predictor 317 (2 horizontal differencing, 3 floating point, TIFF Technical Note 3),
  TileWidth 322 / TileLength 323, PhotometricInterpretation 262 (3 = palette), ColorMap 320 (16-bit
  values, 3 x 2**BitsPerSample entries), NewSubfileType 254 (1 = reduced-resolution image = overview).
- GeoTIFF keys from OGC GeoTIFF 1.1 (OGC 19-008r4): ProjectedCSTypeGeoKey 3072, ModelPixelScaleTag 33550,
  ModelTiepointTag 33922. GDAL's private tags GDAL_NODATA 42113 and GDAL_METADATA 42112 as documented in
  GDAL's GTiff driver page.
- NetCDF: CF conventions grid mapping read back with ``pyproj.CRS.from_cf`` and by GDAL's netCDF driver.
- SHA-256: FIPS 180-2 (NIST 2002), appendix B example messages and digests.
- Category names and raster attribute tables: GDAL's Persistent Auxiliary Metadata (PAM, ``<file>.aux.xml``,
  declared in gdal_pam.h, https://gdal.org/en/stable/doxygen/gdal__pam_8h_source.html: GCIF_CATEGORYNAMES)
  and the GDALRasterAttributeTable C++ API page (https://gdal.org/en/stable/api/gdalrasterattributetable_cpp.html:
  GFU_MinMax class value, GFU_Name class name, GFU_Red/Green/Blue class colour). GDAL itself is the oracle:
  it reads our sidecar when it opens the GeoTIFF and writes what it read into a VRT copy.
The rasters are random numbers on a made-up grid placed in the invented Kessarine Basin (UTM 40S).
"""

from __future__ import annotations

import errno
import hashlib
import json
import os
import subprocess
import sys
import threading
from pathlib import Path

import dask
import dask.array as da
import numpy as np
import pytest
import rasterio
import rioxarray  # noqa: F401
import tifffile
import xarray as xr
from affine import Affine
from rio_cogeo.cogeo import cog_validate

from suitability.errors import ConfigError, OutputError
from suitability.outputs import (
    CLASS_TRANSITION_COLOURS,
    PATHWAY_CLASS_COLOURS,
    LayerWrite,
    check_output_folder,
    pam_sidecar_path,
    with_sidecars,
    file_checksum,
    write_datacube,
    write_layers,
    write_manifest,
    write_together,
)
from suitability.runtime import compute_context
from suitability.variables import OUTPUT_LAYERS, OUTPUT_VARIABLES

HEIGHT, WIDTH = 700, 1100  # > 512 both ways, so COG overviews are required
TRANSFORM = Affine(1000.0, 0.0, 300000.0, 0.0, -1000.0, 7460000.0)
CRS = "EPSG:32740"
TAGS = {"scenario": "co2_only", "co2_ppm": "700", "config_hash": "ab12cd34", "tool": "suitability 0.1.0"}


def on_grid(data) -> xr.DataArray:
    x = TRANSFORM.c + TRANSFORM.a * (np.arange(WIDTH) + 0.5)
    y = TRANSFORM.f + TRANSFORM.e * (np.arange(HEIGHT) + 0.5)
    layer = xr.DataArray(data, dims=("y", "x"), coords={"y": y, "x": x})
    return layer.rio.write_crs(CRS).rio.write_transform(TRANSFORM)


def random_field(seed: int, chunks=512):
    values = da.random.default_rng(seed).random((HEIGHT, WIDTH), chunks=chunks)
    # some nodata, to check NaN survives as nodata
    return da.where(values < 0.03, np.nan, values).astype(np.float32)


def example_layers(chunks=512) -> dict[str, xr.DataArray]:
    advantage = random_field(1, chunks) * 2 - 1
    classes = da.where(da.isnan(advantage), 255, da.digitize(advantage, [-0.05, 0.05]) + 1).astype(np.uint8)
    change = random_field(2, chunks) - 0.5
    transition = (classes.astype(np.uint16) * 10 + da.flip(classes, 0)).astype(np.uint16)
    transition = da.where((classes == 255) | (da.flip(classes, 0) == 255), 255, transition).astype(np.uint8)
    return {
        "pathway_advantage": on_grid(advantage),
        "pathway_class": on_grid(classes),
        "advantage_change": on_grid(change),
        "class_transition": on_grid(transition),
    }


def read_band(path):
    with rasterio.open(path) as src:
        return src.read(1)


def our_files(folder: Path) -> list[str]:
    return sorted(p.name for p in folder.iterdir())


def expected_files(names) -> list[str]:
    """The files write_layers leaves for these layers: each COG, and the PAM sidecar of each class layer."""
    return sorted([f"{n}.tif" for n in names] + [f"{n}.tif.aux.xml" for n in names if OUTPUT_LAYERS[n].categorical])


@pytest.fixture(scope="module")
def written(tmp_path_factory):
    folder = tmp_path_factory.mktemp("scenario")
    layers = example_layers()
    paths = write_layers(layers, folder, tags=TAGS, cog_options={"compression": "deflate", "level": 6})
    return folder, layers, paths


def test_every_layer_is_a_valid_cog(written):
    folder, layers, paths = written
    assert set(paths) == set(layers)
    for name, path in paths.items():
        # COG spec as checked by rio-cogeo's validator (strict: warnings count as failures)
        valid, errors, warnings = cog_validate(path, strict=True, quiet=True)
        assert valid, (name, errors, warnings)
    # nothing else left in the folder: no temporaries, no staging folder; class layers have their sidecar
    assert our_files(folder) == expected_files(layers)
    assert sum(name.endswith(".aux.xml") for name in our_files(folder)) == 2  # pathway_class, class_transition


def test_grid_dtype_and_nodata_equal_the_input(written):
    _, layers, paths = written
    for name, path in paths.items():
        with rasterio.open(path) as src:
            # GDAL's reading of the GeoTIFF georeferencing
            assert src.crs.to_epsg() == 32740
            assert src.transform == layers[name].rio.transform() == TRANSFORM
            assert (src.height, src.width) == (HEIGHT, WIDTH)
            if name in ("pathway_class", "class_transition"):
                assert src.dtypes[0] == "uint8" and src.nodata == 255
            else:
                assert src.dtypes[0] == "float32" and np.isnan(src.nodata)
        # the same georeferencing through an independent TIFF reader (OGC GeoTIFF 1.1 keys)
        with tifffile.TiffFile(path) as tif:
            geo = tif.geotiff_metadata
            assert int(geo["ProjectedCSTypeGeoKey"]) == 32740
            assert list(geo["ModelPixelScale"][:2]) == [1000.0, 1000.0]
            assert list(geo["ModelTiepoint"][3:5]) == [300000.0, 7460000.0]
            nodata = tif.pages[0].tags["GDAL_NODATA"].value.strip("\x00")
            assert nodata == ("255" if name.endswith(("class", "transition")) else "nan")


def test_tiff_structure_tiles_compression_predictor_overviews(written):
    _, _, paths = written
    for name, path in paths.items():
        with tifffile.TiffFile(path) as tif:
            full = tif.pages[0]
            assert (full.tilewidth, full.tilelength) == (512, 512)  # TIFF 6.0 tags 322/323
            assert int(full.compression) == 8  # TIFF 6.0 Compression: 8 = Adobe Deflate
            expected_predictor = 2 if name in ("pathway_class", "class_transition") else 3  # TIFF TN3
            assert int(full.predictor) == expected_predictor
            # at least one overview IFD, marked as reduced-resolution (NewSubfileType bit 0)
            overviews = tif.pages[1:]
            assert len(overviews) >= 1 and all(int(p.subfiletype) & 1 for p in overviews)
            assert overviews[0].imagewidth == (WIDTH + 1) // 2
        with rasterio.open(path) as src:
            assert src.overviews(1) == [2]
            expected = "MODE" if name in ("pathway_class", "class_transition") else "AVERAGE"
            assert src.tags()["OVERVIEW_RESAMPLING"] == expected


def test_pixels_equal_the_source_exactly(written):
    _, layers, paths = written
    for name, path in paths.items():
        expected = layers[name].values
        # pixel equality, NaN (nodata) included; source: the dask array itself, computed independently
        np.testing.assert_array_equal(read_band(path), expected)


def test_class_overview_is_the_block_mode(written):
    _, layers, paths = written
    # GDAL "mode" resampling of a 2x decimation: most frequent value of each 2x2 block (GDAL docs,
    # gdaladdo -r mode); check a block with a clear majority, computed here with numpy.
    classes = layers["pathway_class"].values
    with rasterio.open(paths["pathway_class"], OVERVIEW_LEVEL=0) as ovr:
        overview = ovr.read(1)
    checked = 0
    for row in range(0, 200, 2):
        for col in range(0, 200, 2):
            block = classes[row:row + 2, col:col + 2].ravel()
            values, counts = np.unique(block, return_counts=True)
            if counts.max() >= 3:
                assert overview[row // 2, col // 2] == values[counts.argmax()]
                checked += 1
    assert checked > 100


def test_tags_descriptions_and_units(written):
    _, _, paths = written
    for name, path in paths.items():
        variable = OUTPUT_VARIABLES[name]
        with rasterio.open(path) as src:
            tags = src.tags()
            for key, value in TAGS.items():
                assert tags[key] == value
            assert src.descriptions[0] == variable.long_name
            assert src.units[0] == variable.units
        # GDAL_METADATA (tag 42112) as an independent reader sees it: dataset items and the band's unit
        with tifffile.TiffFile(path) as tif:
            xml = tif.pages[0].tags["GDAL_METADATA"].value
        assert f'<Item name="scenario">{TAGS["scenario"]}</Item>' in xml
        assert 'role="unittype"' in xml and 'role="description"' in xml


def test_class_layers_carry_their_colour_table(written):
    _, _, paths = written
    for name, colours in (("pathway_class", PATHWAY_CLASS_COLOURS), ("class_transition", CLASS_TRANSITION_COLOURS)):
        with rasterio.open(paths[name]) as src:
            table = src.colormap(1)
        for code, rgba in colours.items():
            assert table[code] == rgba
        with tifffile.TiffFile(paths[name]) as tif:
            page = tif.pages[0]
            assert int(page.photometric) == 3  # TIFF 6.0: palette colour
            colormap = page.tags["ColorMap"].value  # 3 x 256 16-bit values
            assert colormap.shape == (3, 256)
            for code, (r, g, b, _) in colours.items():
                if code != 255:
                    # TIFF 6.0 ColorMap holds 16-bit intensities: 8-bit value * 257
                    assert tuple(int(v) for v in colormap[:, code]) == (r * 257, g * 257, b * 257)
    # our palette: three distinct readable classes, and nodata transparent
    assert len({PATHWAY_CLASS_COLOURS[c] for c in (1, 2, 3)}) == 3
    assert PATHWAY_CLASS_COLOURS[255][3] == 0 and CLASS_TRANSITION_COLOURS[255][3] == 0


def gdal_read_categories(path: Path) -> tuple[list[str], list[tuple], dict]:
    """Category names and raster attribute table of band 1 as GDAL reads them on opening ``path``.

    rasterio has no API for either; GDAL's VRT driver writes the band's category names and attribute table
    into the VRT XML (CreateCopy copies them from the source band), so a VRT copy shows what GDAL read."""
    import xml.etree.ElementTree as ET

    from rasterio.shutil import copy

    vrt = path.with_name(path.stem + ".check.vrt")
    copy(path, vrt, driver="VRT")
    band = ET.parse(vrt).getroot().find("VRTRasterBand")
    vrt.unlink()
    names = [c.text or "" for c in band.findall("CategoryNames/Category")]
    table = band.find("GDALRasterAttributeTable")
    if table is None:
        return names, [], {}
    fields = {int(f.find("Usage").text): f.find("Name").text for f in table.findall("FieldDefn")}
    rows = [tuple(f.text or "" for f in row.findall("F")) for row in table.findall("Row")]
    return names, rows, {"type": table.get("tableType"), "usage": fields}


def test_class_layers_carry_gdal_category_names_and_attribute_table(written):
    folder, layers, paths = written
    for name in ("pathway_class", "class_transition"):
        legend, colours = OUTPUT_LAYERS[name].legend, OUTPUT_LAYERS[name].colours
        assert pam_sidecar_path(paths[name]).is_file()
        names, rows, table = gdal_read_categories(paths[name])
        # GDAL category names are indexed by pixel value (GDALRasterBand::GetCategoryNames)
        assert names == [legend.get(code, "") for code in range(max(legend) + 1)], name
        assert {code: names[code] for code in legend} == legend
        # RAT field usages (GDALRATFieldUsage): 5 GFU_MinMax, 2 GFU_Name, 6/7/8 GFU_Red/Green/Blue
        assert table["type"] == "thematic" and set(table["usage"]) == {5, 2, 6, 7, 8}
        assert [(int(r[0]), r[1], tuple(int(v) for v in r[2:])) for r in rows] == [
            (code, legend[code], colours[code][:3]) for code in sorted(legend)]
        # the COG beside its sidecar still validates, and GDAL still reads the embedded colour table
        assert cog_validate(paths[name], strict=True, quiet=True)[0]
        with rasterio.open(paths[name]) as src:
            first = min(legend)
            assert src.colormap(1)[first] == colours[first]
    for name in ("pathway_advantage", "advantage_change"):  # continuous layers get no sidecar
        assert not pam_sidecar_path(paths[name]).exists()
        assert gdal_read_categories(paths[name]) == ([], [], {})
    assert set(with_sidecars(paths)) == set(paths) | {"pathway_class.aux.xml", "class_transition.aux.xml"}


@pytest.mark.parametrize("name", [n for n, layer in OUTPUT_VARIABLES.items() if layer.categorical])
def test_every_class_layer_of_the_registry_gets_its_legend_as_category_names(name, tmp_path):
    # every categorical layer of the registry (pathway_class, class_transition, change_agreement,
    # confidence_class, ...), each written with its own codes on a small grid (no overviews needed)
    legend = OUTPUT_LAYERS[name].legend
    codes = np.resize(np.array(sorted(legend) + [255], np.uint8), 160 * 200).reshape(160, 200)
    layer = xr.DataArray(da.from_array(codes, chunks=512), dims=("y", "x"),
                         coords={"y": 7459500.0 - 1000 * np.arange(160), "x": 300500.0 + 1000 * np.arange(200)}
                         ).rio.write_crs(CRS)
    paths = write_layers({name: layer}, tmp_path, tags=TAGS, cog_options={"overviews": False})
    assert our_files(tmp_path) == [f"{name}.tif", f"{name}.tif.aux.xml"]
    names, rows, _ = gdal_read_categories(paths[name])
    assert {code: names[code] for code in legend} == legend
    assert not [n for code, n in enumerate(names) if code not in legend and n]  # no name for unused codes
    assert [(int(r[0]), r[1]) for r in rows] == sorted(legend.items())
    assert cog_validate(paths[name], strict=True, quiet=True)[0]
    np.testing.assert_array_equal(read_band(paths[name]), codes)


def test_all_layers_are_computed_in_one_dask_pass(tmp_path):
    calls = []
    lock = threading.Lock()

    def shared_physiology(block):
        with lock:
            calls.append(block.shape)
        return block * 2.0

    base = random_field(3)
    shared = base.map_blocks(shared_physiology, dtype=np.float32, meta=np.array((), np.float32))
    layers = {
        "c3_assimilation": on_grid(shared + 1),
        "c4_assimilation": on_grid(shared * 3),
        "pathway_advantage": on_grid(shared - 0.5),
    }
    calls.clear()
    with dask.config.set(scheduler="threads"):
        paths = write_layers(layers, tmp_path, tags=TAGS, cog_options=None)
    # one call per block of the shared graph (dask's own block count), not one per layer
    assert len(calls) == shared.npartitions == 6
    np.testing.assert_array_equal(read_band(paths["c4_assimilation"]), (base.compute() * 2.0) * 3)


def test_zstd_and_deflate_both_give_valid_cogs(tmp_path):
    layers = {k: v for k, v in example_layers().items() if k in ("pathway_advantage", "pathway_class")}
    expected_code = {"deflate": 8, "zstd": 50000}  # TIFF Compression codes (TIFF 6.0; ZSTD registered 50000)
    for compression, level in (("deflate", 9), ("zstd", 15)):
        folder = tmp_path / compression
        paths = write_layers(layers, folder, tags=TAGS, cog_options={"compression": compression, "level": level})
        for name, path in paths.items():
            valid, errors, warnings = cog_validate(path, strict=True, quiet=True)
            assert valid, (compression, name, errors, warnings)
            with tifffile.TiffFile(path) as tif:
                assert int(tif.pages[0].compression) == expected_code[compression]
            np.testing.assert_array_equal(read_band(path), layers[name].values)


def test_chunks_off_the_tile_grid_are_written_exactly(tmp_path):
    layers = {k: v for k, v in example_layers(chunks=300).items() if k in ("pathway_advantage", "pathway_class")}
    paths = write_layers(layers, tmp_path, tags=TAGS, cog_options=None)
    for name, path in paths.items():
        assert cog_validate(path, strict=True, quiet=True)[0]
        np.testing.assert_array_equal(read_band(path), layers[name].values)


def test_small_rasters_without_overviews_are_valid(tmp_path):
    # the demo grid is 200 x 160 cells: below one tile, so no overviews are needed for a COG
    data = da.random.default_rng(5).random((160, 200), chunks=512).astype(np.float32)
    layer = xr.DataArray(data, dims=("y", "x"), coords={"y": 7459500.0 - 1000 * np.arange(160),
                                                        "x": 300500.0 + 1000 * np.arange(200)}).rio.write_crs(CRS)
    paths = write_layers({"c3_assimilation": layer}, tmp_path, tags=TAGS, cog_options={"overviews": False})
    assert cog_validate(paths["c3_assimilation"], strict=True, quiet=True)[0]
    np.testing.assert_array_equal(read_band(paths["c3_assimilation"]), data.compute())


def test_a_strip_longer_than_a_tile_one_way_only_gets_an_overview_and_is_a_valid_cog(tmp_path):
    # rio-cogeo's validator (a port of GDAL's validate_cloud_optimized_geotiff.py) refuses a raster with a
    # side over 512 cells and no overview; rasterio's default overview count (halve while the shorter side
    # exceeds the tile) gives none for 1100 x 300 cells, so the write failed with default options.
    rows = 300
    data = da.random.default_rng(6).random((rows, WIDTH), chunks=512).astype(np.float32)
    layer = on_grid(random_field(3)).isel(y=slice(0, rows)).copy(data=data)
    paths = write_layers({"c3_assimilation": layer}, tmp_path, tags=TAGS, cog_options=None)
    valid, errors, warnings = cog_validate(paths["c3_assimilation"], strict=True, quiet=True)
    assert valid, (errors, warnings)
    with rasterio.open(paths["c3_assimilation"]) as src:
        assert src.overviews(1) == [2]
    np.testing.assert_array_equal(read_band(paths["c3_assimilation"]), data.compute())


def test_failure_mid_compute_leaves_no_output_and_no_temporaries(tmp_path):
    # an earlier, finished output must survive a failed rewrite untouched (atomic replace)
    earlier = write_layers({"pathway_advantage": example_layers()["pathway_advantage"]}, tmp_path, tags=TAGS,
                           cog_options=None)["pathway_advantage"]
    earlier_sum = file_checksum(earlier)

    def fails_on_one_block(block, block_info=None):
        if block_info[0]["chunk-location"] == (1, 1):
            raise RuntimeError("simulated failure in the middle of the compute")
        return block

    broken = random_field(4).map_blocks(fails_on_one_block, dtype=np.float32, meta=np.array((), np.float32))
    layers = {"pathway_advantage": on_grid(broken), "c3_assimilation": on_grid(broken + 1)}
    with pytest.raises(OutputError, match="simulated failure"):
        with dask.config.set(scheduler="threads"):
            write_layers(layers, tmp_path, tags=TAGS, cog_options=None)
    assert our_files(tmp_path) == ["pathway_advantage.tif"]  # no c3_assimilation.tif, no hidden files
    assert file_checksum(earlier) == earlier_sum


FOLDERS = ("baseline", "co2_only", "warmer")


def folder_writes(root: Path, layers) -> list[LayerWrite]:
    """One write per scenario folder of ``root``, as a run's pass gives write_together."""
    return [LayerWrite(dict(layers), root / name, tags={**TAGS, "scenario": name}, cog_options=None) for name in FOLDERS]


# One thread: the last file fails, after every other folder's files converted. Six threads: the first file
# fails while all the others are converting.
@pytest.mark.parametrize("threads, failing", [(1, ("warmer", "pathway_class")), (6, ("baseline", "pathway_advantage"))])
def test_a_conversion_failure_in_one_folder_leaves_no_file_of_the_call_and_no_temporaries(tmp_path, monkeypatch,
                                                                                         threads, failing):
    import suitability.outputs

    # an earlier, finished output in the first folder must survive the failed call untouched
    earlier = write_layers({"pathway_advantage": example_layers()["pathway_advantage"]}, tmp_path / "baseline",
                           tags=TAGS, cog_options=None)["pathway_advantage"]
    earlier_sum = file_checksum(earlier)
    layers = {name: example_layers()[name] for name in ("pathway_advantage", "pathway_class")}
    real_copy = suitability.outputs._cog_copy
    failed, count_lock = threading.Event(), threading.Lock()
    running, outlived_their_folder = [], []

    def full_disk_for_one_layer(source, destination, *args, **kwargs):
        # The OS error a full disk gives (ENOSPC, POSIX), for one file only: the others convert, so only
        # the call's atomicity keeps them from getting their final names.
        if f"{os.sep}{failing[0]}{os.sep}" in str(source) and Path(source).name.startswith(f".{failing[1]}."):
            failed.set()
            raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC), str(destination))
        with count_lock:
            running.append(source)
        try:
            if threads > 1:  # every conversion runs at once: the others are still writing when one fails
                failed.wait(60)  # (a guard against a hang, not a timing check)
            return real_copy(source, destination, *args, **kwargs)
        finally:
            with count_lock:
                running.remove(source)
                if not Path(source).parent.is_dir():  # the staging folder was removed under a running conversion
                    outlived_their_folder.append(source)

    monkeypatch.setattr(suitability.outputs, "_cog_copy", full_disk_for_one_layer)
    with pytest.raises(OutputError, match=rf"{failing[0]}.{failing[1]}\.tif: COG conversion failed.*the disk is full"):
        write_together(folder_writes(tmp_path, layers), conversion_threads=threads)
    assert running == [] and outlived_their_folder == []  # every conversion ended before the clean-up
    assert our_files(tmp_path / "baseline") == ["pathway_advantage.tif"]  # no hidden staging folder either
    assert our_files(tmp_path / "co2_only") == [] and our_files(tmp_path / "warmer") == []
    assert file_checksum(earlier) == earlier_sum


def test_conversion_threads_give_the_same_cogs_byte_for_byte(tmp_path):
    # The serial conversion (one thread, as before conversions ran in threads) is the reference; the
    # pixels are checked against the source arrays, the layout by rio-cogeo's validator.
    layers = example_layers()
    written = {threads: [with_sidecars(paths) for paths in
                         write_together(folder_writes(tmp_path / f"threads_{threads}", layers), conversion_threads=threads)]
               for threads in (1, 4)}
    for serial, threaded in zip(written[1], written[4], strict=True):
        sidecars = {f"{name}.aux.xml" for name in layers if OUTPUT_LAYERS[name].categorical}
        assert serial.keys() == threaded.keys() == set(layers) | sidecars
        for name, path in serial.items():
            assert file_checksum(path) == file_checksum(threaded[name]), name
            if name in layers:
                assert cog_validate(threaded[name], strict=True, quiet=True)[0]
                np.testing.assert_array_equal(read_band(threaded[name]), layers[name].values)


KILLED_WRITER = """
import sys, time
import dask, dask.array as da, numpy as np, rioxarray, xarray as xr
from affine import Affine
from suitability.outputs import write_layers

def slow(block):
    time.sleep(0.4)
    return block

t = Affine(1000.0, 0.0, 300000.0, 0.0, -1000.0, 7460000.0)
data = da.ones((1100, 1100), chunks=512, dtype=np.float32).map_blocks(slow, meta=np.array((), np.float32))
layer = xr.DataArray(data, dims=("y", "x"), coords={"y": 7459500.0 - 1000 * np.arange(1100),
                     "x": 300500.0 + 1000 * np.arange(1100)}).rio.write_crs("EPSG:32740").rio.write_transform(t)
with dask.config.set(scheduler="threads", num_workers=1):
    write_layers({"c3_assimilation": layer}, sys.argv[1], tags={}, cog_options=None)
"""


def test_a_killed_write_leaves_nothing_that_looks_finished(tmp_path):
    import signal
    import sys
    import time

    # the trap (ECOSYSTEM.md, reproduced): a file killed half-way still opens in GDAL; here a run is killed
    # with SIGKILL mid-compute and must leave no <name>.tif, only a hidden staging folder
    writer = subprocess.Popen([sys.executable, "-c", KILLED_WRITER, str(tmp_path)])
    deadline = time.monotonic() + 60
    while not list(tmp_path.glob(".suitability-staging-*/.c3_assimilation.tmp-*.tif")):
        assert writer.poll() is None and time.monotonic() < deadline, "the writer never started writing"
        time.sleep(0.05)
    time.sleep(0.5)
    writer.send_signal(signal.SIGKILL)
    writer.wait()
    assert not list(tmp_path.glob("*.tif"))
    assert all(name.startswith(".") for name in our_files(tmp_path))
    # the next write into the folder removes the abandoned staging folder of the dead process
    write_layers({"pathway_advantage": example_layers()["pathway_advantage"]}, tmp_path, tags=TAGS, cog_options=None)
    assert our_files(tmp_path) == ["pathway_advantage.tif"]


def test_invalid_class_codes_fail_cleanly(tmp_path):
    classes = da.full((HEIGHT, WIDTH), 7, dtype=np.uint8, chunks=512)  # 7 is not a class code
    with pytest.raises(OutputError, match="pathway_class"):
        write_layers({"pathway_class": on_grid(classes)}, tmp_path, tags=TAGS, cog_options=None)
    assert our_files(tmp_path) == []


def test_bad_layers_are_refused_with_the_file_named(tmp_path):
    good = example_layers()["pathway_advantage"]
    with pytest.raises(OutputError, match="not an output layer"):
        write_layers({"rainfall": good}, tmp_path, tags=TAGS, cog_options=None)
    no_crs = xr.DataArray(np.zeros((4, 4), np.float32), dims=("y", "x"),
                          coords={"y": np.arange(4.0), "x": np.arange(4.0)})
    with pytest.raises(OutputError, match=r"c3_assimilation\.tif.*no CRS"):
        write_layers({"c3_assimilation": no_crs}, tmp_path, tags=TAGS, cog_options=None)
    shifted = good.assign_coords(x=good.x + 1000.0).rio.write_transform(TRANSFORM @ Affine.translation(1, 0))
    with pytest.raises(OutputError, match="not on the grid"):
        write_layers({"pathway_advantage": good, "advantage_change": shifted}, tmp_path, tags=TAGS, cog_options=None)
    with pytest.raises(ConfigError, match="output.cog.compression"):
        write_layers({"pathway_advantage": good}, tmp_path, tags=TAGS, cog_options={"compression": "lzma"})
    assert our_files(tmp_path) == []


def test_existing_outputs_without_overwrite_are_listed(tmp_path):
    (tmp_path / "baseline").mkdir()
    for name in ("baseline/pathway_class.tif", "baseline/pathway_advantage.tif"):
        (tmp_path / name).write_bytes(b"finished earlier")
    names = ["baseline/pathway_class.tif", "baseline/pathway_advantage.tif", "co2_only/pathway_class.tif"]
    with pytest.raises(OutputError) as caught:
        check_output_folder(tmp_path, names, overwrite=False)
    message = str(caught.value)
    assert "pathway_class.tif" in message and "pathway_advantage.tif" in message and "co2_only" not in message
    assert isinstance(caught.value, OSError)  # errors.py: OutputError is also an OSError
    assert check_output_folder(tmp_path, names, overwrite=True) == tmp_path
    assert (tmp_path / "co2_only").is_dir()


def test_folder_that_cannot_be_created_is_named(tmp_path):
    blocker = tmp_path / "a_file"
    blocker.write_text("not a folder")
    with pytest.raises(OutputError, match=str(blocker / "out")):
        check_output_folder(blocker / "out", ["x.tif"], overwrite=False)
    with pytest.raises(OutputError, match=str(blocker / "out")):
        write_layers(example_layers(), blocker / "out", tags=TAGS, cog_options=None)


def test_folder_that_is_not_writable_is_named(tmp_path):
    locked = tmp_path / "locked"
    locked.mkdir()
    if os.geteuid() == 0:
        # root ignores permission bits; the immutable attribute stops root too (chattr, ext4/xfs)
        if subprocess.run(["chattr", "+i", str(locked)], capture_output=True).returncode != 0:
            pytest.skip("running as root on a filesystem without chattr +i: cannot make a folder unwritable")
        undo = ["chattr", "-i", str(locked)]
    else:
        locked.chmod(0o500)
        undo = ["chmod", "700", str(locked)]
    try:
        with pytest.raises(OutputError, match=str(locked)):
            check_output_folder(locked, ["pathway_class.tif"], overwrite=False)
        with pytest.raises(OutputError, match=str(locked)):
            write_manifest({"a": 1}, locked / "manifest.json")
    finally:
        subprocess.run(undo, check=True)


def test_write_through_a_local_cluster_matches_the_threaded_write(written, tmp_path):
    _, _, threaded_paths = written
    layers = example_layers()
    settings = type("Compute", (), {"scheduler": "local-cluster", "workers": 2, "threads_per_worker": 1,
                                    "memory_limit": "1GiB", "chunk_size": 512})()
    with compute_context(settings) as runtime:
        assert runtime.client is not None and len(runtime.client.scheduler_info()["workers"]) == 2
        paths = write_layers(layers, tmp_path, tags=TAGS, cog_options={"compression": "deflate", "level": 6},
                             lock=runtime.write_lock("co2_only"))
    for name, path in paths.items():
        assert cog_validate(path, strict=True, quiet=True)[0]
        np.testing.assert_array_equal(read_band(path), read_band(threaded_paths[name]))
    assert our_files(tmp_path) == expected_files(layers)


def test_datacube_is_cf_netcdf_with_the_grid(tmp_path):
    import netCDF4
    import pyproj

    template = on_grid(np.zeros((HEIGHT, WIDTH), np.float32))
    monthly = da.random.default_rng(6).random((12, HEIGHT, WIDTH), chunks=(12, 512, 512)).astype(np.float32)
    cube = xr.Dataset(
        {"c3_monthly_assimilation": (("month", "y", "x"), monthly, {"long_name": "monthly C3", "units": "g m-2"}),
         "c4_monthly_assimilation": (("month", "y", "x"), monthly * 2, {"long_name": "monthly C4", "units": "g m-2"})},
        coords={"month": np.arange(1, 13), "y": template.y, "x": template.x},
        attrs={"scenario": "co2_only", "co2_ppm": 700.0},
    ).rio.write_crs(CRS).rio.write_transform(TRANSFORM)
    path = write_datacube(cube, tmp_path / "monthly_assimilation.nc")
    assert our_files(tmp_path) == ["monthly_assimilation.nc"]

    with netCDF4.Dataset(path) as nc:
        variable = nc["c3_monthly_assimilation"]
        assert variable.filters()["zlib"] is True  # compressed
        mapping = nc[variable.grid_mapping]
        # CF grid mapping attributes, interpreted by pyproj's CF reader
        crs = pyproj.CRS.from_cf({k: mapping.getncattr(k) for k in mapping.ncattrs()})
        assert crs.to_epsg() == 32740
        assert nc["x"].standard_name == "projection_x_coordinate" and nc["x"].units in ("metre", "m")
        assert nc.Conventions.startswith("CF-")
        np.testing.assert_array_equal(variable[3, :, :], monthly[3].compute())
    # GDAL's netCDF driver reads the same grid independently
    with rasterio.open(f"netcdf:{path}:c4_monthly_assimilation") as src:
        assert src.crs.to_epsg() == 32740
        assert src.transform.almost_equals(TRANSFORM)
        assert src.count == 12
    with xr.open_dataset(path) as back:
        np.testing.assert_array_equal(back["c4_monthly_assimilation"].values, (monthly * 2).compute())


def test_datacube_blocks_not_on_whole_chunks_are_written_exactly(tmp_path):
    # The small chunk cache (DATACUBE_CHUNK_CACHE_BYTES) cannot hold a chunk until all its parts arrive.
    import netCDF4

    template = on_grid(np.zeros((HEIGHT, WIDTH), np.float32))
    monthly = da.random.default_rng(7).random((12, HEIGHT, WIDTH), chunks=(12, 300, 700)).astype(np.float32)
    cube = xr.Dataset({"c3_monthly_assimilation": (("month", "y", "x"), monthly)},
                      coords={"month": np.arange(1, 13), "y": template.y, "x": template.x},
                      ).rio.write_crs(CRS).rio.write_transform(TRANSFORM)
    path = write_datacube(cube, tmp_path / "cube.nc")
    with netCDF4.Dataset(path) as nc:
        variable = nc["c3_monthly_assimilation"]
        assert variable.chunking() == [1, 512, 512]
        np.testing.assert_array_equal(variable[:], monthly.compute())


DATACUBE_MEMORY_SCRIPT = """
import sys
import dask, dask.array as da, numpy as np, rioxarray, xarray as xr
from suitability.outputs import write_datacube
dask.config.set(scheduler="threads", num_workers=1)  # blocks cannot pile up behind a slow disk
size = 1536
cube = xr.Dataset({name: (("month", "y", "x"), da.zeros((12, size, size), np.float32, chunks=(12, 512, 512)) + k)
                   for k, name in enumerate(["c3_monthly_assimilation", "c4_monthly_assimilation",
                                             "monthly_crossover_temperature", "derived_water_availability"])},
                  coords={"month": np.arange(1, 13), "y": 7460000.0 - 1000.0 * (np.arange(size) + 0.5),
                          "x": 300000.0 + 1000.0 * (np.arange(size) + 0.5)}).rio.write_crs("EPSG:32740")
import netCDF4
def status(field):  # [KiB]; VmHWM is this process's own peak (ru_maxrss would start from the parent's)
    return int([line for line in open("/proc/self/status") if line.startswith(field)][0].split()[1])
before_rss = status("VmRSS")
default_cache = netCDF4.get_chunk_cache()
write_datacube(cube, sys.argv[1])
assert netCDF4.get_chunk_cache() == default_cache, "the default chunk cache was not restored"
print(status("VmHWM") - before_rss)
"""


@pytest.mark.skipif(not Path("/proc/self/status").exists(), reason="reads the peak from Linux's /proc")
def test_datacube_write_does_not_hold_written_chunks(tmp_path):
    # HDF5 keeps written chunks, uncompressed, in each variable's chunk cache until it is full or the file
    # closes (HDF5 reference manual, H5Pset_chunk_cache); netCDF-C's default cache is 64 MiB per variable
    # (netCDF4.get_chunk_cache() of the installed library). Four 12 x 1536 x 1536 float32 variables (108 MiB
    # each) would hold 4 x 64 = 256 MiB with it. Measured on one thread: 61 MiB with the 4 MiB caches,
    # 301 MiB with 64 MiB ones.
    result = subprocess.run([sys.executable, "-c", DATACUBE_MEMORY_SCRIPT, str(tmp_path / "cube.nc")],
                            capture_output=True, text=True, check=True)
    growth_mib = int(result.stdout.split()[-1]) / 1024
    assert growth_mib < 128, f"the datacube write grew the process by {growth_mib:.0f} MiB"


def test_datacube_without_crs_is_refused(tmp_path):
    cube = xr.Dataset({"c3_monthly_assimilation": (("y", "x"), np.zeros((3, 3), np.float32))})
    with pytest.raises(OutputError, match="no CRS"):
        write_datacube(cube, tmp_path / "cube.nc")
    assert our_files(tmp_path) == []


def test_manifest_is_strict_json_written_atomically(tmp_path):
    manifest = {"tool": "suitability", "outputs": {"baseline": tmp_path / "x.tif"}, "share": float("nan"),
                "count": np.int64(3), "ratio": np.float32(0.5)}
    path = write_manifest(manifest, tmp_path / "manifest.json")

    def refuse(constant):  # RFC 8259 JSON has no NaN or Infinity
        raise ValueError(constant)

    loaded = json.loads(path.read_text(encoding="utf-8"), parse_constant=refuse)
    assert loaded == {"tool": "suitability", "outputs": {"baseline": str(tmp_path / "x.tif")}, "share": None,
                      "count": 3, "ratio": 0.5}
    assert our_files(tmp_path) == ["manifest.json"]


def test_file_checksum_matches_published_sha256_vectors(tmp_path):
    # FIPS 180-2 (NIST 2002), appendix B.1, B.2 and B.3
    vectors = {
        b"abc": "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad",
        b"abcdbcdecdefdefgefghfghighijhijkijkljklmklmnlmnomnopnopq":
            "248d6a61d20638b8e5c026930c3e6039a33ce45964ff2167f6ecedd419db06c1",
        b"a" * 1_000_000: "cdc76e5c9914fb9281a1c7e284d73e67f1809a48a497200e046d39ccc7112cd0",
    }
    for message, digest in vectors.items():
        path = tmp_path / "message.bin"
        path.write_bytes(message)
        assert file_checksum(path) == digest
        assert file_checksum(path, block_size=4096) == digest  # many blocks for the long message
    # and the streamed digest of a written COG equals hashlib's one-shot digest
    cog = tmp_path / "bytes.bin"
    cog.write_bytes(os.urandom(3_000_001))
    assert file_checksum(cog, block_size=65536) == hashlib.sha256(cog.read_bytes()).hexdigest()


def test_datacube_carries_cf_attributes_and_carbon_units(tmp_path):
    # CF-1.8 (section 3.1: units, long_name): every variable of the registry gets its units and long name;
    # the month axis is labelled; carbon is named in words because UDUNITS reads "C" as the coulomb.
    monthly = np.zeros((12, 3, 3), np.float32)
    cube = xr.Dataset({"c3_monthly_assimilation": (("month", "y", "x"), monthly)},
                      coords={"month": np.arange(1, 13), "y": [2.5, 1.5, 0.5], "x": [0.5, 1.5, 2.5]})
    cube = cube.rio.write_crs("EPSG:32740")
    path = write_datacube(cube, tmp_path / "cube.nc")
    with xr.open_dataset(path) as written:
        variable = written["c3_monthly_assimilation"]
        assert variable.attrs["units"] == "g m-2" and "as carbon" in variable.attrs["long_name"]
        assert variable.attrs["comment"].startswith("g C m-2")
        assert written["month"].attrs["units"] == "1" and "month of the year" in written["month"].attrs["long_name"]
        assert written.attrs["Conventions"] == "CF-1.8" and written.attrs["title"]


def test_month_counts_are_whole_numbers_in_uint8(tmp_path):
    counts = np.array([[0, 3, 12], [np.nan, 7, 1]] * 2, dtype=np.float32)[:, :3]
    layer = xr.DataArray(counts, dims=("y", "x"), coords={"y": [3.5, 2.5, 1.5, 0.5], "x": [0.5, 1.5, 2.5]})
    layer = layer.rio.write_crs("EPSG:32740").rio.write_transform(Affine(1, 0, 0, 0, -1, 4))
    path = write_layers({"c4_favoured_months": layer}, tmp_path)["c4_favoured_months"]
    with rasterio.open(path) as src:
        assert src.dtypes[0] == "uint8" and src.nodata == 255
        values = src.read(1)
    assert values.tolist() == [[0, 3, 12], [255, 7, 1], [0, 3, 12], [255, 7, 1]]
