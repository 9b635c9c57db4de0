"""The NetCDF and Zarr reader (CF conventions).

``variable:`` names the variable (optional if the file holds only one gridded variable). A ``month``
dimension 1..12, or a CF time axis of any length and calendar (decoded by xarray with cftime), returned as
``time`` for :mod:`.periods` to make the monthly climatology; a 12-step axis whose time units xarray cannot
decode ("months since" in the standard calendar) is read month by month as before. Size-1 extra dimensions
(a ``height`` of 2 m) are dropped.

Decisions
- Without a grid mapping but with latitude/longitude coordinates (CF standard_name or the names
  lat/latitude/lon/longitude) the layer is taken as EPSG:4326 (WGS 84 longitude/latitude), as most such
  files mean; projected x/y without a grid mapping is an error. Projected x/y in km are converted to metres
  (xarray would otherwise give 1 m cells). Ascending latitude is flipped to north-up; longitudes 0..360 to
  -180..180.
"""

from __future__ import annotations

import re
from contextlib import contextmanager
from contextvars import ContextVar
from pathlib import Path
from typing import Any, Iterable

import numpy as np
import rioxarray  # noqa: F401 - registers the .rio accessor
import xarray as xr

from ..errors import InputDataError
from .native import MONTHS, Native, guarded_chunk, guarded_lazy, keep_spatial
from .units import linear_conversion


def read_dataset(name: str, path: Path, *, band: int | None = None, variable: str | None = None,
                 nodata: float | None = None, monthly: bool = False, chunk: int = 512,
                 engine: str | None = None) -> Native:
    """Open a NetCDF (``engine`` None) or Zarr (``engine="zarr"``) layer lazily; ``band`` is for rasters."""
    ds = _open_dataset(path, name, engine)
    data_vars = [v for v in ds.data_vars if ds[v].ndim >= 2]
    if variable is None:
        if len(data_vars) != 1:
            raise InputDataError(f"{path}: layer {name!r}: name the variable (variable: ...); the file has {', '.join(data_vars) or 'no gridded variables'}")
        variable = data_vars[0]
    if variable not in ds.data_vars:
        raise InputDataError(f"{path}: layer {name!r}: no variable {variable!r}; the file has {', '.join(map(str, ds.data_vars)) or 'none'}")
    var = ds[variable]
    where = f"{path}: layer {name!r} (variable {variable!r})"
    file_units = var.attrs.get("units")
    standard_name = var.attrs.get("standard_name")
    described = f"{variable} ({standard_name})" if standard_name else str(variable)
    x_dim, y_dim = _spatial_dims(var, where)
    var = var.rename({x_dim: "x", y_dim: "y"})
    crs = var.rio.crs if var.rio.crs is not None else ds.rio.crs
    if crs is None:
        if _is_lonlat(ds[x_dim], ds[y_dim], x_dim, y_dim):
            crs = "EPSG:4326"
        else:
            raise InputDataError(f"{where}: no CRS (no grid_mapping) and x/y are not longitude/latitude; expected a CF grid_mapping variable")
    var = _to_metres(var, crs, where)
    var = _to_month_axis(var, monthly, where)
    var = _member_axis(var)
    extra = [d for d in var.dims if d not in ("member", "time", "month", "y", "x")]
    for dim in extra:
        if var.sizes[dim] != 1:
            raise InputDataError(f"{where}: unexpected dimension {dim!r} of size {var.sizes[dim]}; expected (time or month, y, x)")
    var = var.isel({d: 0 for d in extra}, drop=True)
    keep = {"x", "y", "month", "time", "member"}
    var = var.drop_vars([c for c in var.coords if c not in keep])
    var = var.transpose(*[d for d in ("member", "time", "month", "y", "x") if d in var.dims])
    if "time" in var.dims:  # a series: averaged window by window (periods), so it stays lazy without dask
        var = guarded_lazy(var, where, nodata)
    else:
        var = guarded_chunk(var, {"month": -1, "y": chunk, "x": chunk}, where, nodata)
    transformations = [f"applied the file's scale_factor {var.encoding['scale_factor']:g} and add_offset "
                       f"{var.encoding.get('add_offset', 0):g} (CF)"] if "scale_factor" in var.encoding else []
    before = var["x"].values
    var = _lon_to_180(var, crs, where)
    if var["x"].values.shape != before.shape or not np.array_equal(var["x"].values, before):
        transformations.append("longitudes 0..360 wrapped to -180..180")
    if var["y"].size > 1 and var["y"].values[1] > var["y"].values[0]:
        transformations.append("rows flipped to north-up (latitudes stored south to north)")
    _check_regular(var, where)
    var = var.rio.write_crs(crs)
    var.attrs = {}
    driver = "Zarr" if engine == "zarr" else "netCDF"
    return Native(keep_spatial(var), driver, file_units, tuple(transformations), variable=described)


