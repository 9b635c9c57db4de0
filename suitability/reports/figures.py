"""Maps and charts for the briefs, drawn with matplotlib's Agg renderer and returned as PNG bytes.

Figures are built on ``matplotlib.figure.Figure`` objects (no pyplot state), so they are safe to draw from
several threads. The look is our own: light frame, no grid clutter, district outlines in dark grey.

Colours are chosen to stay distinct for readers with colour-vision deficiencies: the class colours are the
bluish green, a pale grey and the orange ("amber") of Okabe & Ito (2008, Color Universal Design); change
maps use ColorBrewer's diverging brown-blue-green scheme (Harrower & Brewer 2003), blue-green towards C3
and brown towards C4, so that both maps read the same way.
"""

from __future__ import annotations

import io
import math
import textwrap
import os
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import Protocol

import geopandas as gpd
import matplotlib
import numpy as np
import pandas as pd
import PIL.Image
import pyproj
import rasterio
import rasterio.windows
from matplotlib import colors as mcolors
from matplotlib import patheffects
from matplotlib.backend_bases import FigureCanvasBase
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure
from matplotlib.patches import Patch, Rectangle
from rasterio.enums import Resampling

from suitability.atomic import atomic_write
from suitability.errors import InputDataError
from suitability.reports.zones import zones_on_grid
from suitability.variables import (
    CLASS_C3,
    CLASS_C4,
    CLASS_COLOURS_RGB,
    CLASS_CONTESTED,
    CLASS_NAMES,
    CLASS_NO_SEASON,
)

#: Class colours as hex, the same as the GeoTIFF colour tables (variables.CLASS_COLOURS_RGB).
CLASS_COLOURS: dict[int, str] = {code: "#{:02X}{:02X}{:02X}".format(*rgb) for code, rgb in CLASS_COLOURS_RGB.items()}
#: Plain-language legend labels of the classes.
CLASS_LABELS: dict[int, str] = {
    CLASS_C3: "C3 crops have the advantage",
    CLASS_CONTESTED: "no clear advantage",
    CLASS_C4: "C4 crops have the advantage",
    CLASS_NO_SEASON: "no growing season",
}
NODATA_COLOUR = "#FFFFFF"
OUTLINE_COLOUR = "#3A3A3A"
CHANGE_COLORMAP = "BrBG_r"  # low (towards C3) blue-green, high (towards C4) brown
_INK = "#222222"
_MAX_MAP_PIXELS = 1200
#: Most district names drawn on a map: with more, names would cover the map (and cost time and memory
#: for nothing), so only the highlighted district is named; every district is in the table.
MAX_MAP_LABELS = 40
#: Most districts in the class-share chart: the largest by area; every district is in the table.
MAX_CHART_DISTRICTS = 30


class ScenarioPoint(Protocol):
    """What the crossover chart needs of a scenario (BriefContext's scenarios have these attributes)."""

    name: str
    co2_ppm: float
    temperature_offset_c: float


# --- geometry helpers ------------------------------------------------------------------------------------

def metres_per_degree_longitude(latitude_deg, semi_major_m=6378137.0, inverse_flattening=298.257223563):
    """Length of one degree of longitude along the parallel at ``latitude_deg`` [m].

    L = (pi / 180) * N * cos(phi), with N = a / sqrt(1 - e^2 sin^2 phi) the prime-vertical radius of
    curvature (the radius of the parallel is N cos phi; Snyder 1987, Map Projections - A Working Manual,
    USGS Prof. Paper 1395). latitude_deg [deg]; semi_major_m: a [m]; inverse_flattening: 1/f (0: sphere).
    """
    flattening = 0.0 if not inverse_flattening else 1.0 / inverse_flattening
    e2 = flattening * (2.0 - flattening)
    phi = np.radians(latitude_deg)
    prime_vertical = semi_major_m / np.sqrt(1.0 - e2 * np.sin(phi) ** 2)
    return np.pi / 180.0 * prime_vertical * np.cos(phi)


def nice_scale_length(longest_m: float) -> float:
    """The largest 1, 2 or 5 times a power of ten that is not longer than ``longest_m`` [m]."""
    if not longest_m > 0:
        raise ValueError(f"expected a positive length, got {longest_m}")
    power = 10.0 ** math.floor(math.log10(longest_m))
    for step in (5.0, 2.0, 1.0):
        if step * power <= longest_m * (1 + 1e-12):
            return step * power
    return power  # unreachable: step 1 always fits


def _format_length(metres: float) -> str:
    if metres >= 1000:
        km = metres / 1000
        return f"{km:g} km"
    return f"{metres:g} m"


# --- raster reading --------------------------------------------------------------------------------------

