"""Writing results: Cloud-Optimized GeoTIFF layers, the NetCDF datacube, the run manifest.

No science here: layers arrive computed-lazily in canonical units, and are written as they are.

Layers (:func:`write_layers`)
    All layers of one call are computed in ONE dask pass (``dask.array.store`` of every source at once),
    so the physiology they share runs once. Each block goes to a pre-created tiled GeoTIFF through a
    small picklable writer that opens the file in "r+" mode for its window, under a lock per output
    (a ``distributed.Lock`` with a distributed client, else a ``dask.utils.SerializableLock``: see
    :func:`suitability.runtime.write_lock`). Then each file is converted to a COG by GDAL's COG driver
    (``rasterio.shutil.copy(driver="COG")``; half the CPU time of ``rio_cogeo.cog_translate``, which
    this replaced: 0.6 against 1.15 CPU-s for 2000² float32), validated with rio-cogeo's
    ``cog_validate(strict=True)`` and only then moved to ``<name>.tif`` with ``os.replace``. The
    conversions of all files of one call run at once
    in a thread pool (``conversion_threads``, the pipeline gives the run's worker count: GDAL releases the
    GIL while it reads, compresses and writes), and the renames start only when every one of them has
    succeeded. Until that last step everything lives in a hidden
    staging folder ``.suitability-staging-<host>-<pid>-<random>`` inside the output folder (made with
    ``tempfile.mkdtemp``: exclusive, mode 0700, unpredictable; same filesystem, so the rename is atomic;
    the COG driver's scratch file of overviews lands there too); any failure
    removes it and raises :class:`~suitability.errors.OutputError`, so a finished-looking ``<name>.tif``
    is always whole. A run that is killed leaves only its hidden staging folder, which the next write
    into that folder removes (same host, process gone).

    Float layers are float32 with NaN as nodata, predictor 3; class layers (those the registry
    :data:`suitability.variables.OUTPUT_LAYERS` marks categorical) are uint8 with nodata 255,
    predictor 2 and the registry's colour table. Tiles 512 x 512, ``BIGTIFF=IF_SAFER`` (without it, outputs
    near 4 GiB are silently truncated), DEFLATE (default) or ZSTD with a level. Overviews use the
    glossary's resampling (average for continuous, mode for classes). Band description = long name, band
    unit = canonical units, band tags ``long_name``/``units`` (plus the class legend), dataset tags = the
    caller's ``tags`` and ``OVERVIEW_RESAMPLING``; the COG driver carries them all over from the staged file.

    Class layers also get GDAL category names and a raster attribute table (class names and colours from
    the registry) in a PAM sidecar ``<name>.tif.aux.xml`` (:func:`category_pam_xml`; GeoTIFF has no tag
    for them, GDAL reads the sidecar whenever it opens the file). It is written in the staging folder after
    the COG validates and renamed just before its raster; :func:`with_sidecars` adds it to the paths the
    manifest records.

    Dask chunks that are not whole multiples of the 512 tile are rechunked before writing: partial tile
    writes make GDAL rewrite compressed tiles (files up to 60 % larger for the same pixels).

Datacube (:func:`write_datacube`): NetCDF4 with CF attributes, the CRS as a CF grid mapping (rioxarray),
    zlib compression, written chunk by chunk, under a temporary name and renamed. Given to
    :func:`write_layers` (``datacube=``), it is written in the same dask pass as the layers, so the model
    blocks both read are computed once.
Manifest (:func:`write_manifest`): JSON (strict: NaN/inf become null), written atomically.
Every file goes through :func:`suitability.atomic.atomic_write` (temporary name, then ``os.replace``).
"""

from __future__ import annotations

import hashlib
import json
import math
import os
import shutil
from collections.abc import Iterable, Mapping
from concurrent.futures import FIRST_EXCEPTION, ThreadPoolExecutor, wait
from contextlib import contextmanager
from dataclasses import dataclass
from datetime import date, datetime
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import rioxarray  # noqa: F401  (registers the .rio accessor used on layers and datasets)
import xarray as xr

from .atomic import STAGING_PREFIX, atomic_write, disk_full_hint, is_abandoned, make_private_folder, write_text_atomic
from .config import CogConfig, validate_section
from .errors import OutputError
from .runtime import compute, give_back_freed_memory, write_lock
from .variables import (
    CLASS_NODATA,
    CLASS_TRANSITION_COLOURS,
    OUTPUT_LAYERS,
    OUTPUT_VARIABLES,
    PATHWAY_CLASS_COLOURS,
)

TILE_SIZE = 512
GDAL_TIFF_OPTIONS = {"driver": "GTiff", "interleave": "pixel", "tiled": True, "blockxsize": TILE_SIZE,
                     "blockysize": TILE_SIZE, "BIGTIFF": "IF_SAFER"}

