"""Open the climate layers of a config: GeoTIFF, NetCDF and Zarr, lazily, in canonical units.

Every layer comes out as a dask-backed float32 DataArray, NaN for nodata, in the units of
:mod:`suitability.variables`, with dims ``(month, y, x)`` (month = 1..12) or ``(y, x)`` for static layers.

Formats
- GeoTIFF (any GDAL raster): one band for a static layer, 12 bands (January first) for a monthly layer, or
  ``band:`` to pick one band. Read with ``rioxarray.open_rasterio(chunks=..., masked=True, lock=False)``.
- A path with a ``{month}`` placeholder: one single-band file per month.
- NetCDF and Zarr (``variable:`` names the variable; optional if the file holds only one): a time axis of
  12 steps (the month of each step is taken from the time coordinate, any CF calendar via cftime) or a
  ``month`` dimension 1..12. Size-1 extra dimensions (a ``height`` of 2 m) are dropped.

Decisions
- Units: the config's ``units`` win; without them the file's ``units`` attribute is used; neither is an
  error. Conversion by pint with the cf_xarray registry (affine conversions only, applied lazily). Unit
  strings common in climate files ("C", "degrees C", "fraction", "%") are read as meant. Per-month totals
  ("MJ m-2 month-1") are refused rather than divided by a mean month length.
- A radiation layer declared as a photon flux (mol m-2 d-1, µmol m-2 s-1) is returned as ``par``; one in
  energy units as ``shortwave``. A ``water_stress`` layer is returned as ``water_availability`` = 1 - stress.
- NetCDF without a grid mapping but with latitude/longitude coordinates (CF standard_name or the names
  lat/latitude/lon/longitude) is taken as EPSG:4326 (WGS 84 longitude/latitude), as most such files mean;
  projected x/y without a grid mapping is an error. Projected x/y in km are converted to metres (xarray
  would otherwise give 1 m cells). Ascending latitude is flipped to north-up; longitudes 0..360 to -180..180.
- Plausibility of the declared units is checked on a sample of at most 256 x 256 cells per time step
  (64 small windows spread over the layer), never the whole raster. Values outside the glossary's valid
  range (after conversion) become NaN, never clamped; :func:`inspect_inputs` reports their share.
"""

from __future__ import annotations

import math
import re
import warnings
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Iterable

import numpy as np
import rioxarray  # noqa: F401 - registers the .rio accessor
import xarray as xr

from .config import is_month_pattern, month_path
from .errors import InputDataError
from .grid import TargetGrid, align_to_grid
from .variables import INPUT_VARIABLES

MONTHS = tuple(range(1, 13))
SAMPLE_SIDE = 256
_NETCDF_SUFFIXES = {".nc", ".nc4", ".netcdf", ".cdf", ".h5", ".hdf5"}
_TEMPERATURE_LAYERS = ("tmin", "tmax", "tmean")
_FRACTION_LAYERS = ("water_availability", "water_stress", "humidity")
_UNIT_ALIASES = {
    **dict.fromkeys(["c", "°c", "degc", "deg c", "deg_c", "degree_c", "degrees_c", "degree c", "degrees c",
                     "celsius", "degree celsius", "degrees celsius", "degree_celsius", "degrees_celsius"], "degC"),
    **dict.fromkeys(["k", "kelvin", "degk", "deg_k", "degrees_k"], "K"),
    **dict.fromkeys(["1", "-", "fraction", "frac", "dimensionless", "unitless", "0-1"], "1"),
    **dict.fromkeys(["%", "percent", "pct", "per cent"], "percent"),
}


class InputCoverageWarning(UserWarning):
    """A layer covers only part of the region; cells outside it are NaN."""