#: Within :func:`one_handle_per_file`: (path, engine) -> (size and mtime when opened, the open Dataset).
_SESSION: ContextVar[dict | None] = ContextVar("open_netcdf_files", default=None)


@contextmanager
def one_handle_per_file():
    """Within this context each NetCDF file is opened once, every layer read from it gets a shallow copy,
    and the files are closed when it ends (a run and ``check`` open their inputs in one).

    libhdf5 can crash when a file holding variable-length strings (e.g. member names) is open several
    times and one of the handles is closed (HDF5 issue 3649, netcdf4-python issue 1444); a run would open
    a member file once per layer and member. A file that changed meanwhile is opened again, its old
    handle closed first. Nested uses share the outer one."""
    if _SESSION.get() is not None:
        yield
        return
    token = _SESSION.set({})
    try:
        yield
    finally:
        opened = _SESSION.get()
        _SESSION.reset(token)
        for _, dataset in opened.values():
            dataset.close()


def _open_dataset(path: Path, name: str, engine: str | None) -> xr.Dataset:
    opened = _SESSION.get()
    if opened is None or engine == "zarr":
        return _open_uncached(path, name, engine)
    key = (str(Path(path).resolve()), engine)
    stat = Path(path).stat()
    state = (stat.st_size, stat.st_mtime_ns)
    cached = opened.get(key)
    if cached is not None and cached[0] == state:
        return cached[1].copy(deep=False)
    if cached is not None:
        cached[1].close()
    dataset = _open_uncached(path, name, engine)
    opened[key] = (state, dataset)
    return dataset.copy(deep=False)


def _open_uncached(path: Path, name: str, engine: str | None) -> xr.Dataset:
    kwargs: dict[str, Any] = {"decode_coords": "all", "chunks": None, "engine": engine}
    try:
        return xr.open_dataset(path, **kwargs)
    except ValueError as exc:
        if "decode" not in str(exc) and "time" not in str(exc):
            raise InputDataError(f"{path}: cannot open layer {name!r} ({exc})") from None
    except Exception as exc:  # noqa: BLE001 - netCDF4/h5py/zarr raise many types for unreadable files
        raise InputDataError(f"{path}: cannot open layer {name!r}: unreadable or truncated file ({exc})") from None
    try:  # the time axis cannot be decoded: read it raw, months are worked out in _to_month_axis
        return xr.open_dataset(path, decode_times=False, **kwargs)
    except Exception as exc:  # noqa: BLE001
        raise InputDataError(f"{path}: cannot open layer {name!r} ({exc})") from None


_X_NAMES, _Y_NAMES = ("x", "lon", "longitude", "rlon", "xc"), ("y", "lat", "latitude", "rlat", "yc")
_X_STANDARD = ("projection_x_coordinate", "longitude", "grid_longitude")
_Y_STANDARD = ("projection_y_coordinate", "latitude", "grid_latitude")


