"""The target grid of a run and the alignment of every layer onto it.

A :class:`TargetGrid` is a north-up, unrotated grid: CRS, affine transform and shape. It is built from the
config's explicit ``grid`` (bounds snapped outward to whole cells, so the same resolution always gives the
same cell edges) or copied from a ``like`` raster. Its spatial coordinates are cell centres, and every layer
aligned with :func:`align_to_grid` carries exactly these coordinate values (copied, never recomputed), so
that arithmetic between layers never meets coordinates that differ in the last bit.

Everything here is lazy: latitude and cell area are dask arrays and reprojection goes through odc-geo's
dask reprojection (block by block with rasterio/GDAL underneath), so no whole raster is ever loaded.
"""

from __future__ import annotations

import math
import threading
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import dask.array as dsa
import numpy as np
import rioxarray  # noqa: F401 - registers the .rio accessor
import xarray as xr
from affine import Affine
from pyproj import CRS, Transformer

from .errors import InputDataError

# Snapping tolerance, as a fraction of a cell: bounds within this of a cell edge are taken as on it, so
# float noise such as 55.0 / 0.05 = 1099.9999999999998 does not add a row or column.
_SNAP_TOLERANCE = 1e-6


def zones_extent(path: str | Path, crs: Any, margin: float = 0.0) -> tuple[float, float, float, float]:
    """(xmin, ymin, xmax, ymax) in ``crs`` of the polygons in ``path`` (GeoPackage, GeoJSON, Shapefile),
    widened by ``margin`` [units of ``crs``] on every side. The file must carry a CRS."""
    import geopandas as gpd

    path = Path(path)
    if not path.exists():
        raise InputDataError(f"{path}: the zones file that gives the region's extent does not exist")
    try:
        zones = gpd.read_file(path)
    except Exception as exc:  # noqa: BLE001 - pyogrio/fiona raise several types for unreadable files
        raise InputDataError(f"{path}: cannot read the zones file that gives the region's extent ({exc})") from None
    if zones.crs is None:
        raise InputDataError(f"{path}: the zones file has no CRS; expected polygons with a CRS (e.g. a GeoPackage)")
    zones = zones[zones.geometry.notna() & ~zones.geometry.is_empty]
    if zones.empty:
        raise InputDataError(f"{path}: the zones file holds no geometry; expected district polygons")
    xmin, ymin, xmax, ymax = (float(v) for v in zones.to_crs(CRS.from_user_input(crs)).total_bounds)
    if not all(math.isfinite(v) for v in (xmin, ymin, xmax, ymax)):
        raise InputDataError(f"{path}: the zones cannot be transformed to {crs}")
    return (xmin - margin, ymin - margin, xmax + margin, ymax + margin)