#: HDF5 chunk cache of each datacube variable while it is written [bytes]: four 512 x 512 float32 chunks.
#: netCDF-C's default, 64 MiB per variable (``netCDF4.get_chunk_cache()``), keeps written chunks there
#: uncompressed until the cache is full or the file closes: the 12 monthly variables of a 3-scenario run
#: held 0.75 GiB at 2000² cells. With blocks of ``compute.chunk_size`` 512 every write fills whole chunks,
#: so nothing is gained by keeping them. Blocks off the 512 grid are not rechunked: their chunks are read
#: back and rewritten (measured, 2 variables at 3000² in blocks of 1000: 27.2 s against 23.3 s, a 2 %
#: larger file), but rechunking raised the write's peak by 110 MiB.
DATACUBE_CHUNK_CACHE_BYTES = 4 * 2**20

#: Legends of the categorical layers (code -> label), from the registry.
CLASS_LEGENDS = {name: layer.legend for name, layer in OUTPUT_LAYERS.items() if layer.categorical}


@dataclass(frozen=True)
class CogOptions:
    """COG creation settings: compression "deflate" or "zstd", its level (None: GDAL's default; deflate
    1-9, zstd 1-22), and whether to build overviews."""

    compression: str = "deflate"
    level: int | None = None
    overviews: bool = True

    @classmethod
    def from_any(cls, options: Any) -> CogOptions:
        """From None, a CogOptions, the config's ``output.cog`` section (used as validated), or a mapping or
        object with some of its keys (checked by the same schema, ``CogConfig``). A level that is not given
        stays None (GDAL's default for the compression)."""
        if options is None or isinstance(options, CogOptions):
            return options or cls()
        checked = validate_section(CogConfig, options, "output.cog")
        given = options if isinstance(options, Mapping) else vars(options) if hasattr(options, "__dict__") else {}
        level = checked.level if isinstance(options, CogConfig) or given.get("level") is not None else None
        return cls(checked.compression, level, checked.overviews)

    def cog_driver_options(self, dtype: str, overview_count: int, resampling: str) -> dict[str, Any]:
        """Creation options of GDAL's COG driver (GDAL >= 3.6 for OVERVIEW_COUNT): the same tiles,
        compression, level and predictor as :meth:`creation_options`, and ``overview_count`` overviews
        (0: none) made with ``resampling``."""
        options = {"BLOCKSIZE": TILE_SIZE, "COMPRESS": self.compression.upper(), "BIGTIFF": "IF_SAFER",
                   "PREDICTOR": "FLOATING_POINT" if np.dtype(dtype).kind == "f" else "STANDARD",
                   "OVERVIEW_RESAMPLING": resampling.upper()}
        if self.level is not None:
            options["LEVEL"] = self.level
        if overview_count:
            options["OVERVIEW_COUNT"] = overview_count
        else:
            options["OVERVIEWS"] = "NONE"
        return options

    def creation_options(self, dtype: str) -> dict[str, Any]:
        """GDAL GTiff creation options for a band of ``dtype`` (predictor 3 floats, 2 integers)."""
        options = dict(GDAL_TIFF_OPTIONS, compress=self.compression.upper(),
                       predictor=3 if np.dtype(dtype).kind == "f" else 2)
        if self.level is not None:
            options["zlevel" if self.compression == "deflate" else "zstd_level"] = self.level
        return options


def is_class_layer(name: str) -> bool:
    """True for categorical layers (uint8 codes, colour table), as the registry marks them."""
    return OUTPUT_LAYERS[name].categorical


class BlockWriter:
    """``dask.array.store`` target: writes each block into its window of a pre-created GeoTIFF.

    Opens the file in "r+" mode per block (nothing unpicklable is kept, so it travels to distributed
    workers) and holds ``lock`` meanwhile, because two handles updating one TIFF would corrupt it.
    """

    def __init__(self, path: str, lock=None):
        self.path = str(path)
        self.lock = lock

    def __setitem__(self, index: tuple[slice, slice], block: np.ndarray) -> None:
        import rasterio
        from rasterio.windows import Window

        rows, cols = index
        window = Window(cols.start, rows.start, cols.stop - cols.start, rows.stop - rows.start)
        if self.lock:
            self.lock.acquire()
        try:
            with rasterio.open(self.path, "r+") as dst:
                dst.write(block, 1, window=window)
        except rasterio.errors.RasterioError as error:
            raise OutputError(
                f"{self.path}: cannot write block {window}: {error}{disk_full_hint(error, Path(self.path).parent)}"
            ) from error
        finally:
            if self.lock:
                self.lock.release()