def _spatial_dims(var: xr.DataArray, where: str) -> tuple[str, str]:
    def find(names, standard, axis):
        for dim in var.dims:
            coord = var.coords.get(dim)
            attrs = coord.attrs if coord is not None else {}
            if attrs.get("axis") == axis or attrs.get("standard_name") in standard or str(dim).lower() in names:
                return dim
        return None

    x_dim, y_dim = find(_X_NAMES, _X_STANDARD, "X"), find(_Y_NAMES, _Y_STANDARD, "Y")
    if x_dim is None or y_dim is None or x_dim not in var.coords or y_dim not in var.coords:
        raise InputDataError(f"{where}: cannot find 1-D x/y (or lon/lat) coordinates among the dimensions {var.dims}; expected a regular grid")
    return x_dim, y_dim


def _is_lonlat(x: xr.DataArray, y: xr.DataArray, x_dim: str, y_dim: str) -> bool:
    return (
        (x.attrs.get("standard_name") == "longitude" or str(x_dim).lower() in ("lon", "longitude")
         or str(x.attrs.get("units", "")).startswith("degree"))
        and (y.attrs.get("standard_name") == "latitude" or str(y_dim).lower() in ("lat", "latitude")
             or str(y.attrs.get("units", "")).startswith("degree"))
    )


def _to_metres(var: xr.DataArray, crs: Any, where: str) -> xr.DataArray:
    """Projected x/y given in km (or another length) become metres, matching the CRS's metre axes."""
    from pyproj import CRS

    if CRS.from_user_input(crs).is_geographic:
        return var
    updates = {}
    for dim in ("x", "y"):
        units = var[dim].attrs.get("units")
        if not units or units in ("m", "metre", "meter", "metres", "meters"):
            continue
        try:
            scale, _ = linear_conversion(units, "m")
        except ValueError:
            continue
        if scale != 1.0:
            updates[dim] = xr.DataArray(var[dim].values * scale, dims=dim, attrs={**var[dim].attrs, "units": "m"})
    return var.assign_coords(updates) if updates else var


def _to_month_axis(var: xr.DataArray, monthly: bool, where: str) -> xr.DataArray:
    time_dims = [d for d in var.dims if d not in ("x", "y") and _is_time(var, d)]
    if "month" in var.dims:
        if var.sizes["month"] != 12:
            raise InputDataError(f"{where}: month dimension of size {var.sizes['month']}; expected 12 (1..12)")
        if not monthly:
            _static_error(where)
        months = var["month"].values if "month" in var.coords else np.arange(1, 13)
        var = var.assign_coords(month=np.asarray(months).astype(int))
        _check_months(var["month"].values, where)
        return var.sortby("month")
    if not time_dims:
        if monthly:
            raise InputDataError(f"{where}: no time axis; expected 12 monthly steps (a time or month dimension)")
        return var
    dim = time_dims[0]
    steps = var.sizes[dim]
    if not monthly:
        if steps != 1:
            _static_error(where, steps)
        return var.isel({dim: 0}, drop=True)
    if _decoded(var[dim]):  # any CF calendar: the climatology is made by .periods
        return var.rename({dim: "time"}) if dim != "time" else var
    if steps != 12:
        units, calendar = var[dim].attrs.get("units", ""), var[dim].attrs.get("calendar", "standard")
        raise InputDataError(f"{where}: cannot decode the time axis {dim!r} (units {units!r}, calendar {calendar!r}); "
                             "expected CF time units ('days since ...') in a calendar cftime knows "
                             "(standard, noleap, 360_day, all_leap, ...) or 12 monthly steps")
    months = _months_of(var[dim], where)
    _check_months(months, where)
    var = var.assign_coords({dim: months}).rename({dim: "month"})
    return var.sortby("month")


def _static_error(where: str, steps: int = 12):
    raise InputDataError(f"{where}: has {steps} time steps but the layer is static; expected one value per cell")