@dataclass(frozen=True)
class TargetGrid:
    """A north-up grid. crs: pyproj CRS; transform: affine of the upper-left cell corner; width, height: cells."""

    crs: CRS
    transform: Affine
    width: int
    height: int

    def __repr__(self) -> str:
        return (f"TargetGrid(crs={self.crs.to_string()!r}, resolution={self.resolution}, bounds={self.bounds}, "
                f"shape={self.shape})")

    # ------------------------------------------------------------------------------------ construction

    @classmethod
    def from_region(cls, region_config: Any, config_dir: str | Path | None = None) -> "TargetGrid":
        """The grid of a config ``region`` section: its explicit ``grid`` or the grid of its ``like`` raster."""
        grid = getattr(region_config, "grid", None)
        if grid is not None:
            if getattr(grid, "zones", None) is not None:
                bounds = zones_extent(grid.zones, grid.crs, getattr(grid, "margin", 0.0))
            else:
                bounds = grid.target_bounds() if hasattr(grid, "target_bounds") else grid.bounds
            made = cls.from_bounds(grid.crs, grid.resolution, bounds)
            made.check_projectable("region.grid")
            return made
        like = Path(region_config.like)
        if not like.is_absolute() and config_dir is not None:
            like = Path(config_dir) / like
        return cls.from_raster(like)

    @classmethod
    def from_bounds(cls, crs: Any, resolution: float | tuple[float, float], bounds: tuple[float, float, float, float]) -> "TargetGrid":
        """Grid of cells ``resolution`` [CRS units] wide covering ``bounds``, edges snapped outward to multiples of it."""
        crs = CRS.from_user_input(crs)
        res_x, res_y = (resolution, resolution) if np.isscalar(resolution) else resolution
        res_x, res_y = float(res_x), float(res_y)
        if res_x <= 0 or res_y <= 0:
            raise ValueError(f"resolution must be positive, got {resolution}")
        xmin, ymin, xmax, ymax = (float(b) for b in bounds)
        left, right = _snap_down(xmin, res_x) * res_x, _snap_up(xmax, res_x) * res_x
        bottom, top = _snap_down(ymin, res_y) * res_y, _snap_up(ymax, res_y) * res_y
        width, height = round((right - left) / res_x), round((top - bottom) / res_y)
        if width < 1 or height < 1:
            raise ValueError(f"bounds {bounds} give an empty grid at resolution {resolution}")
        return cls(crs, Affine(res_x, 0.0, left, 0.0, -res_y, top), int(width), int(height))

    @classmethod
    def from_raster(cls, path: str | Path) -> "TargetGrid":
        """Copy the grid (CRS, transform, shape) of a raster file; a south-up raster gives the north-up grid."""
        import rasterio
        from rasterio.errors import RasterioIOError

        path = Path(path)
        if not path.exists():
            raise InputDataError(f"{path}: the 'like' raster of the region does not exist; expected a raster whose grid is copied")
        try:
            with rasterio.open(path) as src:
                crs, transform, width, height = src.crs, src.transform, src.width, src.height
        except RasterioIOError as exc:
            raise InputDataError(f"{path}: cannot open the 'like' raster of the region ({exc})") from None
        if crs is None:
            raise InputDataError(f"{path}: the 'like' raster has no CRS; expected a georeferenced raster (GeoTIFF with a CRS)")
        if transform.b != 0 or transform.d != 0:
            raise InputDataError(f"{path}: the 'like' raster is rotated (transform {tuple(transform)[:6]}); expected a north-up grid")
        if transform.e > 0:  # south-up: same cells, listed from the bottom
            transform = Affine(transform.a, 0.0, transform.c, 0.0, -transform.e, transform.f + transform.e * height)
        if transform.a < 0:
            raise InputDataError(f"{path}: the 'like' raster runs east to west (negative pixel width); expected west to east")
        from .config.schema import MAX_GRID_CELLS

        if width * height > MAX_GRID_CELLS:
            raise InputDataError(
                f"{path}: the 'like' raster has {width} x {height} = {width * height:.3g} cells, "
                f"{width * height * 4 / 2**30:.3g} GiB per float32 layer; at most {MAX_GRID_CELLS:.0e} cells: "
                "expected a raster of the region at the resolution wanted, or split the region"
            )
        return cls(CRS.from_user_input(crs.to_wkt()), transform, int(width), int(height))

    def check_projectable(self, where: str) -> None:
        """Refuse a grid whose cells do not all have a longitude and latitude (bounds beyond the area where
        the projection is defined, e.g. UTM bounds of 5e7 m): ConfigError naming ``where`` and a point.

        Checked on a 21 x 21 lattice of points over the grid, corners and edges included, transformed to
        the CRS's geographic coordinates and back (a point that does not return within a metre-sized
        tolerance is outside the projection's domain)."""
        from .errors import ConfigError

        xmin, ymin, xmax, ymax = self.bounds
        xs, ys = np.meshgrid(np.linspace(xmin, xmax, 21), np.linspace(ymin, ymax, 21))
        geodetic = self.crs.geodetic_crs or CRS.from_epsg(4326)
        forward = Transformer.from_crs(self.crs, geodetic, always_xy=True)
        backward = Transformer.from_crs(geodetic, self.crs, always_xy=True)
        with np.errstate(all="ignore"):
            lon, lat = forward.transform(xs, ys, errcheck=False)
            bx, by = backward.transform(lon, lat, errcheck=False)
            tolerance = 1e-3 * max(self.resolution)
            bad = ~(np.isfinite(lon) & np.isfinite(lat) & (np.abs(bx - xs) <= tolerance) & (np.abs(by - ys) <= tolerance))
        if self.is_geographic:
            bad = ~(np.isfinite(lon) & np.isfinite(lat))
        if bad.any():
            i = np.argwhere(bad)[0]
            raise ConfigError(
                f"{where}: bounds {list(self.bounds)} reach beyond the area where {self.crs.to_string()} is defined: "
                f"the point ({xs[tuple(i)]:.6g}, {ys[tuple(i)]:.6g}) has no longitude/latitude; expected bounds "
                "in the units and the area of use of the CRS"
            )

    def contains_pole(self) -> str | None:
        """'North Pole' / 'South Pole' if the grid covers a geographic pole (projected grids only), else None."""
        if self.is_geographic:
            return None
        geodetic = self.crs.geodetic_crs or CRS.from_epsg(4326)
        to_grid = Transformer.from_crs(geodetic, self.crs, always_xy=True)
        xmin, ymin, xmax, ymax = self.bounds
        for name, lat in (("North Pole", 90.0), ("South Pole", -90.0)):
            with np.errstate(all="ignore"):
                x, y = to_grid.transform(0.0, lat, errcheck=False)
            if np.isfinite(x) and np.isfinite(y) and xmin <= x <= xmax and ymin <= y <= ymax:
                return name
        return None

    # ------------------------------------------------------------------------------------ geometry

    @property
    def resolution(self) -> tuple[float, float]:
        """Cell size (x, y) in CRS units, both positive."""
        return (self.transform.a, -self.transform.e)

    @property
    def shape(self) -> tuple[int, int]:
        """(height, width) = (y, x)."""
        return (self.height, self.width)

    @property
    def bounds(self) -> tuple[float, float, float, float]:
        """(xmin, ymin, xmax, ymax) of the outer cell edges in CRS units."""
        left, top = self.transform.c, self.transform.f
        return (left, top + self.transform.e * self.height, left + self.transform.a * self.width, top)

    @property
    def is_geographic(self) -> bool:
        return bool(self.crs.is_geographic)

    @property
    def x(self) -> np.ndarray:
        """Cell-centre x coordinates (west to east) [CRS units]."""
        return self.transform.c + self.transform.a * (np.arange(self.width) + 0.5)

    @property
    def y(self) -> np.ndarray:
        """Cell-centre y coordinates (north to south) [CRS units]."""
        return self.transform.f + self.transform.e * (np.arange(self.height) + 0.5)

    def coords(self) -> dict[str, xr.DataArray]:
        """The x and y coordinates as DataArrays with CF attributes of the CRS axes."""
        attrs_x, attrs_y = _axis_attrs(self.crs)
        return {"y": xr.DataArray(self.y, dims="y", attrs=attrs_y), "x": xr.DataArray(self.x, dims="x", attrs=attrs_x)}

    @property
    def geobox(self):
        """The grid as an odc-geo GeoBox (used for reprojection)."""
        from odc.geo.geobox import GeoBox

        return GeoBox((self.height, self.width), self.transform, self.crs.to_wkt())

    def same_grid(self, crs: Any, transform: Affine, shape: tuple[int, int]) -> bool:
        """True if (crs, transform, (height, width)) describe this grid, up to 1e-6 of a cell."""
        if tuple(shape) != self.shape or not CRS.from_user_input(crs).equals(self.crs, ignore_axis_order=True):
            return False
        tolerance = _SNAP_TOLERANCE * min(self.resolution)
        return all(abs(a - b) <= tolerance for a, b in zip(tuple(transform)[:6], tuple(self.transform)[:6]))

    # ------------------------------------------------------------------------------------ lazy layers

    def _spatial_chunks(self, chunk: int) -> tuple[tuple[int, ...], tuple[int, ...]]:
        return dsa.core.normalize_chunks((chunk, chunk), self.shape)

    def template(self, chunk: int = 512) -> xr.DataArray:
        """A lazy float32 (y, x) array of zeros with the grid's coordinates and CRS; chunks (chunk, chunk)."""
        data = dsa.zeros(self.shape, dtype=np.float32, chunks=(chunk, chunk))
        return self._wrap(data, "template")

    def latitude(self, chunk: int = 512) -> xr.DataArray:
        """Latitude of each cell centre [degrees north] on the CRS's own datum; lazy (y, x) float32.

        Projected grids: inverse projection of the cell centres with pyproj (``always_xy=True``), block by
        block. Geographic grids: the same call, which reduces to the y coordinate.
        """
        ychunks, xchunks = self._spatial_chunks(chunk)
        y = dsa.from_array(self.y[:, None], chunks=(ychunks, 1))
        x = dsa.from_array(self.x[None, :], chunks=(1, xchunks))
        data = dsa.map_blocks(_latitude_block, y, x, self.crs.to_wkt(), dtype=np.float32, chunks=(ychunks, xchunks))
        out = self._wrap(data, "latitude")
        out.attrs.update(units="degrees_north", standard_name="latitude", long_name="latitude of the cell centre")
        return out

    def cell_area_m2(self, chunk: int = 512) -> xr.DataArray:
        """Area of each cell [m2], lazy (y, x) float64.

        Projected CRS: the map-plane area, x resolution times y resolution times the squared axis unit in
        metres. It is the area as the CRS measures it, not the area on the ellipsoid; they differ by the
        projection's areal scale factor (for UTM within about 0.2 % of the central meridian zone).

        Geographic CRS: the exact area of the ellipsoidal quadrangle between latitudes phi1, phi2 and
        longitudes 1 radian = delta_lambda apart: A = a^2 / 2 * delta_lambda * (q(phi2) - q(phi1)),
        q(phi) = (1 - e^2) [sin phi / (1 - e^2 sin^2 phi) + artanh(e sin phi) / e] (Snyder 1987, Map
        Projections: A Working Manual, USGS Prof. Paper 1395, eq. 3-12; on a sphere q = 2 sin phi), with a
        and e of the CRS's ellipsoid.
        """
        rows = self.row_cell_area_m2(np.arange(self.height))
        ychunks, xchunks = self._spatial_chunks(chunk)
        column = dsa.from_array(rows[:, None], chunks=(ychunks, 1))
        data = dsa.broadcast_to(column, self.shape, chunks=(ychunks, xchunks))
        out = self._wrap(data, "cell_area")
        out.attrs.update(units="m2", long_name="cell area" + (" in the map plane" if not self.is_geographic else ""))
        return out

    def row_cell_area_m2(self, rows) -> np.ndarray:
        """Area [m2] of a cell in each of the grid rows ``rows`` (numpy, float64); see :meth:`cell_area_m2`."""
        rows = np.asarray(rows)
        factor = self.crs.axis_info[0].unit_conversion_factor
        if not self.is_geographic:
            factor_y = self.crs.axis_info[1].unit_conversion_factor
            return np.full(rows.shape, self.resolution[0] * factor * self.resolution[1] * factor_y, dtype="float64")
        # factor converts the CRS's angular unit (usually degrees) to radians
        top = np.clip((self.transform.f + self.transform.e * rows) * factor, -math.pi / 2, math.pi / 2)
        bottom = np.clip((self.transform.f + self.transform.e * (rows + 1)) * factor, -math.pi / 2, math.pi / 2)
        ellipsoid = self.crs.ellipsoid
        return ellipsoidal_zone_area_m2(top, bottom, self.resolution[0] * factor, ellipsoid.semi_major_metre,
                                        ellipsoid.inverse_flattening)

    def _wrap(self, data, name: str) -> xr.DataArray:
        out = xr.DataArray(data, dims=("y", "x"), coords=self.coords(), name=name)
        return out.rio.write_crs(self.crs.to_wkt()).rio.write_transform(self.transform)