def check_output_folder(folder, names: Iterable[str] = (), overwrite: bool = False) -> Path:
    """Make sure ``folder`` exists and is writable, and that no output in ``names`` would be replaced.

    names: file names relative to ``folder`` (may include sub-folders, e.g. "baseline/pathway_class.tif").
    Raises OutputError naming the folder when it cannot be created or written, or listing the existing
    outputs when ``overwrite`` is False. Returns the folder as a Path.
    """
    folder = Path(folder)
    existing = sorted(str(folder / name) for name in names if (folder / name).exists())
    if existing and not overwrite:
        raise OutputError(
            f"{len(existing)} output(s) already exist and overwrite is off: {', '.join(existing)}; "
            "set output.overwrite: true (or --overwrite) to replace them, or choose another output.folder"
        )
    subfolders = {folder / Path(name).parent for name in names} | {folder}
    for path in sorted(subfolders):
        if path != folder and path.is_symlink():
            raise OutputError(f"{path}: is a symbolic link; the tool does not write through links inside the output "
                              "folder. Remove it (or point output.folder at the real folder)")
        try:
            path.mkdir(parents=True, exist_ok=True)
            make_private_folder(path).rmdir()  # proves the folder is writable; named with the tool's marker
        except OSError as error:
            raise OutputError(f"output folder {path} cannot be created or written: {error}") from error
    return folder


def write_layers(layers: Mapping[str, xr.DataArray], folder, *, tags: Mapping[str, Any] | None = None,
                 cog_options: Any = None, lock=None, datacube: xr.Dataset | None = None,
                 datacube_path=None, conversion_threads: int | None = None) -> dict[str, Path]:
    """Compute all ``layers`` in one dask pass and write each as a validated COG ``<folder>/<name>.tif``.

    datacube, datacube_path: a Dataset written as :func:`write_datacube` writes it, in the SAME dask pass
    (the model blocks the layers and the datacube share are computed once), renamed onto ``datacube_path``
    after the layers; the returned mapping then also has ``"datacube"``.

    layers: name (a key of OUTPUT_VARIABLES) -> (y, x) DataArray, dask-backed or not, with a CRS written by
        rioxarray, all on one grid. Class layers: integer codes (or floats with NaN as nodata).
    tags: dataset tags for every file (scenario, co2_ppm, config_hash, tool version, ...).
    cog_options: CogOptions, a mapping or the config's ``output.cog`` object.
    lock: None (a lock per file, chosen for the active scheduler), one lock shared by all files, or a
        callable ``name -> lock``.
    conversion_threads: how many files are converted to COGs at once (None: one per core of this machine).
    Returns name -> final path. An existing ``<name>.tif`` is replaced (call :func:`check_output_folder`
    first to refuse that). Raises OutputError (naming the file or folder) on any failure, leaving no
    ``<name>.tif`` of this call (earlier files untouched) and no temporary file behind.
    """
    return write_together([LayerWrite(layers, folder, tags=tags, cog_options=cog_options, lock=lock,
                                      datacube=datacube, datacube_path=datacube_path)],
                          conversion_threads=conversion_threads)[0]


@dataclass
class LayerWrite:
    """The layers (and datacube) of one folder to write; the arguments of :func:`write_layers`."""

    layers: Mapping[str, xr.DataArray]
    folder: Any
    tags: Mapping[str, Any] | None = None
    cog_options: Any = None
    lock: Any = None
    datacube: xr.Dataset | None = None
    datacube_path: Any = None


def write_together(writes: list[LayerWrite], *, conversion_threads: int | None = None) -> list[dict[str, Path]]:
    """:func:`write_layers` for several folders in ONE dask pass (the scenarios and members of a run share
    their model blocks, :func:`suitability.model.evaluate_runs`); returns each write's name -> path.

    Nothing of any write gets its final name before every file of every write has been computed and
    converted to a validated COG: a failure leaves no file of this call (earlier files untouched) and no
    temporary file behind. conversion_threads: COG conversions at once, over all writes (None: one per
    core of this machine).
    """
    for write in writes:  # bad arguments are the caller's error (ConfigError, OutputError), raised as such
        if not write.layers:
            raise OutputError(f"no layers given to write into {write.folder}")
        CogOptions.from_any(write.cog_options)
    staged = []
    try:
        for write in writes:
            staged.append(_Staged.of(write))
        stored = [store for stage in staged for store in stage.stores]
        try:
            compute(*stored)
        except OutputError:
            raise
        except Exception as error:
            names = ", ".join(f"{Path(stage.folder).name}/{n}.tif" for stage in staged for n in stage.paths)
            folders = ", ".join(str(stage.folder) for stage in staged)
            raise OutputError(
                f"computing {names} for {folders} failed, nothing was written: "
                f"{type(error).__name__}: {error}{disk_full_hint(error, Path(staged[0].folder))}"
            ) from error
        give_back_freed_memory()  # the pass's blocks are written; GDAL's conversions allocate anew
        finals = _convert_all(staged, conversion_threads or os.cpu_count() or 1)
        sidecars = [stage.category_sidecars(cogs) for stage, cogs in zip(staged, finals)]
        return [stage.give_final_names(cogs, names) for stage, cogs, names in zip(staged, finals, sidecars)]
    except OutputError:
        raise
    except Exception as error:
        folder = staged[-1].folder if staged else writes[0].folder
        raise OutputError(
            f"writing layers into {folder} failed: {type(error).__name__}: {error}{disk_full_hint(error, Path(folder))}"
        ) from error
    finally:
        for stage in staged:
            shutil.rmtree(stage.staging, ignore_errors=True)