@dataclass
class LayerReport:
    """What :func:`inspect_inputs` found about one input layer (no model computed).

    layer: config layer name; output_name: the name it is returned under (``par``, ``water_availability``).
    scenario: None for the baseline climate, else the scenario whose override this is.
    path: the file (pattern as written for ``{month}`` paths); driver: "GTiff", "netCDF", "Zarr", ...
    crs: CRS as text; native_resolution: (x, y) cell size in CRS units.
    declared_units: the config's units, else the file's; file_units: the file's units attribute;
    canonical_units: the units it is converted to. overlap_share: share of the region inside the layer's
    extent [0-1]; nodata_share / out_of_range_share: shares of a sample of the layer within the region
    (see ``_sample``) that are nodata / outside the valid range after conversion. problems: errors that
    stop a run; warnings: notes.
    """

    layer: str
    path: str
    scenario: str | None = None
    output_name: str | None = None
    driver: str | None = None
    crs: str | None = None
    native_resolution: tuple[float, float] | None = None
    declared_units: str | None = None
    file_units: str | None = None
    canonical_units: str | None = None
    overlap_share: float | None = None
    nodata_share: float | None = None
    out_of_range_share: float | None = None
    problems: list[str] = field(default_factory=list)
    warnings: list[str] = field(default_factory=list)


@dataclass
class _Native:
    """A layer as read: values in the declared units, nodata NaN, on its own grid, plus what we learnt."""

    data: xr.DataArray
    driver: str
    file_units: str | None


# ============================================================================================ units


def parse_units(text: str):
    """pint Unit of a units string, accepting the common climate-file spellings (see module docstring)."""
    from cf_xarray.units import units as registry

    alias = _UNIT_ALIASES.get(str(text).strip().lower(), str(text).strip())
    if re.search(r"\bmonth|\bmon\b|\byr\b|\byear", alias):
        raise ValueError(f"units {text!r} are per month or year; give a mean daily rate (e.g. MJ m-2 d-1) instead")
    try:
        return registry.Unit(alias)
    except Exception as exc:  # noqa: BLE001 - pint raises several types for unparseable strings
        raise ValueError(f"units {text!r} are not understood ({exc})") from None


def linear_conversion(from_units: str, to_units: str) -> tuple[float, float]:
    """(scale, offset) with value_in_to = scale * value_in_from + offset, from pint.

    Raises ValueError if the units are not of the same kind or the conversion is not affine.
    """
    from cf_xarray.units import units as registry

    source, target = parse_units(from_units), parse_units(to_units)
    try:
        at = [registry.Quantity(v, source).to(target).magnitude for v in (0.0, 1.0, 1000.0)]
    except Exception as exc:  # noqa: BLE001 - DimensionalityError and offset-unit errors alike
        raise ValueError(f"{from_units!r} cannot be converted to {to_units!r} ({exc})") from None
    offset, scale = float(at[0]), float(at[1] - at[0])
    if not math.isclose(at[2], offset + 1000.0 * scale, rel_tol=1e-9, abs_tol=1e-9):
        raise ValueError(f"conversion from {from_units!r} to {to_units!r} is not linear")
    return scale, offset


def output_name(layer: str, units: str) -> str:
    """The name a layer is returned under: photon-flux radiation -> ``par``; ``water_stress`` -> ``water_availability``."""
    if layer == "water_stress":
        return "water_availability"
    if layer in ("shortwave", "par"):
        unit = parse_units(units)
        photon = unit.dimensionality == parse_units("mol m-2 d-1").dimensionality
        energy = unit.dimensionality == parse_units("W m-2").dimensionality
        if photon:
            return "par"
        if energy and layer == "shortwave":
            return "shortwave"
        raise ValueError(
            f"units {units!r} of layer {layer!r}: expected an energy flux for shortwave (W m-2, MJ m-2 d-1) "
            "or a photon flux for PAR (mol m-2 d-1, µmol m-2 s-1)"
        )
    return layer


# ============================================================================================ files


def layer_files(spec: Any, config_dir: str | Path | None = None) -> list[Path]:
    """Every file a layer reads: the 12 files of a ``{month}`` pattern, the files of a Zarr store, or the file."""
    path = _absolute(spec.path, config_dir)
    if is_month_pattern(path):
        return [month_path(path, m) for m in MONTHS]
    if path.is_dir():
        return sorted(p for p in path.rglob("*") if p.is_file())
    return [path]