# ---------------------------------------------------------------------------------------- alignment


#: Side [cells] of the blocks a layer is warped onto the grid in, whatever the run's chunk size
#: (:func:`align_to_grid`): the default ``compute.chunk_size``, so that by default no re-blocking follows.
ALIGNMENT_BLOCK = 512


def align_to_grid(da: xr.DataArray, grid: TargetGrid, resampling: str, chunk: int = 512) -> xr.DataArray:
    """``da`` lazily on ``grid``: same dims order, spatial dims (y, x) with exactly the grid's coordinates.

    da: DataArray with spatial dims ``y`` and ``x`` (regular cell-centre coordinates) and a CRS written by
    rioxarray; other dims (``month``) are kept whole in one chunk. NaN is nodata; cells of the grid not
    covered by ``da`` become NaN. resampling: a rasterio Resampling name ("bilinear", "average", ...).

    On the same grid (CRS and transform equal to 1e-6 of a cell) only the coordinates are replaced by the
    grid's. Otherwise odc-geo's dask reprojection is used, which calls ``rasterio.warp.reproject`` per
    output block with the GDAL warp options XSCALE=YSCALE=1: "bilinear" then interpolates between the 4
    source cells around each cell centre, whatever the ratio of cell sizes. (Left to itself GDAL widens
    the kernel when the source is finer than the grid, but a widened kernel is cut at block edges, so the
    result would depend on the chunk size.) For a source much finer than the grid use "average", which
    weights every source cell of the footprint.

    The warp is always done in blocks of :data:`ALIGNMENT_BLOCK` cells, anchored at the grid's corner,
    and only then cut into blocks of ``chunk``: GDAL's warper approximates the coordinate transform along
    each row of a block to within 1/8 of a source cell (its default error threshold, which
    ``rasterio.warp.reproject`` does not let a caller change), so a cell's value depends on the block it
    was warped in; with warp blocks fixed, it no longer depends on ``chunk`` (``compute.chunk_size``).
    """
    from odc.geo.xr import xr_reproject

    if da.rio.crs is None:
        raise InputDataError(f"layer {da.name!r}: no CRS; expected a georeferenced layer")
    da = _wrap_longitudes(_north_up(da), grid)
    other = [d for d in da.dims if d not in ("y", "x")]
    chunks = {**{d: -1 for d in other}, "y": chunk, "x": chunk}
    if grid.same_grid(da.rio.crs.to_wkt(), da.rio.transform(recalc=True), (da.sizes["y"], da.sizes["x"])):
        out = da.assign_coords(x=grid.x, y=grid.y)
    else:
        if not isinstance(da.data, dsa.Array):
            da = da.chunk({**{d: -1 for d in other}, "y": chunk, "x": chunk})
        da = da.transpose(*other, "y", "x")
        where = da.attrs.get("source", "")
        where = f"{where}: layer {da.attrs.get('source_layer', da.name)!r}" if where else f"layer {da.name!r}"
        pole = grid.contains_pole()
        if pole is not None and da.rio.crs.is_geographic:
            raise InputDataError(
                f"{where}: the region's grid ({grid.crs.to_string()}) contains the {pole}, where a layer in "
                "longitude/latitude cannot be aligned onto it; give this layer in the region's CRS (for example "
                f"gdalwarp -t_srs {grid.crs.to_string()}) or choose a region without the pole"
            )
        try:
            out = xr_reproject(
                da, grid.geobox, resampling=resampling, dst_nodata=np.nan, src_nodata=np.nan,
                chunks=(ALIGNMENT_BLOCK, ALIGNMENT_BLOCK),
                always_yx=True,
            )
        except Exception as exc:  # noqa: BLE001 - the alignment library's failures, said in our words
            raise InputDataError(
                f"{where}: cannot be aligned onto the region's grid ({grid.crs.to_string()}, bounds {grid.bounds}): "
                f"{type(exc).__name__}: {exc}; expected a layer whose extent can be projected into the region's CRS"
            ) from exc
        out = out.drop_vars([c for c in out.coords if c not in ("x", "y", *other)])
        out = out.assign_coords(x=grid.x, y=grid.y)
    out = out.chunk(chunks)
    out = out.assign_coords(grid.coords())
    out = out.rio.write_crs(grid.crs.to_wkt()).rio.write_transform(grid.transform)
    out.name = da.name
    out.attrs = {k: v for k, v in da.attrs.items() if k not in ("_FillValue", "nodata", "grid_mapping")}
    xr.align(out, grid.template(chunk), join="exact")  # raises if a coordinate differs in the last bit
    return out