class _MapRaster:
    """A raster read for display: values (float, NaN nodata), extent, CRS; decimated to fit the figure.

    bounds: (left, bottom, right, top) in the raster's CRS to read only that part (a zoomed map), else all.
    """

    def __init__(self, path: str | os.PathLike, max_pixels: int = _MAX_MAP_PIXELS, bounds=None):
        self.path = Path(path)
        try:
            dataset = rasterio.open(self.path)
        except rasterio.errors.RasterioIOError as exc:
            raise InputDataError(f"{self.path}: cannot open the raster ({exc}); expected a GeoTIFF") from exc
        with dataset:
            if dataset.crs is None:
                raise InputDataError(f"{self.path}: the raster has no CRS; expected the output grid's CRS")
            window = None
            if bounds is not None:
                loose = rasterio.windows.from_bounds(*bounds, transform=dataset.transform)
                col0, row0 = math.floor(loose.col_off), math.floor(loose.row_off)
                window = rasterio.windows.Window(col0, row0, math.ceil(loose.col_off + loose.width) - col0,
                                                 math.ceil(loose.row_off + loose.height) - row0).intersection(
                    rasterio.windows.Window(0, 0, dataset.width, dataset.height))
            height = int(window.height) if window is not None else dataset.height
            width = int(window.width) if window is not None else dataset.width
            scale = max(1.0, max(width, height) / max_pixels)
            shape = (max(1, round(height / scale)), max(1, round(width / scale)))
            data = dataset.read(1, out_shape=shape, masked=True, resampling=Resampling.nearest, window=window)
            self.values = data.astype("float64").filled(np.nan)
            self.crs = pyproj.CRS.from_user_input(dataset.crs.to_wkt())
            left, bottom, right, top = (rasterio.windows.bounds(window, dataset.transform) if window is not None
                                        else dataset.bounds)
            self.extent = (left, right, bottom, top)
            full = dataset.bounds
            self.full_extent = (full.left, full.right, full.bottom, full.top)

    @property
    def mid_latitude(self) -> float:
        """Latitude of the map centre [deg]."""
        return self.centre_lonlat[1]

    @property
    def centre_lonlat(self) -> tuple[float, float]:
        """Longitude and latitude of the map centre [deg]."""
        left, right, bottom, top = self.extent
        if self.crs.is_geographic:
            return (left + right) / 2, (bottom + top) / 2
        to_geographic = pyproj.Transformer.from_crs(self.crs, self.crs.geodetic_crs, always_xy=True)
        return to_geographic.transform((left + right) / 2, (bottom + top) / 2)

    def metres_per_x_unit(self) -> float:
        """Ground length of one x unit at the map centre [m] (geographic: along the central parallel)."""
        if self.crs.is_geographic:
            ellipsoid = self.crs.ellipsoid
            degrees_per_unit = math.degrees(self.crs.axis_info[0].unit_conversion_factor)
            return float(
                metres_per_degree_longitude(self.mid_latitude, ellipsoid.semi_major_metre,
                                            ellipsoid.inverse_flattening) * degrees_per_unit
            )
        return self.crs.axis_info[0].unit_conversion_factor

    def grid_north_degrees(self) -> float:
        """Angle of true north from the map's up direction at the centre, clockwise [deg] (0 on lon/lat
        grids; the meridian convergence on projected ones, from pyproj by moving 0.01 deg north)."""
        if self.crs.is_geographic:
            return 0.0
        lon, lat = self.centre_lonlat
        to_map = pyproj.Transformer.from_crs(self.crs.geodetic_crs, self.crs, always_xy=True)
        x0, y0 = to_map.transform(lon, lat)
        x1, y1 = to_map.transform(lon, min(lat + 0.01, 89.99))
        return math.degrees(math.atan2(x1 - x0, y1 - y0))


# --- drawing helpers -------------------------------------------------------------------------------------

def _png(figure: Figure, dpi: int) -> bytes:
    """The figure drawn on white as an RGB PNG. Without the alpha channel (all opaque on white anyway) the
    file is smaller and faster to write, and the PDF renderer need not split a mask off each image."""
    previous_dpi, previous_face = figure.dpi, figure.get_facecolor()
    canvas = FigureCanvasAgg(figure)
    try:
        figure.set_dpi(dpi)
        figure.set_facecolor("white")
        canvas.draw()
        pixels = np.asarray(canvas.buffer_rgba())[..., :3]
    finally:
        figure.set_dpi(previous_dpi)
        figure.set_facecolor(previous_face)
        FigureCanvasBase(figure)  # as savefig leaves it: no canvas that redraws the figure on every change
    buffer = io.BytesIO()
    PIL.Image.fromarray(pixels).save(buffer, format="png", dpi=(dpi, dpi))
    return buffer.getvalue()


def figure_bytes(figure: Figure, fmt: str, dpi: int = 150) -> bytes:
    """The figure as ``fmt`` ("png": RGB, or "svg") bytes; SVG keeps text as text (searchable, scalable)."""
    if fmt == "png":
        return _png(figure, dpi)
    buffer = io.BytesIO()
    with matplotlib.rc_context({"svg.fonttype": "none"}):
        figure.savefig(buffer, format=fmt, dpi=dpi, facecolor="white")
    return buffer.getvalue()


#: Map layout in figure fractions: the map frame, and the strip below it that holds the legend, scale
#: bar, north arrow (and a locator inset), all off the data.
_MAP_BOX = (0.09, 0.25, 0.88, 0.68)
_STRIP_HEIGHT = 0.17


def _map_axes(figure: Figure):
    axes = figure.add_axes(_MAP_BOX)
    for spine in axes.spines.values():
        spine.set_edgecolor("#888888")
    return axes


def _map_title(figure: Figure, title: str):
    """The map's title at the top left (None without a title)."""
    if not title:
        return None
    # Wrapped by hand: matplotlib's own wrapping measures text as mathematics, which a name with "$" breaks.
    width = max(20, int(figure.get_figwidth() * 72 / (10.5 * 0.55)))  # characters per line at 10.5 pt
    return figure.text(0.02, 0.985, textwrap.fill(title, width), ha="left", va="top", fontsize=10.5, color=_INK,
                       parse_math=False, gid="title")


def _finish_frame(axes, raster: _MapRaster) -> None:
    left, right, bottom, top = raster.extent
    axes.set_xlim(left, right)
    axes.set_ylim(bottom, top)
    axes.set_xlabel("")  # geopandas labels the axes with the CRS's axis names; the graticule says it
    axes.set_ylabel("")


def _nice_degree_step(span: float) -> float:
    """A step of a graticule giving about 3 to 6 lines over ``span`` degrees (common practice, no source)."""
    # No 0.25: its labels need two decimals, and at that spacing they ran into each other.
    for step in (0.01, 0.02, 0.05, 0.1, 0.2, 0.5, 1, 2, 5, 10, 15, 30):
        if span / step <= 6:
            return step
    return 45.0