def _absolute(path: str | Path, config_dir: str | Path | None) -> Path:
    path = Path(path).expanduser()
    return path if path.is_absolute() or config_dir is None else Path(config_dir) / path


def _format_of(path: Path) -> str:
    if path.suffix.lower() == ".zarr" or (path.is_dir() and ((path / ".zgroup").exists() or (path / "zarr.json").exists())):
        return "zarr"
    if path.suffix.lower() in _NETCDF_SUFFIXES:
        return "netcdf"
    return "raster"


# ============================================================================================ opening


def open_layer(name: str, spec: Any, config_dir: str | Path | None = None, *, chunk: int = 512) -> xr.DataArray:
    """Open one climate layer lazily on its own grid, float32, in canonical units, nodata and invalid values NaN.

    name: config layer name (a key of ``variables.INPUT_VARIABLES``); spec: its LayerSpec (path, variable,
    units, resampling, nodata, band); config_dir: folder that relative paths are taken from.
    Returns a DataArray named after :func:`output_name`, with the CRS written and ``units`` in attrs.
    Raises InputDataError naming the file, the layer and what was expected.
    """
    converted, _ = _open_converted(name, spec, config_dir, chunk)
    low, high = INPUT_VARIABLES[converted.name].valid_range
    out = converted.where((converted >= low) & (converted <= high))
    out.attrs = converted.attrs
    return out


def _open_converted(name: str, spec: Any, config_dir, chunk: int) -> tuple[xr.DataArray, _Native]:
    """The layer in canonical units before the valid-range mask, and what was read."""
    if name not in INPUT_VARIABLES:
        raise InputDataError(f"unknown layer {name!r}; expected one of {', '.join(INPUT_VARIABLES)}")
    variable = INPUT_VARIABLES[name]
    path = _absolute(spec.path, config_dir)
    native = _read_native(name, spec, path, variable.monthly, chunk)
    where = f"{path}: layer {name!r}" + (f" (variable {spec.variable!r})" if getattr(spec, "variable", None) else "")
    declared = getattr(spec, "units", None) or native.file_units
    if not declared:
        raise InputDataError(f"{where}: no units; declare them in the config (e.g. units: K) since the file has no 'units' attribute")
    try:
        result_name = output_name(name, declared)
        canonical = INPUT_VARIABLES[result_name].units
        scale, offset = linear_conversion(declared, "1" if name == "water_stress" else canonical)
    except ValueError as exc:
        hint = "" if "expected" in str(exc) else f"; expected units convertible to {INPUT_VARIABLES[name].units}"
        raise InputDataError(f"{where}: {exc}{hint}") from None

    sample = _sample(native.data, where)
    _check_plausible(name, declared, scale, offset, sample, where)
    if not np.isfinite(sample).any() and not bool(native.data.notnull().any().compute()):
        raise InputDataError(f"{where}: every cell is nodata; expected some valid values")

    data = native.data
    if (scale, offset) != (1.0, 0.0):
        data = data * np.float32(scale) + np.float32(offset)
    if name == "water_stress":
        data = 1.0 - data
    data = data.astype(np.float32)
    data.name = result_name
    data.attrs = {
        "units": canonical, "long_name": INPUT_VARIABLES[result_name].long_name, "source": str(path),
        "source_layer": name, "declared_units": str(declared),
    }
    return data, native