def _wrap_longitudes(da: xr.DataArray, grid: TargetGrid) -> xr.DataArray:
    """A longitude/latitude layer in the longitude convention of a longitude/latitude grid (lazily).

    A layer that goes all the way round gets a copy shifted by 360 degrees on the side where the grid
    reaches beyond it (a region across the antimeridian, e.g. 170..190 with a -180..180 layer); any other
    layer is shifted by -360, 0 or +360 degrees, whichever overlaps the grid most (a 0..360 layer and a
    region given in negative longitudes)."""
    if not grid.is_geographic or da.rio.crs is None or not da.rio.crs.is_geographic or da.sizes["x"] < 2:
        return da
    x = da["x"].values
    step = abs(float(x[1] - x[0]))
    west, east = float(x.min()) - step / 2, float(x.max()) + step / 2
    left, _, right, _ = grid.bounds
    crs, attrs = da.rio.crs, da.attrs
    if east - west >= 360.0 - 1e-6 * 360.0:
        parts = [da]
        if right > east:
            parts.append(da.assign_coords(x=x + 360.0))
        if left < west:
            parts.insert(0, da.assign_coords(x=x - 360.0))
        if len(parts) == 1:
            return da
        wrapped = xr.concat(parts, dim="x")
    else:
        overlap = {k: max(0.0, min(east + k, right) - max(west + k, left)) for k in (0.0, -360.0, 360.0)}
        shift = max(overlap, key=lambda k: (overlap[k], k == 0.0))
        if shift == 0.0:
            return da
        wrapped = da.assign_coords(x=x + shift)
    wrapped.attrs = attrs
    return wrapped.rio.write_crs(crs)