def _degree_text(value: float, positive: str, negative: str, step: float) -> str:
    # As many decimals as the step has (0.25: two), so that every line's label is its exact value.
    digits = next(d for d in range(4) if abs(round(step, d) - step) < 1e-9)
    hemisphere = positive if value > 1e-12 else (negative if value < -1e-12 else "")
    return f"{abs(value):.{digits}f}\u00b0{(' ' + hemisphere) if hemisphere else ''}"


def _draw_graticule(axes, raster: _MapRaster) -> list[float]:
    """Lines of longitude and latitude (thin, grey), labelled in degrees where they meet the frame's bottom
    and left edges. Returns the longitudes drawn."""
    left, right, bottom, top = raster.extent
    geographic = raster.crs.is_geographic
    if geographic:
        to_map = None
        lon_min, lon_max, lat_min, lat_max = left, right, bottom, top
    else:
        to_geo = pyproj.Transformer.from_crs(raster.crs, raster.crs.geodetic_crs, always_xy=True)
        xs = np.concatenate([np.linspace(left, right, 25), np.full(25, right), np.linspace(right, left, 25),
                             np.full(25, left)])
        ys = np.concatenate([np.full(25, bottom), np.linspace(bottom, top, 25), np.full(25, top),
                             np.linspace(top, bottom, 25)])
        lons, lats = to_geo.transform(xs, ys)
        lon_min, lon_max, lat_min, lat_max = np.min(lons), np.max(lons), np.min(lats), np.max(lats)
        to_map = pyproj.Transformer.from_crs(raster.crs.geodetic_crs, raster.crs, always_xy=True)
    step = _nice_degree_step(max(lon_max - lon_min, lat_max - lat_min))
    lon_values = np.arange(math.ceil(lon_min / step) * step, lon_max + 1e-9, step)
    lat_values = np.arange(math.ceil(lat_min / step) * step, lat_max + 1e-9, step)
    x_ticks, x_labels, y_ticks, y_labels = [], [], [], []
    style = {"color": "#9A9A9A", "linewidth": 0.5, "linestyle": (0, (4, 3)), "zorder": 3}
    for lon in lon_values:
        lat_line = np.linspace(lat_min, lat_max, 60)
        x, y = (np.full_like(lat_line, lon), lat_line) if geographic else to_map.transform(np.full_like(lat_line, lon), lat_line)
        axes.plot(x, y, **style)
        order = np.argsort(y)
        if y[order][0] <= bottom <= y[order][-1]:
            crossing = float(np.interp(bottom, y[order], np.asarray(x)[order]))
            if left <= crossing <= right:
                x_ticks.append(crossing)
                x_labels.append(_degree_text(lon, "E", "W", step))
    for lat in lat_values:
        lon_line = np.linspace(lon_min, lon_max, 60)
        x, y = (lon_line, np.full_like(lon_line, lat)) if geographic else to_map.transform(lon_line, np.full_like(lon_line, lat))
        axes.plot(x, y, **style)
        order = np.argsort(x)
        if x[order][0] <= left <= x[order][-1]:
            crossing = float(np.interp(left, np.asarray(x)[order], np.asarray(y)[order]))
            if bottom <= crossing <= top:
                y_ticks.append(crossing)
                y_labels.append(_degree_text(lat, "N", "S", step))
    axes.set_xticks(x_ticks, x_labels, fontsize=7.5, color=_INK)
    axes.set_yticks(y_ticks, y_labels, fontsize=7.5, color=_INK, rotation=90, va="center")
    axes.tick_params(length=3, color="#888888", pad=2)
    # A label centred on a line near a corner reaches past the frame: into the title above it, or into
    # the other edge's labels. Near an end of its edge it is aligned to end at its line instead, inward.
    for label, tick in zip(axes.get_yticklabels(), y_ticks):
        if tick > top - _END_LABEL_ZONE * (top - bottom):
            label.set_verticalalignment("top")
        elif tick < bottom + _END_LABEL_ZONE * (top - bottom):
            label.set_verticalalignment("bottom")
    for label, tick in zip(axes.get_xticklabels(), x_ticks):
        if tick < left + _END_LABEL_ZONE * (right - left):
            label.set_horizontalalignment("left")
        elif tick > right - _END_LABEL_ZONE * (right - left):
            label.set_horizontalalignment("right")
    return list(lon_values)


#: Share of a frame edge at each end within which a graticule label is aligned to end at its line
#: (:func:`_draw_graticule`): half a 7-character label at 7.5 pt is about 0.2 in, 6-12 % of a map's edge.
_END_LABEL_ZONE = 0.12


def _label_positions(on_map: gpd.GeoDataFrame, raster: _MapRaster) -> list[tuple[str, float, float, float]]:
    """(district, x, y, area) of every district whose representative point lies in the frame, largest first."""
    left, right, bottom, top = raster.extent
    out = []
    for name, geometry in zip(on_map["district"], on_map.geometry):
        if geometry is None or geometry.is_empty:
            continue
        point = geometry.representative_point()
        if left <= point.x <= right and bottom <= point.y <= top:
            out.append((str(name), point.x, point.y, float(geometry.area)))
    return sorted(out, key=lambda item: -item[3])


def _draw_labels(axes, figure: Figure, positions, numbers: dict[str, int] | None, highlight: str | None,
                 use_names: bool) -> dict[str, bool]:
    """Labels (names, or numbers of the key), largest district first; a label that would overlap one
    already placed or cross the frame is left out. Returns district -> drawn."""
    halo = [patheffects.withStroke(linewidth=2.6, foreground="white")]
    renderer = FigureCanvasAgg(figure).get_renderer()
    try:
        return _place_labels(axes, renderer, positions, numbers, highlight, use_names, halo)
    finally:
        # Back to a canvas that draws nothing until saved: with the Agg canvas left on, every later
        # geopandas plot on this figure (the locator map) renders the whole figure (its draw_idle).
        FigureCanvasBase(figure)


