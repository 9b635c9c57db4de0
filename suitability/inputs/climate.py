"""Opening the climate layers of a config in canonical units, and aligning them on the target grid.

Every layer comes out as a dask-backed float32 DataArray, NaN for nodata, in the units of
:mod:`suitability.variables`, with dims ``(month, y, x)`` (month = 1..12) or ``(y, x)`` for static layers.
Which reader opens a path is decided by :mod:`.readers`; units by :mod:`.units`; the sample checks by
:mod:`.checks`.
"""

from __future__ import annotations

import warnings
from pathlib import Path
from dataclasses import dataclass
from typing import Any, NamedTuple

import numpy as np
import xarray as xr

from ..config import MEMBER_FIELD
from ..errors import InputDataError
from ..grid import TargetGrid, align_to_grid
from ..physiology.energy import wind_speed_at_2m
from ..variables import INPUT_VARIABLES
from .checks import check_plausible, coverage_share, read_sample
from .native import Native
from .raster import read_raster
from .readers import absolute, read_native
from .units import layer_conversion, output_name


class InputCoverageWarning(UserWarning):
    """A layer covers only part of the region; cells outside it are NaN."""


class InputLossWarning(UserWarning):
    """A layer (or some of its months) loses more than a small share of cells to invalid values or nodata."""


def open_layer(name: str, spec: Any, config_dir: str | Path | None = None, *, chunk: int = 512,
               member: str | None = None) -> xr.DataArray:
    """Open one climate layer lazily on its own grid, float32, in canonical units, nodata and invalid values NaN.

    name: config layer name (a key of ``variables.INPUT_VARIABLES``); spec: its LayerSpec (path, variable,
    units, resampling, nodata, band); config_dir: folder that relative paths are taken from.
    Returns a DataArray named after :func:`output_name`, with the CRS written and ``units`` in attrs.
    Raises InputDataError naming the file, the layer and what was expected.
    """
    return _valid_only(open_converted(name, spec, config_dir, chunk, member).converted)


def _valid_only(converted: xr.DataArray) -> xr.DataArray:
    low, high = INPUT_VARIABLES[converted.name].valid_range
    out = converted.where((converted >= low) & (converted <= high))
    out.attrs = converted.attrs
    return out


@dataclass(frozen=True)
class ToCanonical:
    """The elementwise change of a layer from its declared units to canonical ones, for lazy layers and for
    samples alike: ``values * scale + offset``, then ``1 - values`` for a water stress layer, and a wind
    measured at ``height_m`` brought to 2 m; float32."""

    name: str
    scale: float
    offset: float
    height_m: float | None = None

    def __call__(self, values):
        if (self.scale, self.offset) != (1.0, 0.0):
            values = values * np.float32(self.scale) + np.float32(self.offset)
        if self.name == "water_stress":
            values = 1.0 - values
        if self.name == "wind_speed" and self.height_m is not None and self.height_m != 2.0:
            values = wind_speed_at_2m(values, np.float32(self.height_m))  # the canonical layer is the wind at 2 m
        return values.astype(np.float32)


class OpenedLayer(NamedTuple):
    """A layer in canonical units before the valid-range mask, what was read, and the change between them."""

    converted: xr.DataArray
    native: Native
    to_canonical: ToCanonical

    def canonical_sample(self, grid: TargetGrid, where: str) -> np.ndarray:
        """:func:`.checks.read_sample` of the part of the layer under the region, in canonical units (float64).

        Read from the layer as read and converted afterwards: a window of the converted layer would make
        dask compute whole blocks of it (the conversion is a step after the read), a window of the layer as
        read only that window."""
        from .checks import region_window

        sample = read_sample(region_window(self.native.data, grid), where, self.native.sample_width)
        read_type = self.native.data.dtype if self.native.data.dtype.kind == "f" else np.float64
        return np.asarray(self.to_canonical(sample.astype(read_type)), dtype=np.float64)


