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


def sample_width(time_steps: int | None = None) -> int:
    """Side [cells] of each of the sample's 64 windows: 32, or for a layer averaged from a series of
    ``time_steps`` steps 32 sqrt(12 / steps), at least 4, so that about as many values are read as for a
    12-month layer (6 for 30 years of months: each window's whole series is read and averaged)."""
    if not time_steps or time_steps <= 12:
        return SAMPLE_SIDE // 8
    return max(4, round(SAMPLE_SIDE // 8 * (12.0 / time_steps) ** 0.5))


def read_sample(data: xr.DataArray, where: str, width: int = SAMPLE_SIDE // 8) -> np.ndarray:
    """A sample of at most 256 x 256 cells per time step, as float64.

    8 x 8 windows of ``width`` x ``width`` cells (32 unless :func:`sample_width` says otherwise) spread
    evenly over the layer: they touch at most 64 blocks of a tiled file. A dask-backed layer is read in one
    dask computation of the 64 slices, so a block under several windows is read once. A layer that is lazy
    without dask (a series' monthly means, :func:`.periods._monthly_means`) is read one row of windows at a
    time: only the series of those rows is read and averaged, not the whole file.
    """
    import dask.array as da

    data = data.transpose(..., "y", "x")
    rows, columns = (_sample_windows(data.sizes[dim], width=width) for dim in ("y", "x"))
    try:
        if data.chunks is not None:  # dask-backed (reading .data would read a lazy layer whole)
            values = da.block([[data.data[..., r, c] for c in columns] for r in rows]).compute()
        else:  # lazy without dask (a series' monthly means): one read per row of windows, not per window
            across = slice(None) if columns == [slice(None)] else np.concatenate([np.arange(c.start, c.stop) for c in columns])
            values = np.concatenate([np.asarray(data.isel(y=r, x=across).values) for r in rows], axis=-2)
    except InputDataError:
        raise  # a reader already named the file and the layer
    except Exception as exc:  # noqa: BLE001 - a truncated file fails here, on first read
        raise InputDataError(f"{where}: cannot read the values; the file may be truncated or corrupt ({exc})") from None
    return np.asarray(values, dtype=np.float64)


#: Share of a layer's (or one month's) sampled cells that may be lost to invalid values before a
#: warning names them (common practice, no source: a few edge cells are normal, 1 % is not noise).
LOSS_WARNING_SHARE = 0.01


def lost_cells(name: str, converted: xr.DataArray, sample: np.ndarray, where: str) -> list[str]:
    """Warnings for the cells a layer loses on reading, from a sample in canonical units (before the
    valid-range mask) of the region: the share of values that are not finite or outside the layer's valid
    range, per month where it has months, and months with more nodata than the layer's best month (a
    month missing in part, e.g. missing chunks). Each names ``where`` (file and layer), the months and
    the share; one for every kind of loss above :data:`LOSS_WARNING_SHARE`. ``check`` and ``run`` both
    call this on the same sample."""
    if sample.size == 0:
        return []
    low, high = INPUT_VARIABLES[converted.name].valid_range
    values = sample.reshape((-1,) + sample.shape[-2:]) if sample.ndim >= 2 else sample.reshape(1, 1, -1)
    months = [int(m) for m in converted["month"].values] if "month" in converted.dims else [None]
    invalid, nodata = [], []
    with np.errstate(invalid="ignore"):
        for block in values:
            present = ~np.isnan(block)
            bad = present & ~((block >= low) & (block <= high))  # +-inf and out-of-range values
            invalid.append(float(bad.mean()))
            nodata.append(float((~present).mean()))
    warnings_: list[str] = []
    units = INPUT_VARIABLES[converted.name].units
    lossy = [(m, share) for m, share in zip(months, invalid) if share > LOSS_WARNING_SHARE]
    if lossy:
        warnings_.append(f"{where}: {_months_text(lossy)} lose cells to values that are not finite or outside "
                         f"{low:g}..{high:g} {units} (they become nodata)")
    if len(nodata) > 1:
        best = min(nodata)
        gaps = [(m, share - best) for m, share in zip(months, nodata) if share - best > LOSS_WARNING_SHARE]
        if gaps:
            warnings_.append(f"{where}: {_months_text(gaps)} have more nodata than the layer's most complete month "
                             "(missing or damaged parts of the file?)")
    return warnings_


def _months_text(items: list[tuple[int | None, float]]) -> str:
    if items[0][0] is None:
        return f"{items[0][1]:.1%} of the sampled cells"
    return ", ".join(f"month {m}: {share:.1%}" for m, share in items) + " of the sampled cells"


def _sample_windows(size: int, windows: int = 8, width: int = SAMPLE_SIDE // 8) -> list[slice]:
    """The slices of ``windows`` windows of ``width`` cells spread evenly over ``size``; all of it if smaller."""
    if size <= windows * width:
        return [slice(None)]
    starts = np.linspace(0, size - width, windows).round().astype(int)
    return [slice(int(start), int(start) + width) for start in starts]


#: A monthly mean wind speed above this [m s-1] is taken as a units slip: the windiest stations' annual means
#: are about 10-20 m s-1 (common practice, no source).
_MAX_MEDIAN_WIND_M_S = 25.0


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
    if name == "wind_speed" and float(np.median(scale * values + offset)) > _MAX_MEDIAN_WIND_M_S:
        raise InputDataError(
            f"{where}: declared as {declared} but the values ({spread}) give a median of "
            f"{float(np.median(scale * values + offset)):.4g} m s-1, more than any climate's monthly mean wind; "
            "they look like km h-1 or knots: declare their units (e.g. units: km h-1)"
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
    import shapely.affinity
    from pyproj import CRS, Transformer

    box = shapely.box(*grid.bounds)
    around = _global_band_share(data, grid)
    if around is not None:
        return around
    footprint = _footprint(data, grid.crs)
    if footprint is not None:
        shifts = (0.0, -360.0, 360.0) if grid.is_geographic and data.rio.crs.is_geographic else (0.0,)
        # longitude conventions: the alignment shifts a lon/lat layer by 360 degrees where that overlaps more
        return max(float(min(1.0, shapely.affinity.translate(footprint, xoff=k).intersection(box).area / box.area))
                   for k in shifts)
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


def _global_band_share(data: xr.DataArray, grid: TargetGrid) -> float | None:
    """For a longitude/latitude layer that goes all the way round (360 degrees of longitude): the share of
    the region's latitudes it covers; None for any other layer. Projecting the bounds of such a layer into
    a projected CRS (UTM, equal-area) is meaningless, so its coverage is decided in its own coordinates."""
    from pyproj import CRS, Transformer

    layer_crs = CRS.from_user_input(data.rio.crs.to_wkt())
    if not layer_crs.is_geographic:
        return None
    left, bottom, right, top = data.rio.bounds(recalc=True)
    if abs(right - left) < 360.0 - 1e-6:
        return None
    to_layer = Transformer.from_crs(grid.crs, layer_crs, always_xy=True)
    xmin, ymin, xmax, ymax = grid.bounds
    edge = np.linspace(0.0, 1.0, 101)
    xs = np.concatenate([xmin + (xmax - xmin) * edge, np.full(101, xmax), xmax - (xmax - xmin) * edge, np.full(101, xmin)])
    ys = np.concatenate([np.full(101, ymin), ymin + (ymax - ymin) * edge, np.full(101, ymax), ymax - (ymax - ymin) * edge])
    with np.errstate(all="ignore"):
        _, lat = to_layer.transform(xs, ys, errcheck=False)
    lat = np.asarray(lat)[np.isfinite(lat)]
    if lat.size == 0:
        return None
    if grid.contains_pole() is not None:
        lat = np.append(lat, 90.0 if grid.contains_pole() == "North Pole" else -90.0)
    south, north = float(lat.min()), float(lat.max())
    low, high = min(bottom, top), max(bottom, top)
    if north <= south:
        return 1.0 if low <= south <= high else 0.0
    return float(max(0.0, min(north, high) - max(south, low)) / (north - south))


def cells_per_grid_cell(data: xr.DataArray, grid: TargetGrid) -> float | None:
    """How many layer cells fit in one grid cell (mean, in the grid's map plane); None if unknown."""
    footprint = _footprint(data, grid.crs)
    if footprint is None or footprint.area == 0:
        return None
    layer_cell = footprint.area / (data.sizes["x"] * data.sizes["y"])
    return grid.resolution[0] * grid.resolution[1] / layer_cell


def region_window(data: xr.DataArray, grid: TargetGrid) -> xr.DataArray:
    """The part of a native-grid layer that lies under the region's bounds (in the layer's CRS)."""
    from pyproj import CRS, Transformer

    to_layer = Transformer.from_crs(grid.crs, CRS.from_user_input(data.rio.crs.to_wkt()), always_xy=True)
    xmin, ymin, xmax, ymax = to_layer.transform_bounds(*grid.bounds, densify_pts=21)
    window = data.sel(x=slice(xmin, xmax), y=slice(ymax, ymin))
    return window if window.sizes["x"] and window.sizes["y"] else data