def _place_labels(axes, renderer, positions, numbers, highlight, use_names, halo) -> dict[str, bool]:
    frame = axes.get_window_extent(renderer)
    placed, drawn = [], {}
    if highlight is not None:  # the highlighted district is labelled first, so it is never left out
        positions = sorted(positions, key=lambda item: item[0] != highlight)
    for name, x, y, _ in positions:
        text = name if use_names or numbers is None else str(numbers.get(name, ""))
        if not text:
            continue
        label = axes.annotate(text, (x, y), ha="center", va="center", fontsize=8.5 if use_names else 7.5,
                              color=_INK, path_effects=halo, parse_math=False, zorder=7,
                              fontweight="bold" if name == highlight else "normal")
        box = label.get_window_extent(renderer).expanded(1.08, 1.15)
        inside = frame.x0 <= box.x0 and box.x1 <= frame.x1 and frame.y0 <= box.y0 and box.y1 <= frame.y1
        if not inside or any(box.overlaps(other) for other in placed):
            label.remove()
            drawn[name] = False
            continue
        placed.append(box)
        drawn[name] = True
    return drawn


def _draw_districts(axes, figure, zones: gpd.GeoDataFrame | None, raster: _MapRaster, highlight: str | None,
                    numbers: dict[str, int] | None = None) -> dict[str, bool]:
    if zones is None or len(zones) == 0:
        _finish_frame(axes, raster)
        return {}
    on_map = zones_on_grid(zones, raster.crs)
    many = len(on_map) > 60
    on_map.boundary.plot(ax=axes, color=OUTLINE_COLOUR, linewidth=0.35 if many else 0.7, zorder=4)
    if highlight is not None:
        on_map[on_map["district"] == highlight].boundary.plot(ax=axes, color="#000000", linewidth=2.4, zorder=5)
    _finish_frame(axes, raster)
    _set_ground_aspect(axes, raster)
    axes.apply_aspect()
    positions = _label_positions(on_map, raster)
    if numbers is None and len(on_map) > MAX_MAP_LABELS:  # names of many districts would cover the map
        positions = [p for p in positions if p[0] == highlight]
    use_names = numbers is None or len(on_map) <= MAX_NAME_LABELS
    return _draw_labels(axes, figure, positions, numbers, highlight, use_names)


def _set_ground_aspect(axes, raster: _MapRaster) -> None:
    """Equal ground distances along both axes at the map centre. Set last: imshow and geopandas reset it."""
    if raster.crs.is_geographic:
        axes.set_aspect(1.0 / max(math.cos(math.radians(raster.mid_latitude)), 1e-6))
    else:
        axes.set_aspect("equal")


def _strip_axes(figure: Figure, left: float, width: float):
    strip = figure.add_axes((left, 0.02, width, _STRIP_HEIGHT - 0.02))
    strip.set_axis_off()
    strip.set_xlim(0, 1)
    strip.set_ylim(0, 1)
    return strip


def _draw_scale_bar(figure: Figure, axes, raster: _MapRaster) -> float:
    """Scale bar below the map frame (off the data), from its middle, a quarter of the map wide; returns its
    length [m].

    Drawn in its own axes whose x axis has the map's ground scale, so the bar's length in that axes' data
    units is its length in map units."""
    axes.apply_aspect()
    box = axes.get_position()
    left, right, _, _ = raster.extent
    metres_per_unit = raster.metres_per_x_unit()
    length_m = nice_scale_length(0.25 * (right - left) * metres_per_unit)
    length_units = length_m / metres_per_unit
    bar_axes = figure.add_axes((box.x0, 0.115, box.width, 0.05))
    bar_axes.set_axis_off()
    bar_axes.set_xlim(left, right)
    bar_axes.set_ylim(0, 1)
    bar_axes.set_gid("scale_bar")
    x0 = left + 0.5 * (right - left)  # mid-frame: the legends take the lower left of the page
    for i, colour in enumerate((_INK, "white")):
        bar_axes.add_patch(Rectangle((x0 + i * length_units / 2, 0.15), length_units / 2, 0.22, facecolor=colour,
                                     edgecolor=_INK, linewidth=0.8, zorder=5))
    bar_axes.text(x0, 0.55, "0", ha="center", va="bottom", fontsize=7.5, color=_INK)
    bar_axes.text(x0 + length_units, 0.55, _format_length(length_m), ha="center", va="bottom", fontsize=7.5,
                  color=_INK)
    return length_m


def _draw_north_arrow(figure: Figure, raster: _MapRaster) -> float:
    """North arrow below the map, at the right, turned by the meridian convergence; returns that angle [deg]."""
    angle = raster.grid_north_degrees()
    arrow_axes = figure.add_axes((0.86, 0.03, 0.10, 0.13))
    arrow_axes.set_axis_off()
    arrow_axes.set_xlim(-1, 1)
    arrow_axes.set_ylim(-1, 1)
    arrow_axes.set_aspect("equal")
    arrow_axes.set_gid("north_arrow")
    dx, dy = math.sin(math.radians(angle)), math.cos(math.radians(angle))
    arrow_axes.annotate("", xy=(0.55 * dx, 0.55 * dy), xytext=(-0.55 * dx, -0.55 * dy),
                        arrowprops={"arrowstyle": "-|>", "color": _INK, "linewidth": 1.4, "mutation_scale": 14})
    arrow_axes.text(0.85 * dx, 0.85 * dy, "N", ha="center", va="center", fontsize=9, fontweight="bold", color=_INK)
    return angle