def _north_up(da: xr.DataArray) -> xr.DataArray:
    """y descending (north first) and x ascending, by reversing the order lazily if needed."""
    if da.sizes["y"] > 1 and da["y"].values[1] > da["y"].values[0]:
        da = da.isel(y=slice(None, None, -1))
    if da.sizes["x"] > 1 and da["x"].values[1] < da["x"].values[0]:
        da = da.isel(x=slice(None, None, -1))
    return da


# ---------------------------------------------------------------------------------------- helpers


def _snap_down(value: float, step: float) -> int:
    cells = value / step
    nearest = round(cells)
    return int(nearest) if abs(cells - nearest) <= _SNAP_TOLERANCE else math.floor(cells)


def _snap_up(value: float, step: float) -> int:
    cells = value / step
    nearest = round(cells)
    return int(nearest) if abs(cells - nearest) <= _SNAP_TOLERANCE else math.ceil(cells)


def ellipsoidal_zone_area_m2(lat1_rad, lat2_rad, width_rad, semi_major_m, inverse_flattening):
    """Area of the ellipsoidal quadrangle between two parallels, ``width_rad`` of longitude wide [m2].

    A = (a^2 / 2) |q(phi_2) - q(phi_1)| delta_lambda (Snyder 1987, eq. 3-12 for q).
    lat1_rad, lat2_rad: bounding latitudes [rad]; width_rad: longitude extent [rad]; semi_major_m: a [m];
    inverse_flattening: 1/f [-] (0 for a sphere).
    """
    flattening = 0.0 if not inverse_flattening else 1.0 / inverse_flattening
    e2 = flattening * (2.0 - flattening)
    dq = np.abs(_authalic_q(lat2_rad, e2) - _authalic_q(lat1_rad, e2))
    return 0.5 * semi_major_m * semi_major_m * dq * width_rad