def open_converted(name: str, spec: Any, config_dir, chunk: int, member: str | None = None) -> OpenedLayer:
    """The layer in canonical units before the valid-range mask, what was read, and the conversion."""
    if name not in INPUT_VARIABLES:
        raise InputDataError(f"unknown layer {name!r}; expected one of {', '.join(INPUT_VARIABLES)}")
    variable = INPUT_VARIABLES[name]
    path = member_path(absolute(spec.path, config_dir), member)
    native = read_native(name, spec, path, variable.monthly, chunk, member)
    where = f"{path}: layer {name!r}" + (f" (variable {spec.variable!r})" if getattr(spec, "variable", None) else "")
    declared = getattr(spec, "units", None) or native.file_units
    if not declared:
        raise InputDataError(f"{where}: no units; declare them in the config ({unit_hint(name)}) since the file has no 'units' attribute")
    try:
        result_name = output_name(name, declared)
        canonical = INPUT_VARIABLES[result_name].units
        scale, offset = layer_conversion(name, declared, "1" if name == "water_stress" else canonical)
    except ValueError as exc:
        hint = "" if "expected" in str(exc) else f"; expected units convertible to {INPUT_VARIABLES[name].units}"
        raise InputDataError(f"{where}: {exc}{hint}") from None

    sample = read_sample(native.data, where, native.sample_width)
    check_plausible(name, declared, scale, offset, sample, where)
    read = native.data
    if read.chunks is None:  # a series' monthly means, lazy without dask until here
        read = read.chunk({dim: -1 if dim == "month" else chunk for dim in read.dims})
    if not np.isfinite(sample).any() and not bool(np.isfinite(read).any().compute()):
        raise InputDataError(f"{where}: every cell is nodata or not a finite number; expected some valid values")

    to_canonical = ToCanonical(name, scale, offset, getattr(spec, "height_m", None))
    data = to_canonical(read)
    if data.rio.crs is None and native.data.rio.crs is not None:
        # Arithmetic drops the grid_mapping attribute, which is how a NetCDF names its CRS variable.
        data = data.rio.write_crs(native.data.rio.crs)
    data.name = result_name
    data.attrs = {
        "units": canonical, "long_name": INPUT_VARIABLES[result_name].long_name, "source": str(path),
        "source_layer": name, "declared_units": str(declared),
    }
    if native.time is not None:
        data.attrs["time_info"] = native.time.as_record()
    if native.variable is not None:
        data.attrs["source_variable"] = native.variable
    return OpenedLayer(data, native, to_canonical)


#: Examples of units a file of each layer is commonly in, for the hint when a layer declares none.
UNIT_EXAMPLES = {
    "tmin": ("K", "degC"), "tmax": ("K", "degC"), "tmean": ("K", "degC"),
    "shortwave": ("W m-2", "MJ m-2 d-1"), "par": ("mol m-2 d-1", "umol m-2 s-1"),
    "water_availability": ("fraction", "percent"), "water_stress": ("fraction", "percent"),
    "vpd": ("kPa", "hPa"), "humidity": ("percent", "fraction"), "elevation": ("m",), "lai": ("m2 m-2",),
    "precipitation": ("kg m-2 s-1", "mm d-1"), "pet": ("mm d-1", "kg m-2 s-1"), "wind_speed": ("m s-1",),
    "soil_water_capacity": ("mm",),
}


def unit_hint(name: str) -> str:
    """'e.g. units: K or units: degC' for layer ``name`` (its canonical units if no example is listed)."""
    examples = UNIT_EXAMPLES.get(name) or (INPUT_VARIABLES[name].units,)
    return "e.g. " + " or ".join(f"units: {u}" for u in examples)


def member_path(path: Path, member: str | None) -> Path:
    """``path`` with its ``{member}`` placeholder replaced by the member's name."""
    return Path(str(path).replace(MEMBER_FIELD, member)) if member is not None else path


