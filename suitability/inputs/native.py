"""A layer as a reader returns it, before units are converted: what every reader has in common."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
import xarray as xr

#: The months of a monthly layer, January first.
MONTHS = tuple(range(1, 13))


@dataclass
class Native:
    """A layer as read: values in the declared units, nodata NaN, on its own grid, plus what we learnt.

    data: lazy DataArray with dims (month, y, x) or (y, x), north-up, the CRS written (rioxarray); a reader
        may return a multi-year series as (time, y, x) with a decoded ``time`` coordinate, which
        :func:`suitability.inputs.readers.read_native` turns into the monthly climatology.
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
    InputDataError naming the file and the layer, so that it is reported as an input problem (exit 3)."""

    def __init__(self, lazy: xr.DataArray, where: str):
        self.lazy, self.where = lazy, where
        self.shape, self.dtype, self.ndim = lazy.shape, lazy.dtype, lazy.ndim

    def __getitem__(self, key):
        from ..errors import InputDataError

        try:
            return np.asarray(self.lazy[key].values)
        except Exception as exc:  # noqa: BLE001 - every reader failure means the same to the user
            raise InputDataError(
                f"{self.where}: cannot read the values ({type(exc).__name__}: {exc}); the file may be truncated or "
                "damaged (possibly where the checks before computing did not sample)"
            ) from None


def guarded_chunk(lazy: xr.DataArray, chunks: dict[str, int], where: str) -> xr.DataArray:
    """``lazy`` (opened without dask) as a dask-backed DataArray with ``chunks`` (dim -> size, -1 whole),
    read through :class:`GuardedRead`."""
    import dask.array as da
    from dask.base import tokenize

    sizes = tuple(chunks.get(dim, -1) for dim in lazy.dims)
    data = da.from_array(GuardedRead(lazy, where), chunks=sizes, name=f"read-{tokenize(where, lazy.shape, sizes)}",
                         meta=np.empty((0,) * lazy.ndim, dtype=lazy.dtype), asarray=False, fancy=False,
                         inline_array=True)
    return lazy.copy(data=data)