def _authalic_q(phi, e2: float):
    """Snyder (1987) eq. 3-12: q(phi) [-] for an ellipsoid of squared eccentricity e2; 2 sin(phi) on a sphere."""
    s = np.sin(phi)
    if e2 < 1e-15:
        return 2.0 * s
    e = math.sqrt(e2)
    return (1.0 - e2) * (s / (1.0 - e2 * s * s) + np.arctanh(e * s) / e)


def _axis_attrs(crs: CRS) -> tuple[dict, dict]:
    try:
        cf = crs.cs_to_cf()
    except Exception:  # noqa: BLE001 - attributes are a courtesy; a CRS pyproj cannot describe still works
        return {}, {}
    by_axis = {item.get("axis"): item for item in cf}
    return dict(by_axis.get("X", {})), dict(by_axis.get("Y", {}))


_local = threading.local()


def _to_geodetic(crs_wkt: str) -> Transformer:
    # One transformer per thread and CRS: building one costs milliseconds, and sharing one across threads
    # is not something to rely on for every PROJ build.
    cache = getattr(_local, "transformers", None)
    if cache is None:
        cache = _local.transformers = {}
    if crs_wkt not in cache:
        crs = CRS.from_wkt(crs_wkt)
        cache[crs_wkt] = Transformer.from_crs(crs, crs.geodetic_crs or CRS.from_epsg(4326), always_xy=True)
    return cache[crs_wkt]


def _latitude_block(y: np.ndarray, x: np.ndarray, crs_wkt: str) -> np.ndarray:
    xx, yy = np.broadcast_arrays(x, y)
    _, lat = _to_geodetic(crs_wkt).transform(xx, yy)
    return np.asarray(lat, dtype=np.float32)


__all__ = ["TargetGrid", "align_to_grid", "ellipsoidal_zone_area_m2"]