def load_climate(climate_config: Any, grid: TargetGrid, config_dir: str | Path | None = None, chunk: int = 512,
                 member: str | None = None) -> xr.Dataset:
    """All layers of a climate section (or a scenario's overrides) aligned lazily on ``grid``.

    climate_config: mapping layer name -> LayerSpec (the config's ``climate`` or a scenario's ``climate``).
    Returns a Dataset keyed by output name (``par`` / ``water_availability`` where converted) with
    monthly layers (month, y, x), month = 1..12, static layers (y, x); member: the ensemble member whose
    files (``{member}`` in a path) or slice (a member dimension) are read; chunks {"month": -1, "y": chunk,
    "x": chunk}, coordinates exactly the grid's; ``attrs["time_info"]`` maps each layer made from a time
    series (or a dated 12-step file) to its calendar, period and years (:meth:`.periods.TimeInfo.as_record`);
    ``attrs["variables"]`` each NetCDF/Zarr layer to the file variable it came from. A layer not reaching the region is an InputDataError; one
    covering it partly gives an InputCoverageWarning with the share covered (cells outside are NaN).
    """
    layers: dict[str, xr.DataArray] = {}
    time_info: dict[str, dict] = {}
    variables: dict[str, str] = {}
    for name, spec in climate_config.items():
        opened = open_converted(name, spec, config_dir, chunk, member)
        layer = _valid_only(opened.converted)
        if "time_info" in layer.attrs:
            time_info[name] = layer.attrs["time_info"]
        if "source_variable" in layer.attrs:
            variables[name] = layer.attrs["source_variable"]
        path = member_path(absolute(spec.path, config_dir), member)
        share = coverage_share(layer, grid)
        if share <= 0.0:
            raise InputDataError(
                f"{path}: layer {name!r} does not overlap the region (layer bounds {tuple(round(b, 4) for b in layer.rio.bounds())} "
                f"in {layer.rio.crs}; region bounds {grid.bounds} in {grid.crs.to_string()})"
            )
        if share < 1.0 - 1e-6:
            warnings.warn(f"{path}: layer {name!r} covers {share:.1%} of the region; cells outside it are NaN",
                          InputCoverageWarning, stacklevel=2)
        for message in layer_losses(name, opened, grid, f"{path}: layer {name!r}"):
            warnings.warn(message, InputLossWarning, stacklevel=2)
        resampling = getattr(spec, "resampling", None) or INPUT_VARIABLES[name].resampling
        if layer.name in layers:
            raise InputDataError(f"{path}: layer {name!r} gives {layer.name!r}, which another layer already gives")
        layers[layer.name] = align_to_grid(layer, grid, resampling, chunk)
    # Every monthly layer was checked to hold each month 1..12 once (sorted), so their months agree.
    dataset = xr.Dataset(layers).rio.write_crs(grid.crs.to_wkt())
    dataset.attrs["time_info"] = time_info
    dataset.attrs["variables"] = variables
    return dataset


def layer_losses(name: str, opened: OpenedLayer, grid: TargetGrid, where: str) -> list[str]:
    """:func:`.checks.lost_cells` on a sample of the part of the layer (canonical units, before the
    valid-range mask) that lies under the region; the same call ``check`` makes."""
    from .checks import lost_cells

    return lost_cells(name, opened.converted, opened.canonical_sample(grid, where), where)


def load_mask(region_config: Any, grid: TargetGrid, config_dir: str | Path | None = None, chunk: int = 512) -> xr.DataArray | None:
    """The region's ``mask`` on the grid as a lazy boolean (y, x): True where the mask is non-zero and not
    nodata (nearest-neighbour resampling). None if the region has no mask."""
    mask_path = getattr(region_config, "mask", None)
    if mask_path is None:
        return None
    path = absolute(mask_path, config_dir)
    if not path.exists():
        raise InputDataError(f"{path}: the region mask does not exist")
    native = read_raster("mask", path, chunk=chunk).data.astype(np.float32)
    aligned = align_to_grid(native, grid, "nearest", chunk)
    keep = aligned.notnull() & (aligned != 0)
    keep.name = "mask"
    if not bool(keep.any().compute()):
        raise InputDataError(f"{path}: the region mask keeps no cell of the region (every cell is 0 or nodata "
                             "there); expected non-zero values where results are wanted")
    return keep