def _draw_locator(figure: Figure, zones: gpd.GeoDataFrame, raster: _MapRaster, highlight: str | None) -> None:
    """A small map of the whole region with the zoomed frame, in the strip (for district maps)."""
    inset = figure.add_axes((0.68, 0.02, 0.16, _STRIP_HEIGHT - 0.01))
    inset.set_gid("locator")
    inset.set_xticks([])
    inset.set_yticks([])
    on_map = zones_on_grid(zones, raster.crs)
    on_map.plot(ax=inset, color="#E4E4E4", edgecolor="#9A9A9A", linewidth=0.3)
    if highlight is not None:
        on_map[on_map["district"] == highlight].plot(ax=inset, color="#B0301C", linewidth=0)
    left, right, bottom, top = raster.extent
    inset.add_patch(Rectangle((left, bottom), right - left, top - bottom, fill=False, edgecolor=_INK, linewidth=0.9))
    fl, fr, fb, ft = raster.full_extent
    xmin, ymin, xmax, ymax = on_map.total_bounds
    inset.set_xlim(min(fl, xmin), max(fr, xmax))
    inset.set_ylim(min(fb, ymin), max(ft, ymax))
    inset.set_xlabel("")
    inset.set_ylabel("")
    _set_ground_aspect(inset, raster)


def _class_rgba(classes: np.ndarray) -> np.ndarray:
    rgba = np.zeros(classes.shape + (4,), dtype="float64")
    for code, colour in CLASS_COLOURS.items():
        rgba[classes == code] = mcolors.to_rgba(colour)
    return rgba  # nodata stays transparent over the white figure


def zoom_bounds(zones: gpd.GeoDataFrame, district: str, raster_path, margin: float = 0.15):
    """(left, bottom, right, top) in the raster's CRS around ``district``, widened by ``margin`` of its size
    on each side and made at least 8 cells wide."""
    with rasterio.open(raster_path) as dataset:
        crs = pyproj.CRS.from_user_input(dataset.crs.to_wkt())
        cell = abs(dataset.transform.a)
    on_map = zones_on_grid(zones[zones["district"] == district], crs)
    if on_map.empty or on_map.geometry.is_empty.all():
        raise ValueError(f"no district {district!r} with a geometry among the {len(zones)} districts to map")
    xmin, ymin, xmax, ymax = on_map.total_bounds
    half = max(xmax - xmin, ymax - ymin, 8 * cell) * (0.5 + margin)
    cx, cy = (xmin + xmax) / 2, (ymin + ymax) / 2
    return cx - half, cy - half, cx + half, cy + half


# --- public figures --------------------------------------------------------------------------------------

#: Maps are drawn at the size they are printed (full text width of an A4 page), so a font size is a size
#: on paper.
MAP_SIZE_IN = (7.0, 6.6)
#: Most districts named on a map; with more, districts carry the numbers of the brief's district key.
MAX_NAME_LABELS = 12


class MapFrames:
    """Keeps the frame of the last map drawn through it, to draw the next layer of the same place into it.

    A frame is all of a map but its layer: axes, graticule, district outlines and labels, scale bar, north
    arrow, locator. The maps of one district brief (classes and changes of each scenario) share it;
    building it was about a quarter of drawing and saving such a map (PNG and SVG: 5 zoomed maps took 1.26 s
    with a frame each, 1.03 s sharing one). A figure drawn through a ``MapFrames`` is only
    valid until the next map drawn through it (which replaces its layer, title and legend): save it first.
    One per thread; not shared between threads.
    """

    def __init__(self):
        self._key = None
        self._frame: _Frame | None = None

    def frame(self, key, build: Callable[[], _Frame]) -> _Frame:
        if self._frame is None or self._key != key:
            self._key, self._frame = key, build()
        return self._frame


class _Frame:
    def __init__(self, figure: Figure, axes, zones, labels_drawn: dict[str, bool]):
        self.figure, self.axes, self.labels_drawn = figure, axes, labels_drawn
        self.zones = zones  # held, so that no other object takes its id(), part of the frame's key, meanwhile
        self._layer: list = []

    def show(self, raster: _MapRaster, title: str, draw) -> Figure:
        """The frame with ``raster`` drawn by ``draw`` (and its legend) instead of the previous layer."""
        for artist in self._layer:
            if artist in self.figure.axes:
                self.figure.delaxes(artist)
            else:
                artist.remove()
        figure, axes = self.figure, self.axes
        before = (list(axes.images), list(figure.legends), list(figure.axes))
        title_text = _map_title(figure, title)
        legend = draw(axes, raster)
        if legend is not None:
            legend(figure)
        _finish_frame(axes, raster)  # the layer's imshow may reset the limits and the aspect
        _set_ground_aspect(axes, raster)
        self._layer = ([a for a in axes.images if a not in before[0]] + [a for a in figure.legends if a not in before[1]]
                       + [a for a in figure.axes if a not in before[2]] + ([title_text] if title_text is not None else []))
        figure.labels_drawn = self.labels_drawn  # which district labels fitted (the brief's key says where numbers are)
        return figure


def _build_frame(raster: _MapRaster, zones, highlight, numbers, zoomed: bool, size_in) -> _Frame:
    figure = Figure(figsize=size_in)
    axes = _map_axes(figure)
    _draw_graticule(axes, raster)
    drawn = _draw_districts(axes, figure, zones, raster, highlight, numbers)
    _set_ground_aspect(axes, raster)
    _draw_scale_bar(figure, axes, raster)
    _draw_north_arrow(figure, raster)
    if zoomed:
        _draw_locator(figure, zones, raster, highlight)
    return _Frame(figure, axes, zones, drawn)


def _map_figure(path, zones, title, highlight, numbers, zoom, size_in, draw, frames: MapFrames | None = None) -> Figure:
    bounds = zoom_bounds(zones, highlight, path) if zoom and zones is not None and highlight is not None else None
    if bounds is not None:
        with rasterio.open(path) as dataset:
            full = dataset.bounds
        if bounds[0] >= full.right or bounds[2] <= full.left or bounds[1] >= full.top or bounds[3] <= full.bottom:
            bounds = None  # a district off the grid: the whole map, with the district's outline if it shows
    raster = _MapRaster(path, bounds=bounds)

    def build() -> _Frame:
        return _build_frame(raster, zones, highlight, numbers, bounds is not None, size_in)

    if frames is None:
        return build().show(raster, title, draw)
    key = (id(zones), highlight, tuple(sorted((numbers or {}).items())), tuple(size_in), raster.extent,
           raster.full_extent, raster.values.shape, raster.crs.to_wkt(), bounds is not None)
    return frames.frame(key, build).show(raster, title, draw)