@dataclass
class _Staged:
    """One write's temporary files in a private staging folder, the dask stores that fill them, and the
    steps that give them their final names."""

    folder: Path
    staging: Path
    paths: dict
    options: CogOptions
    stores: list
    datacube_path: Path | None = None
    staged_cube: Path | None = None

    @classmethod
    def of(cls, write: LayerWrite) -> "_Staged":
        import dask.array as da

        options = CogOptions.from_any(write.cog_options)
        folder = check_output_folder(write.folder, overwrite=True)
        grid = _common_grid(write.layers, folder)
        _remove_abandoned_staging(folder)
        staging = make_private_folder(folder, STAGING_PREFIX)
        try:  # until the caller holds the stage, the staging folder is ours to remove (an interrupt, say)
            stage = cls(folder, staging, {}, options, [])
            sources, targets = [], []
            for name, layer in write.layers.items():
                stage.paths[name] = staging / f".{name}.tmp-{os.getpid()}.tif"
                source = _as_tiled_dask(name, layer, da)
                _create_tiled_geotiff(stage.paths[name], name, source.dtype, grid, write.tags or {}, options)
                sources.append(source)
                targets.append(BlockWriter(stage.paths[name], _lock_for(name, write.lock, stage.paths[name])))
            stored = da.store(sources, targets, lock=False, compute=False)
            stage.stores = list(stored) if isinstance(stored, (tuple, list)) else [stored]
            if write.datacube is not None:
                stage.datacube_path = Path(write.datacube_path)
                stage.staged_cube = staging / f".{stage.datacube_path.name}.tmp-{os.getpid()}"
                stage.stores.append(_datacube_writer(write.datacube, stage.datacube_path, stage.staged_cube))
            return stage
        except BaseException:
            shutil.rmtree(staging, ignore_errors=True)
            raise

    def category_sidecars(self, finals: Mapping[str, Path]) -> dict[str, Path]:
        """The PAM sidecar of each converted class layer, written beside it in the staging folder."""
        return {name: write_category_sidecar(name, path) for name, path in finals.items() if is_class_layer(name)}

    def give_final_names(self, finals: Mapping[str, Path], sidecars: Mapping[str, Path]) -> dict[str, Path]:
        """Move the validated COGs ``finals`` (and their ``sidecars``, and the datacube) onto their final names."""
        written = {}
        for name, path in finals.items():
            written[name] = self.folder / f"{name}.tif"
            # The sidecar goes first: a run killed between the two renames leaves a sidecar without its
            # raster (the layer counts as missing), never a class raster without its names.
            if name in sidecars:
                os.replace(sidecars[name], pam_sidecar_path(written[name]))
            os.replace(path, written[name])
        if self.staged_cube is not None:
            written["datacube"] = self.datacube_path
            os.replace(self.staged_cube, written["datacube"])
        return written


def _convert_all(staged: list[_Staged], threads: int) -> list[dict[str, Path]]:
    """Every computed file of every stage converted to a validated COG (:func:`_to_validated_cog`), up to
    ``threads`` at once; per stage, name -> COG path in its staging folder.

    On the first failure (or an interrupt) the conversions not yet started are cancelled and the running
    ones are waited for before the error is raised: the caller then removes the staging folders, which no
    thread may still be writing into. The error raised is that of the first failed file in call order.
    """
    jobs = [(stage, name, path) for stage in staged for name, path in stage.paths.items()]
    if threads <= 1 or len(jobs) <= 1:  # in this thread: tracebacks and interrupts as without a pool
        cogs = [_to_validated_cog(path, name, stage.options) for stage, name, path in jobs]
    else:
        pool = ThreadPoolExecutor(max_workers=min(threads, len(jobs)), thread_name_prefix="cog")
        try:
            futures = [pool.submit(_to_validated_cog, path, name, stage.options) for stage, name, path in jobs]
            wait(futures, return_when=FIRST_EXCEPTION)
        finally:
            pool.shutdown(wait=True, cancel_futures=True)
        failed = next((f for f in futures if not f.cancelled() and f.exception() is not None), None)
        if failed is not None:
            raise failed.exception()
        cogs = [future.result() for future in futures]
    in_order = iter(cogs)  # jobs are listed stage by stage, name by name
    return [{name: next(in_order) for name in stage.paths} for stage in staged]


#: GDAL's Persistent Auxiliary Metadata (PAM) sidecar of a raster: ``<file name>.aux.xml`` beside it.
PAM_SUFFIX = ".aux.xml"
# GDALRATFieldType and GDALRATFieldUsage codes as GDAL serialises them in a PAM raster attribute table
# (gdal.h; GDALRasterAttributeTable C++ API, https://gdal.org/en/stable/api/gdalrasterattributetable_cpp.html).
_RAT_INTEGER, _RAT_STRING = 0, 2
_RAT_MINMAX, _RAT_NAME, _RAT_RED, _RAT_GREEN, _RAT_BLUE = 5, 2, 6, 7, 8


def pam_sidecar_path(raster) -> Path:
    """``x.tif`` -> ``x.tif.aux.xml``: where GDAL looks for a raster's PAM sidecar."""
    raster = Path(raster)
    return raster.with_name(raster.name + PAM_SUFFIX)


