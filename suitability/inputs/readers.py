"""The input readers: one registry of formats, each saying how to recognise a path, open it lazily and
list the files it reads.

A layer's path is read by the first reader of :data:`READERS` that recognises it; GeoTIFF (any GDAL
raster) comes last and takes every other path. A path with a ``{month}`` placeholder (``{month}`` or
``{month:02d}``) is one file per month, each read by the reader that recognises it and stacked along
``month``. Every reader returns a :class:`~suitability.inputs.native.Native`: a lazy DataArray in the
file's own units and grid, north-up, NaN for nodata, the CRS written; units and alignment come after.

Adding a format is one entry here (plus its reader module and tests): see DEVELOPERS.md.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
import xarray as xr

from ..config import MONTH_FIELD, is_month_pattern
from ..errors import InputDataError
from .cf import read_dataset, read_zarr
from .native import MONTHS, Native
from .periods import to_climatology
from .raster import read_raster

_NETCDF_SUFFIXES = {".nc", ".nc4", ".netcdf", ".cdf", ".h5", ".hdf5"}


def _files_under(path: Path) -> list[Path]:
    """The file itself, or every file below a folder (a store spread over many files)."""
    if path.is_dir():
        return sorted(p for p in path.rglob("*") if p.is_file())
    return [path]


def _is_zarr(path: Path) -> bool:
    return path.suffix.lower() == ".zarr" or (
        path.is_dir() and ((path / ".zgroup").exists() or (path / "zarr.json").exists()))


@dataclass(frozen=True)
class Reader:
    """One input format.

    name: short name. recognises: path -> True if this reader reads it. read: opens one layer,
    ``read(name, path, *, band, variable, nodata, monthly, chunk) -> Native`` (lazy, nodata NaN, CRS
    written; raises InputDataError naming the file). files: path -> every file it reads (for checksums in
    the manifest and for ``resume``). refuses / refusal: a layer option this format has no use for, and
    what to tell a config that gives it (``{value}`` is the option's value).
    """

    name: str
    recognises: Callable[[Path], bool]
    read: Callable[..., Native]
    files: Callable[[Path], list[Path]] = _files_under
    refuses: str | None = None
    refusal: str = ""


#: The registry, tried in order; the last entry takes every path the others do not recognise.
READERS: dict[str, Reader] = {
    reader.name: reader
    for reader in [
        Reader("zarr", _is_zarr, read_zarr, refuses="band",
               refusal="gives 'band', which applies to raster files; name the NetCDF/Zarr variable instead"),
        Reader("netcdf", lambda path: path.suffix.lower() in _NETCDF_SUFFIXES, read_dataset, refuses="band",
               refusal="gives 'band', which applies to raster files; name the NetCDF/Zarr variable instead"),
        Reader("geotiff", lambda path: True, read_raster, refuses="variable",
               refusal="gives 'variable: {value}', which applies to NetCDF/Zarr; this is a raster file"),
    ]
}


def reader_for(path: Path) -> Reader:
    """The first reader of :data:`READERS` that recognises ``path``."""
    return next(reader for reader in READERS.values() if reader.recognises(path))


def month_path(path: str | Path, month: int) -> Path:
    """The file of ``month`` (1..12) for a ``{month}`` pattern path; other braces are left as they are."""
    return Path(MONTH_FIELD.sub(lambda m: format(month, m.group("spec") or ""), str(path)))


def absolute(path: str | Path, config_dir: str | Path | None) -> Path:
    """``path`` with ``~`` expanded, relative ones taken from ``config_dir`` (a validated config's are
    absolute already; this serves layer specs built in Python)."""
    path = Path(path).expanduser()
    return path if path.is_absolute() or config_dir is None else Path(config_dir) / path


def layer_files(spec: Any, config_dir: str | Path | None = None) -> list[Path]:
    """Every file a layer reads: the 12 files of a ``{month}`` pattern, else what its reader lists."""
    path = absolute(spec.path, config_dir)
    if is_month_pattern(path):
        return [month_path(path, m) for m in MONTHS]
    return reader_for(path).files(path)


def member_labels(name: str, spec: Any, path: Path, monthly: bool) -> list[str] | None:
    """The labels of a member dimension of the file of layer ``name`` (None if it has none)."""
    if is_month_pattern(path) or not path.exists():
        return None
    reader = reader_for(path)
    options = {"band": getattr(spec, "band", None), "variable": getattr(spec, "variable", None), "nodata": None}
    data = reader.read(name, path, monthly=monthly, chunk=512, **options).data
    return [str(v) for v in data["member"].values] if "member" in data.dims else None


def read_native(name: str, spec: Any, path: Path, monthly: bool, chunk: int, member: str | None = None) -> Native:
    """Open layer ``name`` of ``spec`` at ``path`` with the reader that recognises it (or as a ``{month}`` pattern).

    member: the ensemble member to take from a file with a member dimension (required for such a file)."""
    options = {"band": getattr(spec, "band", None), "variable": getattr(spec, "variable", None),
               "nodata": getattr(spec, "nodata", None)}
    if is_month_pattern(path):
        if not monthly:
            raise InputDataError(f"{path}: layer {name!r} is static; a {{month}} pattern is for monthly layers")
        return _read_month_pattern(name, path, options, chunk)
    if not path.exists():
        raise InputDataError(f"{path}: file of layer {name!r} does not exist")
    reader = reader_for(path)
    if reader.refuses is not None and options[reader.refuses] is not None:
        raise InputDataError(f"{path}: layer {name!r} " + reader.refusal.format(value=options[reader.refuses]))
    native = reader.read(name, path, monthly=monthly, chunk=chunk, **options)
    if "member" in native.data.dims:
        labels = [str(v) for v in native.data["member"].values]
        if member is None or member not in labels:
            expected = f"member {member!r} is not among them" if member else "only a scenario's own layers may hold members"
            raise InputDataError(f"{path}: layer {name!r} has members {', '.join(labels)}; {expected}")
        crs = native.data.rio.crs
        native = Native(native.data.sel(member=member, drop=True).rio.write_crs(crs), native.driver, native.file_units,
                        transformations=native.transformations, time=native.time, variable=native.variable)
    if "time" in native.data.dims:  # a series: the monthly climatology over the layer's period
        where = f"{path}: layer {name!r}" + (f" (variable {options['variable']!r})" if options["variable"] else "")
        crs = native.data.rio.crs
        data, info = to_climatology(native.data, getattr(spec, "period", None), where)
        native = Native(data.transpose("month", "y", "x").rio.write_crs(crs), native.driver, native.file_units,
                        transformations=native.transformations, time=info, variable=native.variable)
    return native


def _read_month_pattern(name: str, pattern: Path, options: dict, chunk: int) -> Native:
    paths = {m: month_path(pattern, m) for m in MONTHS}
    missing = [m for m, p in paths.items() if not p.exists()]
    if missing:
        listed = ", ".join(f"{m} ({paths[m].name})" for m in missing)
        raise InputDataError(f"{pattern}: layer {name!r}: files for month(s) {listed} do not exist; expected one file per month 1..12")
    months = [reader_for(path).read(name, path, monthly=False, chunk=chunk, **options) for path in paths.values()]
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
    transformations = tuple(dict.fromkeys(t for m in months for t in m.transformations))
    return Native(data, months[0].driver, months[0].file_units if len(units) == 1 else None, transformations)