def class_map_figure(class_path, zones: gpd.GeoDataFrame | None = None, *, title: str = "",
                     highlight: str | None = None, size_in: tuple[float, float] = MAP_SIZE_IN,
                     numbers: dict[str, int] | None = None, zoom: bool = False,
                     frames: MapFrames | None = None) -> Figure:
    """The favoured-pathway map of one scenario: classes, legend, scale bar and north arrow below the frame,
    graticule, district outlines with names (few districts) or key numbers (``numbers``).

    class_path: a ``pathway_class.tif``. zones: districts with a ``district`` column (any CRS), or None.
    highlight: a district drawn with a heavy outline; with ``zoom`` the map shows only its surroundings and
    a locator map shows where it lies. size_in: figure (width, height) [inch]. frames: re-use the frame of
    the last map drawn through it if it shows the same place (see :class:`MapFrames`).
    """
    def draw(axes, raster):
        axes.imshow(_class_rgba(raster.values), extent=raster.extent, interpolation="nearest", origin="upper")

        def legend(figure):
            handles = [Patch(facecolor=CLASS_COLOURS[c], edgecolor="#999999", label=CLASS_LABELS[c]) for c in CLASS_COLOURS]
            handles.append(Patch(facecolor=NODATA_COLOUR, edgecolor="#999999", label="no results (outside or no data)"))
            figure.legend(handles=handles, loc="lower left", ncol=1, frameon=False, fontsize=8,
                          bbox_to_anchor=(0.02, 0.0), handlelength=1.4)
        return legend

    return _map_figure(class_path, zones, title, highlight, numbers, zoom, size_in, draw, frames)


def class_map_png(class_path, zones: gpd.GeoDataFrame | None = None, *, title: str = "",
                  highlight: str | None = None, dpi: int = 130) -> bytes:
    """PNG bytes of :func:`class_map_figure`."""
    return _png(class_map_figure(class_path, zones, title=title, highlight=highlight), dpi)


def change_map_figure(change_path, zones: gpd.GeoDataFrame | None = None, *, title: str = "",
                      highlight: str | None = None, size_in: tuple[float, float] = MAP_SIZE_IN,
                      numbers: dict[str, int] | None = None, zoom: bool = False,
                      frames: MapFrames | None = None) -> Figure:
    """Map of ``advantage_change.tif`` (scenario minus baseline) on a diverging scale centred on 0, laid
    out as :func:`class_map_figure`."""
    def draw(axes, raster):
        finite = raster.values[np.isfinite(raster.values)]
        largest = float(np.max(np.abs(finite))) if finite.size else 0.0
        # Round up to 0.05, never a zero-width scale; rounded first so that a float32 0.3 stays 0.3.
        limit = max(0.05, math.ceil(round(largest * 20, 6)) / 20)
        image = axes.imshow(raster.values, extent=raster.extent, interpolation="nearest", origin="upper",
                            cmap=CHANGE_COLORMAP, norm=mcolors.TwoSlopeNorm(0.0, -limit, limit))

        def legend(figure):
            bar_axes = figure.add_axes((0.05, 0.05, 0.34, 0.025))
            bar = figure.colorbar(image, cax=bar_axes, orientation="horizontal")
            bar.set_label("\u2190 towards C3        towards C4 \u2192\nchange of the advantage", fontsize=7.5,
                          color=_INK)
            # Above the bar: below it, the two lines fell off the bottom of a half-page map.
            bar.ax.xaxis.set_label_position("top")
            bar.ax.tick_params(labelsize=7)
            # Five ticks: matplotlib's own choice put nine labels on the bar, run together at 7 pt.
            ticks = [-limit, -limit / 2, 0.0, limit / 2, limit]
            bar.set_ticks(ticks, labels=[f"{t:+g}".replace("-", "\u2212") if t else "0" for t in ticks])
        return legend

    return _map_figure(change_path, zones, title, highlight, numbers, zoom, size_in, draw, frames)


def change_map_png(change_path, zones: gpd.GeoDataFrame | None = None, *, title: str = "",
                   highlight: str | None = None, dpi: int = 130) -> bytes:
    """PNG bytes of :func:`change_map_figure`."""
    return _png(change_map_figure(change_path, zones, title=title, highlight=highlight), dpi)


def class_share_table(table: pd.DataFrame, scenarios: Sequence[str] | None = None) -> pd.DataFrame:
    """Class shares in percent of the mapped area, one row per district and scenario, as plotted.

    table: the output of :func:`suitability.reports.zones.zonal_statistics`. Districts without data (NaN
    shares) are left out. Columns: district, scenario, and one per class label.
    """
    chosen = list(scenarios) if scenarios is not None else list(dict.fromkeys(table["scenario"]))
    rows = table[table["scenario"].isin(chosen)].dropna(subset=["share_c3", "share_contested", "share_c4"])
    shares = pd.DataFrame({"district": rows["district"], "scenario": rows["scenario"]})
    for code, column in ((CLASS_C3, "share_c3"), (CLASS_CONTESTED, "share_contested"), (CLASS_C4, "share_c4")):
        shares[CLASS_NAMES[code]] = 100.0 * rows[column]
    order = {name: i for i, name in enumerate(chosen)}
    shares["_order"] = shares["scenario"].map(order)
    districts = {name: i for i, name in enumerate(dict.fromkeys(rows["district"]))}
    shares["_district"] = shares["district"].map(districts)
    return shares.sort_values(["_district", "_order"]).drop(columns=["_order", "_district"]).reset_index(drop=True)