def category_pam_xml(name: str) -> str:
    """The PAM sidecar (``<PAMDataset>``) of the class layer ``name``: GDAL category names and a thematic
    raster attribute table (Value, Class name, Red, Green, Blue) from the registry's legend and colours.

    GeoTIFF has no tag for either and rasterio cannot set them, so they go where GDAL itself keeps them
    for a GeoTIFF: the ``.aux.xml`` sidecar, which GDAL reads whenever it opens the file. Category names
    are a list indexed by pixel value (GDALRasterBand::GetCategoryNames), so codes without a class (0, the
    gaps between transition codes) get an empty name; nodata (255) gets none. Written by hand with the
    standard library because rasterio exposes neither API and the GDAL Python bindings are not a
    dependency; tests/test_outputs.py has GDAL read it back.
    """
    import xml.etree.ElementTree as ET

    layer = OUTPUT_LAYERS[name]
    if not layer.categorical:
        raise ValueError(f"{name!r} is not a class layer; only class layers get category names")
    legend = dict(sorted(layer.legend.items()))
    dataset = ET.Element("PAMDataset")
    band = ET.SubElement(dataset, "PAMRasterBand", band="1")
    categories = ET.SubElement(band, "CategoryNames")
    for code in range(max(legend) + 1):
        ET.SubElement(categories, "Category").text = legend.get(code, "")
    table = ET.SubElement(band, "GDALRasterAttributeTable", tableType="thematic")
    fields = [("Value", _RAT_INTEGER, _RAT_MINMAX), ("Class name", _RAT_STRING, _RAT_NAME),
              ("Red", _RAT_INTEGER, _RAT_RED), ("Green", _RAT_INTEGER, _RAT_GREEN), ("Blue", _RAT_INTEGER, _RAT_BLUE)]
    for index, (field, kind, usage) in enumerate(fields):
        definition = ET.SubElement(table, "FieldDefn", index=str(index))
        ET.SubElement(definition, "Name").text = field
        ET.SubElement(definition, "Type").text = str(kind)
        ET.SubElement(definition, "Usage").text = str(usage)
    for row_index, (code, label) in enumerate(legend.items()):
        row = ET.SubElement(table, "Row", index=str(row_index))
        red, green, blue = layer.colours[code][:3]
        for value in (code, label, red, green, blue):
            ET.SubElement(row, "F").text = str(value)
    ET.indent(dataset)
    return ET.tostring(dataset, encoding="unicode") + "\n"


def write_category_sidecar(name: str, raster) -> Path:
    """Write :func:`category_pam_xml` of ``name`` beside ``raster`` (atomically); return the sidecar's path."""
    return write_text_atomic(pam_sidecar_path(raster), category_pam_xml(name), what="the category names")


def with_sidecars(paths: Mapping[str, Path]) -> dict[str, Path]:
    """``paths`` (name -> written file) plus ``<name>.aux.xml`` -> the PAM sidecar of each that has one, so
    that the manifest and the resume records list (and check) the sidecars with their rasters."""
    found = dict(paths)
    for name, path in paths.items():
        sidecar = pam_sidecar_path(path)
        if sidecar.is_file():
            found[f"{name}{PAM_SUFFIX}"] = sidecar
    return found


def write_datacube(ds: xr.Dataset, path) -> Path:
    """Write ``ds`` to NetCDF4 at ``path``: CF attributes, CRS as grid mapping, zlib, chunk by chunk, atomic.

    ds: data variables on (…, y, x) with a CRS (rioxarray). Variables of the registry OUTPUT_LAYERS get its
    long name and units where they have none. Returns the path.
    """
    path = Path(path)
    check_output_folder(path.parent, overwrite=True)

    def write(temporary: Path) -> None:
        compute(_datacube_writer(ds, path, temporary))

    return atomic_write(path, write, what="the datacube")