def _is_time(var: xr.DataArray, dim) -> bool:
    coord = var.coords.get(dim)
    if str(dim).lower() in ("time", "t"):
        return True
    if coord is None:
        return False
    return (coord.attrs.get("axis") == "T" or coord.attrs.get("standard_name") == "time"
            or np.issubdtype(coord.dtype, np.datetime64) or coord.dtype == object
            or "since" in str(coord.attrs.get("units", "")))


#: Dimension names of an ensemble of climate-model members (CF/CMIP use "realization"; "member_id" in
#: CMIP6 catalogues); kept as ``member`` for :func:`.readers.read_native` to select one member.
_MEMBER_NAMES = ("member", "members", "realization", "realisation", "ensemble", "ens", "member_id")


def _member_axis(var: xr.DataArray) -> xr.DataArray:
    for dim in var.dims:
        if str(dim).lower() in _MEMBER_NAMES and var.sizes[dim] > 1:
            labels = var[dim].values if dim in var.coords else np.arange(var.sizes[dim])
            labels = [x.decode() if isinstance(x, bytes) else str(x) for x in np.asarray(labels).tolist()]
            return var.rename({dim: "member"}).assign_coords(member=labels)
    return var


def _decoded(time: xr.DataArray) -> bool:
    return np.issubdtype(time.dtype, np.datetime64) or (
        time.dtype == object and time.size > 0 and hasattr(time.values.flat[0], "year"))


def _months_of(time: xr.DataArray, where: str) -> np.ndarray:
    if np.issubdtype(time.dtype, np.datetime64) or time.dtype == object:
        try:
            return np.asarray(time.dt.month.values, dtype=int)
        except (AttributeError, TypeError):
            pass
    units = str(time.attrs.get("units", ""))
    match = re.match(r"\s*months since\s+(\d{1,4})-(\d{1,2})", units)
    values = np.asarray(time.values, dtype=float)
    if match and np.allclose(values, np.round(values)):
        return (int(match.group(2)) - 1 + np.round(values).astype(int)) % 12 + 1
    raise InputDataError(f"{where}: cannot tell the month of each time step (time units {units!r}); expected a CF time axis or a month dimension 1..12")


def _check_months(months: Iterable[int], where: str) -> None:
    months = [int(m) for m in months]
    if sorted(months) != list(MONTHS):
        missing = sorted(set(MONTHS) - set(months))
        repeated = sorted({m for m in months if months.count(m) > 1})
        raise InputDataError(
            f"{where}: the 12 time steps are months {months}; expected each month 1..12 once"
            + (f" (missing {missing})" if missing else "") + (f" (repeated {repeated})" if repeated else "")
        )


def _lon_to_180(var: xr.DataArray, crs: Any, where: str) -> xr.DataArray:
    from pyproj import CRS

    if not CRS.from_user_input(crs).is_geographic or float(var["x"].max()) <= 180.0:
        return var
    x = var["x"].values
    step = abs(float(x[1] - x[0])) if x.size > 1 else 0.0
    whole_globe = x.size > 1 and abs(x.size * step - 360.0) <= 1e-6 * 360.0
    if float(x.min()) > 180.0 or whole_globe:  # wrapping keeps the longitudes evenly spaced
        shifted = ((x + 180.0) % 360.0) - 180.0
        return var.assign_coords(x=shifted).sortby("x")
    # A regional file that crosses 180 (e.g. 170..190): wrapping would cut it in two; longitudes above 180
    # are valid as they are (pyproj and GDAL take them), so they are kept.
    return var


def _check_regular(var: xr.DataArray, where: str) -> None:
    for dim in ("x", "y"):
        values = var[dim].values
        if values.size < 2:
            raise InputDataError(f"{where}: only {values.size} cell(s) along {dim}; expected a grid")
        steps = np.diff(values)
        if not np.allclose(steps, steps[0], rtol=1e-3, atol=0):
            raise InputDataError(f"{where}: {dim} coordinates are not evenly spaced; expected a regular grid")

def read_zarr(name: str, path: Path, **options) -> Native:
    """:func:`read_dataset` with the Zarr engine."""
    return read_dataset(name, path, engine="zarr", **options)