def class_share_figure(table: pd.DataFrame, scenarios: Sequence[str] | None = None) -> Figure:
    """Stacked horizontal bars: the share of each district's mapped land in each class, per scenario."""
    shares = class_share_table(table, scenarios)
    districts = list(dict.fromkeys(shares["district"]))
    left_out = 0
    if len(districts) > MAX_CHART_DISTRICTS:
        areas = table.drop_duplicates("district").set_index("district")["district_area_ha"]
        kept = set(areas.reindex(districts).sort_values(ascending=False).index[:MAX_CHART_DISTRICTS])
        left_out = len(districts) - len(kept)
        shares = shares[shares["district"].isin(kept)].reset_index(drop=True)
    labels = [f"{d}  \u00b7  {s}" for d, s in zip(shares["district"], shares["scenario"])]
    height = max(2.5, 0.32 * len(labels) + 1.4)
    figure = Figure(figsize=(7.5, height))
    axes = figure.add_axes((0.36, 1.0 / height, 0.60, 1 - 1.2 / height))
    positions = np.arange(len(labels))[::-1]
    left = np.zeros(len(labels))
    for code in (CLASS_C3, CLASS_CONTESTED, CLASS_C4):
        values = shares[CLASS_NAMES[code]].to_numpy()
        axes.barh(positions, values, left=left, color=CLASS_COLOURS[code], edgecolor="white", linewidth=0.6,
                  height=0.78, label=CLASS_LABELS[code])
        left += values
    axes.set_yticks(positions, labels, fontsize=8)
    for label in axes.get_yticklabels():
        label.set_parse_math(False)  # names are plain text
    axes.set_xlim(0, 100)
    note = f" \u2013 the {MAX_CHART_DISTRICTS} largest districts; {left_out} more in the table" if left_out else ""
    axes.set_xlabel(f"share of the district's mapped land (%){note}", fontsize=8.5, color=_INK)
    axes.tick_params(axis="x", labelsize=8)
    for side in ("top", "right"):
        axes.spines[side].set_visible(False)
    figure.legend(loc="lower center", ncol=3, frameon=False, fontsize=8, bbox_to_anchor=(0.5, 0.0))
    return figure


def class_share_png(table: pd.DataFrame, scenarios: Sequence[str] | None = None, *, dpi: int = 130) -> bytes:
    """PNG bytes of :func:`class_share_figure`."""
    return _png(class_share_figure(table, scenarios), dpi)


def physiology_crossover() -> Callable:
    """:func:`suitability.physiology.quantum_yield_crossover`, the leaf quantum-yield crossover (from its
    module if the package does not re-export it). Imported late: figures must import without the science stack loaded."""
    try:
        from suitability.physiology import quantum_yield_crossover
    except ImportError:
        from suitability.physiology.crossover import quantum_yield_crossover
    return quantum_yield_crossover


def crossover_figure(
    warm_season_temperature_c: float,
    scenarios: Sequence[ScenarioPoint] = (),
    *,
    o2_percent: float = 20.95,
    co2_range_ppm: tuple[float, float] = (250.0, 1000.0),
    crossover: Callable | None = None,
) -> Figure:
    """Crossover temperature against CO2, with the region's warm-season mean temperature marked.

    The curve is ``crossover(co2_ppm, o2_percent=...)`` [deg C] (default:
    :func:`suitability.physiology.quantum_yield_crossover`) for CO2 in ``co2_range_ppm`` [ppm]. Above the
    curve C4 plants make better use of light; below it, C3 plants (Collatz et al. 1998). Each scenario is
    drawn as a point at its CO2 and the warm-season temperature plus its warming [deg C].
    """
    crossover = crossover or physiology_crossover()
    co2 = np.linspace(co2_range_ppm[0], co2_range_ppm[1], 151)
    temperature = np.asarray(crossover(co2, o2_percent=o2_percent), dtype="float64")
    figure = Figure(figsize=(7.5, 4.2))
    axes = figure.add_axes((0.10, 0.14, 0.86, 0.76))
    axes.plot(co2, temperature, color=_INK, linewidth=2.0, label="crossover temperature", gid="crossover")
    axes.axhline(warm_season_temperature_c, color=CLASS_COLOURS[CLASS_C4], linewidth=1.6, linestyle="--",
                 label=f"warm-season mean today ({warm_season_temperature_c:.1f} \u00b0C)", gid="warm_season")
    finite = np.isfinite(temperature)
    if finite.any():
        top = max(np.nanmax(temperature), warm_season_temperature_c) + 4
        bottom = min(np.nanmin(temperature), warm_season_temperature_c) - 4
        axes.fill_between(co2, temperature, top, where=finite, color=CLASS_COLOURS[CLASS_C4], alpha=0.12, linewidth=0)
        axes.fill_between(co2, bottom, temperature, where=finite, color=CLASS_COLOURS[CLASS_C3], alpha=0.10, linewidth=0)
        axes.set_ylim(bottom, top)
        axes.text(0.02, 0.95, "warmer than the crossover: C4 favoured", transform=axes.transAxes, va="top",
                  fontsize=8.5, color=_INK)
        axes.text(0.98, 0.05, "cooler than the crossover: C3 favoured", transform=axes.transAxes, ha="right",
                  fontsize=8.5, color=_INK)
    for scenario in scenarios:
        point_t = warm_season_temperature_c + float(scenario.temperature_offset_c)
        axes.plot([scenario.co2_ppm], [point_t], marker="o", markersize=6, color=_INK, linestyle="none",
                  gid=f"scenario:{scenario.name}")
        axes.annotate(scenario.name, (scenario.co2_ppm, point_t), textcoords="offset points", xytext=(6, 5),
                      fontsize=8, color=_INK)
    axes.set_xlim(*co2_range_ppm)
    axes.set_xlabel("CO\u2082 in the air (ppm)", fontsize=9, color=_INK)
    axes.set_ylabel("temperature (\u00b0C)", fontsize=9, color=_INK)
    axes.tick_params(labelsize=8)
    for side in ("top", "right"):
        axes.spines[side].set_visible(False)
    axes.legend(loc="upper right", frameon=False, fontsize=8)
    return figure


