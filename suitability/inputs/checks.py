"""Checks of an opened layer that read only a sample or its extent: plausibility of the declared units,
and how much of the region the layer covers.

Plausibility of the declared units is checked on a sample of at most 256 x 256 cells per time step (64
small windows spread over the layer), never the whole raster. Values outside the glossary's valid range
(after conversion) become NaN, never clamped; :func:`suitability.inputs.inspect_inputs` reports their share.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import xarray as xr

from ..errors import InputDataError
from ..grid import TargetGrid
from ..variables import INPUT_VARIABLES
from .units import output_name, parse_units

SAMPLE_SIDE = 256
_TEMPERATURE_LAYERS = ("tmin", "tmax", "tmean")
_FRACTION_LAYERS = ("water_availability", "water_stress", "humidity")
_WATER_FLUX_LAYERS = ("precipitation", "pet")
# A median monthly mean rate above this is taken as totals per month declared per day. The wettest places
# on Earth have about 30 mm d-1 as an annual mean (about 11 000-12 000 mm a year, from memory); common
# practice, no source for the threshold itself.
_MAX_MEDIAN_MM_PER_DAY = 40.0


def read_sample(data: xr.DataArray, where: str) -> np.ndarray:
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


def check_plausible(name: str, declared: str, scale: float, offset: float, sample: np.ndarray, where: str) -> None:
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
    if name in _WATER_FLUX_LAYERS:
        rate = scale * values + offset
        if (rate < 0).any():
            raise InputDataError(f"{where}: negative values ({spread}); expected rainfall and evapotranspiration >= 0")
        if float(np.median(rate)) > _MAX_MEDIAN_MM_PER_DAY:
            raise InputDataError(
                f"{where}: declared as {declared} but the values ({spread}) give a median of {float(np.median(rate)):.4g} "
                f"mm d-1, more than any climate's monthly mean rate; they look like totals per month: divide by the "
                "days of each month, or give the daily rate's units (e.g. mm d-1, kg m-2 s-1)"
            )
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


def cells_per_grid_cell(data: xr.DataArray, grid: TargetGrid) -> float | None:
    """How many layer cells fit in one grid cell (mean, in the grid's map plane); None if unknown."""
    footprint = _footprint(data, grid.crs)
    if footprint is None or footprint.area == 0:
        return None
    layer_cell = footprint.area / (data.sizes["x"] * data.sizes["y"])
    return grid.resolution[0] * grid.resolution[1] / layer_cell