def _read_native(name: str, spec: Any, path: Path, monthly: bool, chunk: int) -> _Native:
    band = getattr(spec, "band", None)
    nodata = getattr(spec, "nodata", None)
    variable = getattr(spec, "variable", None)
    if is_month_pattern(path):
        if not monthly:
            raise InputDataError(f"{path}: layer {name!r} is static; a {{month}} pattern is for monthly layers")
        return _read_month_pattern(name, path, variable, band, nodata, chunk)
    if not path.exists():
        raise InputDataError(f"{path}: file of layer {name!r} does not exist")
    kind = _format_of(path)
    if kind == "raster":
        if variable is not None:
            raise InputDataError(f"{path}: layer {name!r} gives 'variable: {variable}', which applies to NetCDF/Zarr; this is a raster file")
        return _read_raster(name, path, band, nodata, monthly, chunk)
    if band is not None:
        raise InputDataError(f"{path}: layer {name!r} gives 'band', which applies to raster files; name the NetCDF/Zarr variable instead")
    return _read_dataset(name, path, variable, nodata, monthly, chunk, engine="zarr" if kind == "zarr" else None)


def _read_month_pattern(name, pattern: Path, variable, band, nodata, chunk) -> _Native:
    paths = {m: month_path(pattern, m) for m in MONTHS}
    missing = [m for m, p in paths.items() if not p.exists()]
    if missing:
        listed = ", ".join(f"{m} ({paths[m].name})" for m in missing)
        raise InputDataError(f"{pattern}: layer {name!r}: files for month(s) {listed} do not exist; expected one file per month 1..12")
    months = []
    for m, path in paths.items():
        if _format_of(path) == "raster":
            native = _read_raster(name, path, band, nodata, False, chunk)
        else:
            native = _read_dataset(name, path, variable, nodata, False, chunk, engine="zarr" if _format_of(path) == "zarr" else None)
        months.append(native)
    first = months[0].data
    for m, native in zip(MONTHS[1:], months[1:]):
        same = (
            native.data.shape == first.shape and native.data.rio.crs == first.rio.crs
            and np.allclose(native.data.x, first.x) and np.allclose(native.data.y, first.y)
        )
        if not same:
            raise InputDataError(f"{paths[m]}: month {m} of layer {name!r} is on another grid than month 1 ({paths[1].name}); expected the same grid in every month")
    data = xr.concat([n.data.assign_coords(x=first.x, y=first.y) for n in months], dim="month")
    data = data.assign_coords(month=list(MONTHS)).rio.write_crs(first.rio.crs)
    units = {n.file_units for n in months}
    return _Native(data, months[0].driver, months[0].file_units if len(units) == 1 else None)


def _read_raster(name: str, path: Path, band: int | None, nodata: float | None, monthly: bool, chunk: int) -> _Native:
    import rasterio
    from rasterio.errors import RasterioIOError

    try:
        with rasterio.open(path) as src:
            count, crs, transform, driver = src.count, src.crs, src.transform, src.driver
            units = [u or src.tags(i + 1).get("units") for i, u in enumerate(src.units)]
            file_units = units[(band or 1) - 1] if (band or 1) <= count else None
            file_units = file_units or src.tags().get("units")
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
        data = rioxarray.open_rasterio(path, chunks={"band": -1, "y": chunk, "x": chunk}, masked=nodata is None, lock=False)
    except Exception as exc:  # noqa: BLE001 - report any reader failure with the file name
        raise InputDataError(f"{path}: cannot read layer {name!r} ({exc})") from None
    if nodata is not None:
        data = data.where(data != np.asarray(nodata).astype(data.dtype))
    if band is not None:
        data = data.isel(band=band - 1, drop=True)
    elif monthly:
        data = data.rename(band="month").assign_coords(month=list(MONTHS))
    else:
        data = data.isel(band=0, drop=True)
    data = _keep_spatial(data)
    return _Native(data, driver, file_units)