def crossover_png(
    warm_season_temperature_c: float,
    scenarios: Sequence[ScenarioPoint] = (),
    *,
    o2_percent: float = 20.95,
    crossover: Callable | None = None,
    dpi: int = 130,
) -> bytes:
    """PNG bytes of :func:`crossover_figure`."""
    return _png(crossover_figure(warm_season_temperature_c, scenarios, o2_percent=o2_percent,
                                 crossover=crossover), dpi)


#: Marker and colour of each scenario in the district crossover chart, in order (colour-blind-safe
#: Okabe & Ito 2008 hues; shapes differ too, so the chart also reads in grey).
_SCENARIO_STYLES = (("o", "#0072B2"), ("s", "#D55E00"), ("^", "#CC79A7"), ("D", "#56B4E9"), ("v", "#009E73"),
                    ("P", "#E69F00"), ("X", "#000000"))


def _spread_below_above(rows) -> np.ndarray:
    """(2, n) distances [°C] from each row's median crossover down to its 5 % and up to its 95 % quantile, as
    numpy (pandas Series of one row made matplotlib call float() on a Series, which pandas deprecates)."""
    median = rows["q50"].to_numpy()
    return np.vstack([median - rows["q05"].to_numpy(), rows["q95"].to_numpy() - median])


def district_crossover_figure(points: pd.DataFrame, highlight: str | None = None,
                              size_in: tuple[float, float] = (7.0, 3.8)) -> Figure:
    """Each district's warm-month temperature against the crossover temperature of its cells.

    points: one row per district and scenario with ``district``, ``scenario`` (label), ``warm_c`` (the
    district's mean temperature over its three warmest months [deg C]) and ``q05``, ``q50``, ``q95`` (the
    5th, 50th and 95th area-weighted percentiles of the crossover temperature of its cells over those
    months [deg C]). A district below the diagonal is warmer than the crossover on most of its land: C4
    favoured there; above it, C3. The bar spans the 5-95 % range of its cells. ``highlight``: one district
    drawn larger and named.
    """
    data = points.dropna(subset=["warm_c", "q50"])
    figure = Figure(figsize=size_in)
    axes = figure.add_axes((0.12, 0.11, 0.84, 0.72))
    x_low, x_high = float(data["warm_c"].min()) - 1.0, float(data["warm_c"].max()) + 1.0
    y_low, y_high = float(data["q05"].min()) - 1.5, float(data["q95"].max()) + 1.5
    low, high = min(x_low, y_low), max(x_high, y_high)
    line = np.array([low, high])
    axes.fill_between(line, low, line, color=CLASS_COLOURS[CLASS_C4], alpha=0.13, linewidth=0)
    axes.fill_between(line, line, high, color=CLASS_COLOURS[CLASS_C3], alpha=0.11, linewidth=0)
    axes.plot(line, line, color=_INK, linewidth=1.0, gid="tie")
    axes.text(0.97, 0.04, "warm months warmer than the crossover:\nC4 crops have the advantage", ha="right",
              va="bottom", transform=axes.transAxes, fontsize=8.5, color=_INK)
    axes.text(0.03, 0.96, "warm months cooler than the crossover:\nC3 crops have the advantage", ha="left",
              va="top", transform=axes.transAxes, fontsize=8.5, color=_INK)
    many = data["district"].nunique() > 60
    for i, (label, rows) in enumerate(data.groupby("scenario", sort=False)):
        marker, colour = _SCENARIO_STYLES[i % len(_SCENARIO_STYLES)]
        faded = highlight is not None
        axes.errorbar(rows["warm_c"].to_numpy(), rows["q50"].to_numpy(), yerr=_spread_below_above(rows),
                      fmt=marker, color=colour, markersize=3 if many else 4.5, elinewidth=0.5 if many else 0.8,
                      alpha=0.35 if faded else (0.6 if many else 0.85), label=str(label), gid=f"scenario:{label}",
                      markeredgewidth=0)
        if highlight is not None:
            own = rows[rows["district"] == highlight]
            axes.errorbar(own["warm_c"].to_numpy(), own["q50"].to_numpy(), yerr=_spread_below_above(own),
                          fmt=marker, color=colour, markersize=8, elinewidth=1.6, markeredgecolor=_INK,
                          markeredgewidth=0.8, zorder=6)
            for _, r in own.iterrows():
                axes.annotate(str(highlight), (r["warm_c"], r["q50"]), xytext=(7, -3), textcoords="offset points",
                              fontsize=8, color=_INK, parse_math=False)
    axes.set_xlim(x_low, x_high)
    axes.set_ylim(y_low, y_high)
    axes.set_xlabel("mean air temperature of the district's three warmest months (\u00b0C)", fontsize=9, color=_INK)
    axes.set_ylabel("crossover temperature of its land (\u00b0C)\nmedian and 5\u201395 % of its cells", fontsize=9,
                    color=_INK)
    axes.tick_params(labelsize=8)
    for side in ("top", "right"):
        axes.spines[side].set_visible(False)
    axes.legend(loc="lower left", bbox_to_anchor=(0.0, 1.0), frameon=False, fontsize=8, title_fontsize=8,
                ncol=min(3, data["scenario"].nunique()), title="one mark per district", alignment="left")
    return figure


def save_png(data: bytes, path: str | os.PathLike) -> Path:
    """Write PNG bytes to ``path`` atomically (temporary name in the same folder, then os.replace)."""
    return atomic_write(path, lambda temporary: temporary.write_bytes(data), what="the figure")
