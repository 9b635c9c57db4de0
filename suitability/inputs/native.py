"""A layer as a reader returns it, before units are converted: what every reader has in common."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
import xarray as xr
from xarray.backends import BackendArray
from xarray.core import indexing

#: The months of a monthly layer, January first.
MONTHS = tuple(range(1, 13))


@dataclass
class Native:
    """A layer as read: values in the declared units, nodata NaN, on its own grid, plus what we learnt.

    data: lazy DataArray with dims (month, y, x) or (y, x), north-up, the CRS written (rioxarray), dask-backed;
        a reader may return a multi-year series as (time, y, x) with a decoded ``time`` coordinate, lazy
        without dask (:func:`guarded_lazy`), which :func:`suitability.inputs.readers.read_native` turns
        into the monthly climatology, still lazy without dask (the layer is chunked once it is checked).
    driver: the format's name as reported to the user ("GTiff", "netCDF", "Zarr", ...).
    file_units: the file's ``units`` attribute, None if it has none.
    time: what the time axis was and which years were used (:class:`.periods.TimeInfo`), None if the
        layer came as 12 months or is static.
    """

    data: xr.DataArray
    driver: str
    file_units: str | None
    #: What the reader did to the values or coordinates on reading (scale and offset applied, longitudes
    #: wrapped, axes flipped), in words; ``check`` lists them.
    transformations: tuple[str, ...] = ()
    time: Any = None
    #: The file variable the layer was read from, with its CF standard_name if it has one (NetCDF/Zarr:
    #: "tasmin (air_temperature)"); None for formats without named variables.
    variable: str | None = None

    @property
    def sample_width(self) -> int:
        """Side of the windows of the checks' sample (:func:`.checks.sample_width`): narrower for a series."""
        from .checks import sample_width

        return sample_width(self.time.time_steps if self.time is not None and self.time.steps != "climatology" else None)


def keep_spatial(data: xr.DataArray) -> xr.DataArray:
    """North-up and west-to-east order, only x/y/month (and the CRS) as coordinates."""
    crs = data.rio.crs
    if data["y"].values[-1] > data["y"].values[0]:
        data = data.isel(y=slice(None, None, -1))
    if data["x"].values[-1] < data["x"].values[0]:
        data = data.isel(x=slice(None, None, -1))
    data = data.drop_vars([c for c in data.coords if c not in ("x", "y", "month", "time", "member")])
    data = data.rio.write_crs(crs)
    for dim in ("x", "y"):
        data[dim].attrs = {}
    return data


class GuardedRead:
    """A lazily opened DataArray as ``dask.array.from_array`` takes it: each block is read on its own, and
    a failure while reading (a damaged tile or chunk the sample checks did not touch) becomes an
    InputDataError naming the file and the layer, so that it is reported as an input problem (exit 3).

    nodata: a value that becomes NaN as it is read (the values are promoted to a float type as xarray's
    ``where`` would); masking here rather than in a dask step after the read keeps slices of the layer
    reading only their own window."""

    def __init__(self, lazy: xr.DataArray, where: str, nodata: float | None = None):
        self.lazy, self.where, self.nodata = lazy, where, nodata
        self.shape, self.ndim = lazy.shape, lazy.ndim
        self.dtype = lazy.dtype if nodata is None else np.promote_types(lazy.dtype, np.float32)

    def __getitem__(self, key):
        from ..errors import InputDataError

        try:
            values = np.asarray(self.lazy[key].values)
            if self.nodata is None:
                return values
            return np.where(values == self.nodata, np.nan, values.astype(self.dtype, copy=False))
        except Exception as exc:  # noqa: BLE001 - every reader failure means the same to the user
            raise InputDataError(
                f"{self.where}: cannot read the values ({type(exc).__name__}: {exc}); the file may be truncated or "
                "damaged (possibly where the checks before computing did not sample)"
            ) from None


def guarded_chunk(lazy: xr.DataArray, chunks: dict[str, int], where: str, nodata: float | None = None) -> xr.DataArray:
    """``lazy`` (opened without dask) as a dask-backed DataArray with ``chunks`` (dim -> size, -1 whole),
    read through :class:`GuardedRead` (``nodata``: a value read as NaN)."""
    import dask.array as da
    from dask.base import tokenize

    sizes = tuple(chunks.get(dim, -1) for dim in lazy.dims)
    reader = GuardedRead(lazy, where, nodata)
    data = da.from_array(reader, chunks=sizes, name=f"read-{tokenize(where, lazy.shape, sizes, nodata)}",
                         meta=np.empty((0,) * lazy.ndim, dtype=reader.dtype), asarray=False, fancy=False,
                         inline_array=True)
    return lazy.copy(data=data)



class _GuardedBackend(BackendArray):
    """:class:`GuardedRead` as an xarray backend array (outer indexing), for :func:`guarded_lazy`."""

    def __init__(self, reader: GuardedRead):
        self.reader, self.shape, self.dtype = reader, reader.shape, reader.dtype

    def __getitem__(self, key):
        return indexing.explicit_indexing_adapter(key, self.shape, indexing.IndexingSupport.OUTER, self.reader.__getitem__)


def guarded_lazy(lazy: xr.DataArray, where: str, nodata: float | None = None) -> xr.DataArray:
    """``lazy`` (opened without dask) read through :class:`GuardedRead` and still lazy, without dask: xarray
    composes every later selection (``isel``, ``sel``, ``sortby``) and reads only what is finally selected.

    For a multi-year series, whose monthly means are computed window by window: in dask 2026 a window of a
    dask array made by ``from_array`` computes the whole chunks it touches."""
    return lazy_array(_GuardedBackend(GuardedRead(lazy, where, nodata)), lazy.dims, lazy.coords, lazy.name,
                      lazy.attrs, lazy.encoding)


def lazy_array(backend: BackendArray, dims, coords, name, attrs=None, encoding=None) -> xr.DataArray:
    """A DataArray whose values are ``backend``, indexed lazily by xarray (nothing is read until values are)."""
    variable = xr.Variable(dims, indexing.LazilyIndexedArray(backend), attrs, encoding)
    return xr.Dataset({"values": variable}, coords=coords)["values"].rename(name)
