"""A layer as a reader returns it, before units are converted: what every reader has in common."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

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
    time: Any = None


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