def _read_dataset(name, path: Path, variable, nodata, monthly: bool, chunk: int, engine: str | None) -> _Native:
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
    extra = [d for d in var.dims if d not in ("month", "y", "x")]
    for dim in extra:
        if var.sizes[dim] != 1:
            raise InputDataError(f"{where}: unexpected dimension {dim!r} of size {var.sizes[dim]}; expected (time or month, y, x)")
    var = var.isel({d: 0 for d in extra}, drop=True)
    keep = {"x", "y", "month"}
    var = var.drop_vars([c for c in var.coords if c not in keep])
    var = var.transpose(*[d for d in ("month", "y", "x") if d in var.dims])
    var = var.chunk({**({"month": -1} if "month" in var.dims else {}), "y": chunk, "x": chunk})
    var = _lon_to_180(var, crs, where)
    _check_regular(var, where)
    if nodata is not None:
        var = var.where(var != nodata)
    var = var.rio.write_crs(crs)
    var.attrs = {}
    driver = "Zarr" if engine == "zarr" else "netCDF"
    return _Native(_keep_spatial(var), driver, file_units)


def _open_dataset(path: Path, name: str, engine: str | None) -> xr.Dataset:
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
    if steps != 12:
        raise InputDataError(f"{where}: time axis {dim!r} has {steps} steps; expected 12 (one per month)")
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
    shifted = ((var["x"].values + 180.0) % 360.0) - 180.0
    return var.assign_coords(x=shifted).sortby("x")


def _check_regular(var: xr.DataArray, where: str) -> None:
    for dim in ("x", "y"):
        values = var[dim].values
        if values.size < 2:
            raise InputDataError(f"{where}: only {values.size} cell(s) along {dim}; expected a grid")
        steps = np.diff(values)
        if not np.allclose(steps, steps[0], rtol=1e-3, atol=0):
            raise InputDataError(f"{where}: {dim} coordinates are not evenly spaced; expected a regular grid")


def _keep_spatial(data: xr.DataArray) -> xr.DataArray:
    """North-up and west-to-east order, only x/y/month (and the CRS) as coordinates."""
    crs = data.rio.crs
    if data["y"].values[-1] > data["y"].values[0]:
        data = data.isel(y=slice(None, None, -1))
    if data["x"].values[-1] < data["x"].values[0]:
        data = data.isel(x=slice(None, None, -1))
    data = data.drop_vars([c for c in data.coords if c not in ("x", "y", "month")])
    data = data.rio.write_crs(crs)
    for dim in ("x", "y"):
        data[dim].attrs = {}
    return data


# ============================================================================================ checks


def _sample(data: xr.DataArray, where: str) -> np.ndarray:
    """A sample of at most 256 x 256 cells per time step, as float64.

    8 x 8 windows of 32 x 32 cells spread evenly over the layer: they touch at most 64 blocks of a tiled
    file, where a strided read of every n-th cell would decode every block.
    """
    index = {dim: _sample_index(data.sizes[dim]) for dim in ("y", "x")}
    try:
        values = data.isel(index).values
    except Exception as exc:  # noqa: BLE001 - a truncated file fails here, on first read
        raise InputDataError(f"{where}: cannot read the values; the file may be truncated or corrupt ({exc})") from None
    return np.asarray(values, dtype=np.float64)