def _datacube_writer(ds: xr.Dataset, path: Path, temporary: Path):
    """The delayed NetCDF write of :func:`write_datacube` into ``temporary`` (``path`` names it in errors)."""
    crs = ds.rio.crs
    if crs is None:
        raise OutputError(f"{path}: the datacube has no CRS; write one with .rio.write_crs() first")
    ds = ds.copy()
    for name, variable in ds.data_vars.items():
        known = OUTPUT_LAYERS.get(str(name))
        if known is not None:
            variable.attrs.setdefault("long_name", known.long_name)
            variable.attrs.setdefault("units", known.units)
            if known.display_units and known.display_units != known.units:
                variable.attrs.setdefault("comment", f"{known.display_units}: the CF units string {known.units!r} "
                                                     "cannot name the element; the values are mass of carbon")
        variable.attrs.pop("grid_mapping", None)
    ds = ds.rio.write_crs(crs).rio.write_coordinate_system()
    grid_mapping = ds.rio.grid_mapping
    for variable in ds.data_vars.values():
        # an explicit to_netcdf encoding replaces the variable's own, so the link goes in the attributes
        variable.encoding.pop("grid_mapping", None)
        if variable.name != grid_mapping:
            variable.attrs["grid_mapping"] = grid_mapping
    ds.attrs.setdefault("Conventions", "CF-1.8")
    ds.attrs.setdefault("title", "Monthly potential canopy net assimilation of a C3 and a C4 crop canopy")
    ds.attrs.setdefault("source", "suitability: C3 and C4 leaf models scaled to the canopy, per grid cell and month")
    if "month" in ds.coords:
        ds["month"].attrs.setdefault("long_name", "month of the year (1 January ... 12 December)")
        ds["month"].attrs.setdefault("units", "1")
    ds.attrs = {key: _netcdf_attribute(value) for key, value in ds.attrs.items()}
    for variable in ds.data_vars.values():
        variable.attrs.update({key: _netcdf_attribute(value) for key, value in variable.attrs.items()})
    encoding = {name: _netcdf_encoding(variable) for name, variable in ds.data_vars.items()}
    # CF coordinate variables carry no fill value (xarray would add NaN to float x/y).
    encoding.update({name: {"_FillValue": None} for name, coord in ds.coords.items()
                     if coord.dtype.kind == "f" and name in ds.dims})
    with _netcdf_chunk_cache(DATACUBE_CHUNK_CACHE_BYTES):  # taken by each variable as the file is created
        return ds.to_netcdf(temporary, engine="netcdf4", format="NETCDF4", encoding=encoding, compute=False)


@contextmanager
def _netcdf_chunk_cache(size_bytes: int):
    """netCDF-C's default chunk cache set to ``size_bytes`` meanwhile (files opened and variables created
    then keep it), then back to what it was."""
    import netCDF4

    previous = netCDF4.get_chunk_cache()
    netCDF4.set_chunk_cache(size_bytes, previous[1], previous[2])
    try:
        yield
    finally:
        netCDF4.set_chunk_cache(*previous)


def write_manifest(manifest: Mapping[str, Any], path) -> Path:
    """Write ``manifest`` as strict JSON (RFC 8259: NaN and infinities become null) atomically; return the path."""
    path = Path(path)
    check_output_folder(path.parent, overwrite=True)
    text = json.dumps(_json_ready(manifest), indent=2, ensure_ascii=False, allow_nan=False)
    return write_text_atomic(path, text + "\n", what="the manifest", sync=True)


def file_checksum(path, block_size: int = 1 << 20) -> str:
    """SHA-256 of a file as hex, read in blocks of ``block_size`` bytes (files of any size)."""
    digest = hashlib.sha256()
    with open(path, "rb") as handle:
        while chunk := handle.read(block_size):
            digest.update(chunk)
    return digest.hexdigest()


# --- helpers -------------------------------------------------------------------------------------------

@dataclass(frozen=True)
class _Grid:
    crs: Any
    transform: Any
    height: int
    width: int


def _common_grid(layers: Mapping[str, xr.DataArray], folder: Path) -> _Grid:
    first_name, first = next(iter(layers.items()))
    grid = None
    for name, layer in layers.items():
        where = f"{folder / (name + '.tif')}"
        if name not in OUTPUT_VARIABLES:
            raise OutputError(f"{where}: {name!r} is not an output layer; expected one of {list(OUTPUT_VARIABLES)}")
        if tuple(layer.dims) != ("y", "x"):
            raise OutputError(f"{where}: layer {name!r} has dims {tuple(layer.dims)}, expected ('y', 'x')")
        if layer.rio.crs is None:
            raise OutputError(f"{where}: layer {name!r} has no CRS; write one with .rio.write_crs()")
        this = _Grid(layer.rio.crs, layer.rio.transform(), *layer.shape)
        if grid is None:
            grid = this
        elif this != grid or not (np.array_equal(layer.x, first.x) and np.array_equal(layer.y, first.y)):
            raise OutputError(
                f"{where}: layer {name!r} is not on the grid of {first_name!r} (CRS, transform or coords differ)"
            )
    return grid


def _as_tiled_dask(name: str, layer: xr.DataArray, da):
    data = layer.data
    if not isinstance(data, da.Array):
        data = da.from_array(np.asarray(data), chunks=TILE_SIZE, name=False)
    if is_class_layer(name):
        data = data.map_blocks(_class_codes, name, dtype=np.uint8)
    elif OUTPUT_LAYERS[name].integer:
        data = data.map_blocks(_whole_counts, dtype=np.uint8)
    else:
        data = data.astype(np.float32)
    aligned = tuple(_tile_aligned(axis_chunks) for axis_chunks in data.chunks)
    return data if aligned == data.chunks else data.rechunk(aligned)


