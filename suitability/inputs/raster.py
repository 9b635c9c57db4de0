"""The GeoTIFF reader (any single-file GDAL raster): one band for a static layer, 12 bands (January first)
for a monthly layer, or ``band:`` to pick one band. Read lazily with
``rioxarray.open_rasterio(masked=True, lock=False, cache=False)``, chunked by
:func:`.native.guarded_chunk` (read failures name the file and layer).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import rioxarray
import xarray as xr

from ..errors import InputDataError
from .native import MONTHS, Native, guarded_chunk, keep_spatial


def read_raster(name: str, path: Path, *, band: int | None = None, variable: str | None = None,
                nodata: float | None = None, monthly: bool = False, chunk: int = 512) -> Native:
    """Open a raster layer lazily (see the module docstring); ``variable`` is NetCDF's and not used here."""
    import rasterio
    from rasterio.errors import RasterioIOError

    try:
        with rasterio.open(path) as src:
            count, crs, transform, driver = src.count, src.crs, src.transform, src.driver
            units = [u or src.tags(i + 1).get("units") for i, u in enumerate(src.units)]
            file_units = units[(band or 1) - 1] if (band or 1) <= count else None
            file_units = file_units or src.tags().get("units")
            scales, offsets = list(src.scales), list(src.offsets)
    except RasterioIOError as exc:
        raise InputDataError(f"{path}: cannot open layer {name!r} as a raster ({exc}); expected a readable GeoTIFF") from None
    if crs is None:
        raise InputDataError(f"{path}: layer {name!r} has no CRS; expected a georeferenced GeoTIFF (set the CRS with gdal_edit.py -a_srs or rasterio)")
    if transform.b != 0 or transform.d != 0:
        raise InputDataError(f"{path}: layer {name!r} is on a rotated grid; expected a north-up raster")
    if band is not None and band > count:
        raise InputDataError(f"{path}: layer {name!r} asks for band {band} but the file has {count} band(s)")
    if band is None and monthly and count != 12:
        raise InputDataError(f"{path}: layer {name!r} is monthly: expected 12 bands (January to December) or a {{month}} pattern path, found {count} band(s)")
    if band is None and not monthly and count != 1:
        raise InputDataError(f"{path}: layer {name!r} is static: expected 1 band or 'band:' to choose one, found {count} bands")
    try:
        # Opened without dask (cache=False: nothing is kept in memory), then chunked through GuardedRead so
        # that a read failure while computing names this file and layer.
        lazy = rioxarray.open_rasterio(path, masked=nodata is None, lock=False, cache=False)
    except Exception as exc:  # noqa: BLE001 - report any reader failure with the file name
        raise InputDataError(f"{path}: cannot read layer {name!r} ({exc})") from None
    data = guarded_chunk(lazy, {"band": -1, "y": chunk, "x": chunk}, f"{path}: layer {name!r}")
    if nodata is not None:
        data = data.where(data != np.asarray(nodata).astype(data.dtype))
    # The file's own scale and offset (GDAL band metadata, e.g. int16 water in hundredths with scale 0.01):
    # value = stored * scale + offset, applied per band.
    transformations = []
    if any(s != 1.0 for s in scales) or any(o != 0.0 for o in offsets):
        scale = xr.DataArray(np.asarray(scales, dtype="float64"), dims="band")
        offset = xr.DataArray(np.asarray(offsets, dtype="float64"), dims="band")
        data = (data.astype("float64") * scale + offset).astype("float32")
        shown = sorted({(s, o) for s, o in zip(scales, offsets)})
        transformations.append("applied the file's " + "; ".join(f"scale {s:g} and offset {o:g}" for s, o in shown))
    if band is not None:
        data = data.isel(band=band - 1, drop=True)
    elif monthly:
        data = data.rename(band="month").assign_coords(month=list(MONTHS))
    else:
        data = data.isel(band=0, drop=True)
    data, flipped = keep_spatial(data), _flips(transform)
    return Native(data, driver, file_units, tuple(transformations + flipped))


def _flips(transform) -> list[str]:
    flips = []
    if transform.e > 0:
        flips.append("rows flipped to north-up (the file is stored south-up)")
    if transform.a < 0:
        flips.append("columns flipped to west-to-east")
    return flips