def _sample_index(size: int, windows: int = 8, width: int = SAMPLE_SIDE // 8):
    if size <= windows * width:
        return slice(None)
    starts = np.linspace(0, size - width, windows).round().astype(int)
    return np.concatenate([np.arange(start, start + width) for start in starts])


def _check_plausible(name: str, declared: str, scale: float, offset: float, sample: np.ndarray, where: str) -> None:
    """Refuse declared units that the values contradict (the tell-tale cases of swapped units)."""
    values = sample[np.isfinite(sample)]
    if values.size == 0:
        return
    median = float(np.median(values))
    spread = f"median {median:.4g}, range {values.min():.4g} to {values.max():.4g} on a sample"
    unit = parse_units(declared)
    if name in _TEMPERATURE_LAYERS:
        if unit == parse_units("degC") and 250.0 <= median <= 320.0:
            raise InputDataError(f"{where}: declared in °C but the values ({spread}) look like kelvin; declare units: K")
        if unit == parse_units("K") and -60.0 <= median <= 60.0:
            raise InputDataError(f"{where}: declared in K but the values ({spread}) look like °C; declare units: degC")
    if name == "shortwave" and scale * median + offset > 50.0 and unit.dimensionality == parse_units("W m-2").dimensionality:
        raise InputDataError(
            f"{where}: declared as {declared} but the values ({spread}) are above 50 MJ m-2 d-1, more than any "
            "daily mean at the surface; they look like W m-2: declare units: W m-2"
        )
    if name in _FRACTION_LAYERS and unit == parse_units("1") and float(np.quantile(values, 0.99)) > 1.5:
        raise InputDataError(f"{where}: declared as a fraction (0-1) but the values ({spread}) look like percent; declare units: percent")
    low, high = INPUT_VARIABLES[output_name(name, declared)].valid_range
    converted = scale * values + offset
    if name == "water_stress":
        converted = 1.0 - converted
    if not ((converted >= low) & (converted <= high)).any():
        raise InputDataError(
            f"{where}: no sampled value is within the valid range {low:g}..{high:g} "
            f"{INPUT_VARIABLES[output_name(name, declared)].units} after conversion from {declared} ({spread}); check the units"
        )


def _footprint(data: xr.DataArray, crs: Any):
    """The layer's extent as a shapely polygon in ``crs`` (edges densified), or None if it does not project."""
    import shapely
    from pyproj import CRS, Transformer

    transform = data.rio.transform(recalc=True)
    left, top = transform.c, transform.f
    right, bottom = left + transform.a * data.sizes["x"], top + transform.e * data.sizes["y"]
    box = shapely.box(min(left, right), min(top, bottom), max(left, right), max(top, bottom))
    dense = shapely.segmentize(box, max(abs(right - left), abs(top - bottom)) / 100.0)
    to_crs = Transformer.from_crs(CRS.from_user_input(data.rio.crs.to_wkt()), crs, always_xy=True)
    x, y = to_crs.transform(*np.asarray(dense.exterior.coords).T)
    if not (np.all(np.isfinite(x)) and np.all(np.isfinite(y))):
        return None
    return shapely.Polygon(np.column_stack([x, y])).buffer(0)


def coverage_share(data: xr.DataArray, grid: TargetGrid) -> float:
    """Share [0-1] of the grid's area inside the layer's extent (edges densified before reprojecting)."""
    import shapely
    from pyproj import CRS, Transformer

    box = shapely.box(*grid.bounds)
    footprint = _footprint(data, grid.crs)
    if footprint is not None:
        return float(min(1.0, footprint.intersection(box).area / box.area))
    # The layer's extent does not project into the grid CRS (a global lon/lat layer and a local
    # projection): measure the grid's footprint in the layer CRS instead.
    layer_crs = CRS.from_user_input(data.rio.crs.to_wkt())
    to_layer = Transformer.from_crs(grid.crs, layer_crs, always_xy=True)
    dense = shapely.segmentize(box, max(box.bounds[2] - box.bounds[0], box.bounds[3] - box.bounds[1]) / 100.0)
    gx, gy = to_layer.transform(*np.asarray(dense.exterior.coords).T)
    region = shapely.Polygon(np.column_stack([gx, gy])).buffer(0)
    left, bottom, right, top = data.rio.bounds(recalc=True)
    extent = shapely.box(min(left, right), min(bottom, top), max(left, right), max(bottom, top))
    return float(region.intersection(extent).area / region.area) if region.area else 0.0


def _cells_per_grid_cell(data: xr.DataArray, grid: TargetGrid) -> float | None:
    """How many layer cells fit in one grid cell (mean, in the grid's map plane); None if unknown."""
    footprint = _footprint(data, grid.crs)
    if footprint is None or footprint.area == 0:
        return None
    layer_cell = footprint.area / (data.sizes["x"] * data.sizes["y"])
    return grid.resolution[0] * grid.resolution[1] / layer_cell


# ============================================================================================ the climate


def load_climate(climate_config: Any, grid: TargetGrid, config_dir: str | Path | None = None, chunk: int = 512) -> xr.Dataset:
    """All layers of a climate section (or a scenario's overrides) aligned lazily on ``grid``.

    climate_config: mapping layer name -> LayerSpec (the config's ``climate`` or a scenario's ``climate``).
    Returns a Dataset keyed by output name (``par`` / ``water_availability`` where converted) with
    monthly layers (month, y, x), month = 1..12, static layers (y, x), chunks {"month": -1, "y": chunk,
    "x": chunk}, coordinates exactly the grid's. A layer not reaching the region is an InputDataError; one
    covering it partly gives an InputCoverageWarning with the share covered (cells outside are NaN).
    """
    layers: dict[str, xr.DataArray] = {}
    for name, spec in climate_config.items():
        layer = open_layer(name, spec, config_dir, chunk=chunk)
        path = _absolute(spec.path, config_dir)
        share = coverage_share(layer, grid)
        if share <= 0.0:
            raise InputDataError(
                f"{path}: layer {name!r} does not overlap the region (layer bounds {tuple(round(b, 4) for b in layer.rio.bounds())} "
                f"in {layer.rio.crs}; region bounds {grid.bounds} in {grid.crs.to_string()})"
            )
        if share < 1.0 - 1e-6:
            warnings.warn(f"{path}: layer {name!r} covers {share:.1%} of the region; cells outside it are NaN",
                          InputCoverageWarning, stacklevel=2)
        resampling = getattr(spec, "resampling", None) or INPUT_VARIABLES[name].resampling
        if layer.name in layers:
            raise InputDataError(f"{path}: layer {name!r} gives {layer.name!r}, which another layer already gives")
        layers[layer.name] = align_to_grid(layer, grid, resampling, chunk)
    # Every monthly layer was checked to hold each month 1..12 once (sorted), so their months agree.
    dataset = xr.Dataset(layers)
    return dataset.rio.write_crs(grid.crs.to_wkt())


def load_mask(region_config: Any, grid: TargetGrid, config_dir: str | Path | None = None, chunk: int = 512) -> xr.DataArray | None:
    """The region's ``mask`` on the grid as a lazy boolean (y, x): True where the mask is non-zero and not
    nodata (nearest-neighbour resampling). None if the region has no mask."""
    mask_path = getattr(region_config, "mask", None)
    if mask_path is None:
        return None
    path = _absolute(mask_path, config_dir)
    if not path.exists():
        raise InputDataError(f"{path}: the region mask does not exist")
    native = _read_raster("mask", path, None, None, False, chunk).data.astype(np.float32)
    aligned = align_to_grid(native, grid, "nearest", chunk)
    keep = aligned.notnull() & (aligned != 0)
    keep.name = "mask"
    return keep


# ============================================================================================ checking


def inspect_inputs(config: Any) -> list[LayerReport]:
    """Open every input of ``config`` (baseline climate, scenario overrides, region mask) and report on it.

    Reads only metadata and samples of at most 256 x 256 cells per time step; never computes the model.
    Problems that would stop a run are listed per layer in ``problems`` rather than raised, so one check
    shows all of them.
    """
    reports: list[LayerReport] = []
    try:
        grid = TargetGrid.from_region(config.region, config.config_dir)
    except (InputDataError, ValueError) as exc:
        grid = None
        reports.append(LayerReport(layer="region", path=str(getattr(config.region, "like", "") or ""), problems=[str(exc)]))
    entries: list[tuple[str | None, str, Any]] = [(None, n, s) for n, s in config.climate.items()]
    for scenario in config.scenarios:
        entries += [(scenario.name, n, s) for n, s in (scenario.climate.items() if scenario.climate else ())]
    for scenario, name, spec in entries:
        reports.append(_inspect_layer(name, spec, config.config_dir, grid, scenario))
    if getattr(config.region, "mask", None) is not None and grid is not None:
        reports.append(_inspect_mask(config.region, grid, config.config_dir))
    return reports


def _inspect_layer(name: str, spec: Any, config_dir, grid: TargetGrid | None, scenario: str | None) -> LayerReport:
    report = LayerReport(layer=name, path=str(spec.path), scenario=scenario, declared_units=getattr(spec, "units", None))
    try:
        converted, native = _open_converted(name, spec, config_dir, SAMPLE_SIDE * 2)
    except InputDataError as exc:
        report.problems.append(str(exc))
        return report
    report.output_name = converted.name
    report.driver = native.driver
    report.file_units = native.file_units
    report.declared_units = report.declared_units or native.file_units
    report.canonical_units = converted.attrs["units"]
    crs = converted.rio.crs
    report.crs = crs.to_string() if crs is not None else None
    res_x, res_y = converted.rio.resolution(recalc=True)
    report.native_resolution = (abs(float(res_x)), abs(float(res_y)))
    if spec.units and native.file_units and _units_differ(spec.units, native.file_units):
        report.warnings.append(f"declared units {spec.units!r} override the file's {native.file_units!r}")
    if grid is None:
        return report
    report.overlap_share = coverage_share(converted, grid)
    if report.overlap_share <= 0.0:
        report.problems.append("does not overlap the region")
        return report
    if report.overlap_share < 1.0 - 1e-6:
        report.warnings.append(f"covers {report.overlap_share:.1%} of the region; cells outside are NaN")
    resampling = getattr(spec, "resampling", None) or INPUT_VARIABLES[name].resampling
    ratio = _cells_per_grid_cell(converted, grid)
    if ratio is not None and ratio > 4.0 and resampling in ("nearest", "bilinear", "cubic"):
        report.warnings.append(f"about {ratio:.0f} layer cells per grid cell: '{resampling}' uses only the cells next to "
                               "each grid cell centre; resampling: average uses them all")
    sample = _sample(_region_window(converted, grid), f"{spec.path}: layer {name!r}")
    valid = np.isfinite(sample)
    report.nodata_share = float(1.0 - valid.mean()) if sample.size else None
    low, high = INPUT_VARIABLES[converted.name].valid_range
    inside = (sample[valid] >= low) & (sample[valid] <= high)
    report.out_of_range_share = float(1.0 - inside.mean()) if inside.size else None
    if report.nodata_share == 1.0:
        report.problems.append("no valid value within the region (on a sample)")
    if report.out_of_range_share:
        report.warnings.append(f"{report.out_of_range_share:.1%} of sampled values are outside {low:g}..{high:g} "
                               f"{converted.attrs['units']} and become nodata")
    return report


def _inspect_mask(region: Any, grid: TargetGrid, config_dir) -> LayerReport:
    report = LayerReport(layer="mask", path=str(region.mask))
    try:
        native = _read_raster("mask", _absolute(region.mask, config_dir), None, None, False, SAMPLE_SIDE * 2)
    except InputDataError as exc:
        report.problems.append(str(exc))
        return report
    report.driver = native.driver
    report.crs = native.data.rio.crs.to_string()
    report.overlap_share = coverage_share(native.data, grid)
    if report.overlap_share <= 0.0:
        report.problems.append("does not overlap the region")
    return report


def _region_window(data: xr.DataArray, grid: TargetGrid) -> xr.DataArray:
    """The part of a native-grid layer that lies under the region's bounds (in the layer's CRS)."""
    from pyproj import CRS, Transformer

    to_layer = Transformer.from_crs(grid.crs, CRS.from_user_input(data.rio.crs.to_wkt()), always_xy=True)
    xmin, ymin, xmax, ymax = to_layer.transform_bounds(*grid.bounds, densify_pts=21)
    window = data.sel(x=slice(xmin, xmax), y=slice(ymax, ymin))
    return window if window.sizes["x"] and window.sizes["y"] else data


def _units_differ(a: str, b: str) -> bool:
    try:
        return parse_units(a) != parse_units(b)
    except ValueError:
        return a.strip() != b.strip()


__all__ = [
    "open_layer", "load_climate", "load_mask", "inspect_inputs", "layer_files", "LayerReport",
    "InputCoverageWarning", "parse_units", "linear_conversion", "output_name", "coverage_share",
]