def _tile_aligned(axis_chunks: tuple[int, ...]) -> tuple[int, ...] | int:
    if all(c % TILE_SIZE == 0 for c in axis_chunks[:-1]):
        return axis_chunks
    return max(TILE_SIZE, axis_chunks[0] // TILE_SIZE * TILE_SIZE)


def _whole_counts(block: np.ndarray) -> np.ndarray:
    """Counts (months) as uint8, NaN -> 255; the model's counts are whole numbers held in floats."""
    values = np.asarray(block, dtype="float64")
    return np.where(np.isnan(values), CLASS_NODATA, np.rint(values)).astype(np.uint8)


def _class_codes(block: np.ndarray, name: str) -> np.ndarray:
    """Class codes as uint8 (NaN -> 255); codes outside the layer's legend are an error, not a colour."""
    values = np.asarray(block)
    if values.dtype.kind == "f":
        values = np.where(np.isnan(values), CLASS_NODATA, values)
    allowed = np.array(sorted(CLASS_LEGENDS[name]) + [CLASS_NODATA])
    bad = ~np.isin(values, allowed)
    if bad.any():
        raise ValueError(f"layer {name!r} holds codes {np.unique(values[bad])[:5].tolist()} outside {allowed.tolist()}")
    return values.astype(np.uint8)


def write_csv(table, path) -> Path:
    """Write a pandas table as CSV (UTF-8, no index) atomically: temporary name, then os.replace.

    Text cells (and column names) that a spreadsheet would run as a formula are neutralised first
    (:func:`spreadsheet_safe`)."""
    safe = table.copy()
    safe.columns = [spreadsheet_safe(c) for c in safe.columns]
    for column in safe.columns:
        if safe[column].dtype == object or str(safe[column].dtype) in ("string", "str"):
            safe[column] = safe[column].map(spreadsheet_safe)
    return atomic_write(path, lambda temporary: safe.to_csv(temporary, index=False, encoding="utf-8"),
                        what="the table")


def write_data_dictionary(columns: Mapping[str, str], path) -> Path:
    """Write the data dictionary of a CSV beside it (``<name>.columns.csv``): one row per column with its
    meaning and its units, the text in the last [brackets] of the meaning ("" when it has none)."""
    import re

    rows = pd.DataFrame({"column": list(columns), "meaning": list(columns.values())})
    rows["units"] = [next(iter(re.findall(r"\[([^\]]+)\]", m)[-1:]), "") for m in rows["meaning"]]
    return write_csv(rows, path)


def dictionary_path(csv_path) -> Path:
    """``x.csv`` -> ``x.columns.csv``: where :func:`write_data_dictionary` puts a table's dictionary."""
    csv_path = Path(csv_path)
    return csv_path.with_name(csv_path.stem + ".columns.csv")


# First characters that make a spreadsheet read a cell as a formula (or a DDE command).
_FORMULA_START = ("=", "+", "-", "@", "\t", "\r")


def spreadsheet_safe(value):
    """``value`` made inert for spreadsheets: text starting with ``= + - @``, a tab or a carriage return
    gets a leading apostrophe (the CSV-injection guidance of OWASP, "CSV Injection"); other values are
    returned unchanged (numbers, including negative ones, stay numbers)."""
    if isinstance(value, str) and value.startswith(_FORMULA_START):
        return "'" + value
    return value


def remove_leftovers(folder, subfolders: Iterable[str] = ("brief",)) -> list[Path]:
    """Remove what killed runs of this tool left in ``folder`` and in its ``subfolders`` (names of the
    scenario folders and ``brief``: the folders the tool writes into; no others are looked at).

    Call only while holding the folder's :class:`~suitability.runlock.RunLock`: then no other run is
    writing here. Removed: only folders that carry the tool's marker (``.suitability-tmp-<host>-<pid>-*``,
    ``.suitability-staging-<host>-<pid>-*``), that are real folders owned by this user, and whose process
    no longer exists on this host (:func:`suitability.atomic.is_abandoned`). Files the tool did not create
    (a user's ``.notes.tmp``, say) are never touched. Returns the removed paths.
    """
    folder = Path(folder)
    removed = []
    parents = [folder] + [folder / name for name in subfolders]
    for parent in parents:
        if parent.is_symlink() or not parent.is_dir():
            continue
        removed += _remove_abandoned_staging(parent)
    return removed


def _remove_abandoned_staging(folder: Path) -> list[Path]:
    """Remove the marked temporary folders in ``folder`` of processes of this host that no longer exist."""
    removed = []
    for path in folder.glob(".suitability-*"):
        if is_abandoned(path):
            shutil.rmtree(path, ignore_errors=True)
            removed.append(path)
    return removed


def _lock_for(name: str, lock, path: Path):
    if lock is None:
        return write_lock(f"{path.parent.name}-{name}")  # the staging folder's name is unique per call
    if callable(lock) and not hasattr(lock, "acquire"):
        return lock(name)
    return lock


def _create_tiled_geotiff(path: Path, name: str, dtype, grid: _Grid, tags: Mapping[str, Any], options: CogOptions):
    import rasterio
    from rasterio.enums import ColorInterp

    variable = OUTPUT_LAYERS[name]
    categorical = variable.categorical
    profile = dict(options.creation_options(dtype), width=grid.width, height=grid.height, count=1,
                   dtype=np.dtype(dtype).name, crs=grid.crs, transform=grid.transform,
                   nodata=CLASS_NODATA if categorical or variable.integer else np.nan, SPARSE_OK=True)
    with rasterio.open(path, "w", **profile) as dst:
        # The overview resampling as a dataset tag, as GDAL's COG driver does not record it.
        dst.update_tags(**{str(key): _tag_text(value) for key, value in tags.items()},
                        OVERVIEW_RESAMPLING=variable.resampling.upper())
        dst.set_band_description(1, variable.long_name)
        dst.set_band_unit(1, variable.readable_units)
        band_tags = {"long_name": variable.long_name, "units": variable.readable_units}
        if categorical:
            band_tags.update({f"class_{code}": label for code, label in CLASS_LEGENDS[name].items()})
            dst.colorinterp = [ColorInterp.palette]
            dst.write_colormap(1, variable.colours)
        dst.update_tags(1, **band_tags)


def overview_levels(width: int, height: int) -> int:
    """How many overviews (each halving) a COG of ``width`` x ``height`` cells gets: rasterio's default
    (halve while the shorter side stays above one tile), but at least one when either side is longer
    than a tile, as the COG validator requires (a 1024 x 256 strip has no overview by the default alone
    and is refused)."""
    from rasterio.rio.overview import get_maximum_overview_level

    return max(get_maximum_overview_level(width, height, minsize=TILE_SIZE), int(max(width, height) > TILE_SIZE))


def _to_validated_cog(tiled: Path, name: str, options: CogOptions) -> Path:
    import rasterio
    from rio_cogeo.cogeo import cog_validate

    variable = OUTPUT_LAYERS[name]
    cog = tiled.with_name(tiled.name.replace(".tmp-", ".cog-"))
    with rasterio.open(tiled) as src:
        dtype, width, height = src.dtypes[0], src.width, src.height
    levels = overview_levels(width, height) if options.overviews else 0
    try:
        _cog_copy(tiled, cog, options.cog_driver_options(dtype, levels, variable.resampling))
    except Exception as error:
        raise OutputError(
            f"{tiled.parent.parent / (name + '.tif')}: COG conversion failed: {error}{disk_full_hint(error, tiled.parent.parent)}"
        ) from error
    # Without overviews the validator's only warning ("recommended to include internal overviews") is expected.
    valid, errors, warnings = cog_validate(cog, strict=options.overviews, quiet=True)
    if not valid:
        raise OutputError(f"{tiled.parent.parent / (name + '.tif')}: not a valid COG: {errors + warnings}")
    return cog


def _cog_copy(source: Path, destination: Path, creation_options: Mapping[str, Any]) -> None:
    """GDAL's COG driver: ``source`` (the staged tiled GeoTIFF, whose tags, band description, units, nodata
    and colour table it carries over) copied to ``destination`` as a COG, overviews computed on the way."""
    from rasterio.shutil import copy

    copy(source, destination, driver="COG", **creation_options)


def _tag_text(value: Any) -> str:
    if isinstance(value, str):
        return value
    return json.dumps(_json_ready(value)) if isinstance(value, (dict, list, tuple)) else str(value)


def _netcdf_attribute(value: Any):
    if isinstance(value, (str, int, float, np.number, np.ndarray)) and not isinstance(value, bool):
        return value
    return _tag_text(value)


def _netcdf_encoding(variable: xr.DataArray) -> dict[str, Any]:
    encoding: dict[str, Any] = {"zlib": True, "complevel": 4, "shuffle": True}
    spatial = {"y": TILE_SIZE, "x": TILE_SIZE}
    encoding["chunksizes"] = tuple(min(spatial.get(str(d), 1), n) for d, n in zip(variable.dims, variable.shape))
    if variable.dtype.kind == "f":
        encoding["_FillValue"] = np.nan
    elif variable.dtype == np.uint8:
        encoding["_FillValue"] = np.uint8(CLASS_NODATA)
    return encoding


def _json_ready(value: Any):
    if isinstance(value, Mapping):
        return {str(k): _json_ready(v) for k, v in value.items()}
    if isinstance(value, (list, tuple, set)):
        return [_json_ready(v) for v in value]
    if isinstance(value, Path):
        return str(value)
    if isinstance(value, (datetime, date)):
        return value.isoformat()
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, np.ndarray):
        return _json_ready(value.tolist())
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if value is None or isinstance(value, (str, int, float, bool)):
        return value
    return str(value)


__all__ = [
    "write_layers",
    "write_category_sidecar",
    "category_pam_xml",
    "pam_sidecar_path",
    "with_sidecars",
    "PAM_SUFFIX",
    "write_datacube",
    "write_manifest",
    "file_checksum",
    "check_output_folder",
    "write_csv",
    "spreadsheet_safe",
    "remove_leftovers",
    "disk_full_hint",
    "CogOptions",
    "BlockWriter",
    "is_class_layer",
    "PATHWAY_CLASS_COLOURS",
    "CLASS_TRANSITION_COLOURS",
    "CLASS_LEGENDS",
]
