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
import os
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import Protocol

import geopandas as gpd
import numpy as np
import pandas as pd
import pyproj
import rasterio
from matplotlib import colors as mcolors
from matplotlib import patheffects
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
    """A raster read for display: values (float, NaN nodata), extent, CRS; decimated to fit the figure."""

    def __init__(self, path: str | os.PathLike, max_pixels: int = _MAX_MAP_PIXELS):
        self.path = Path(path)
        try:
            dataset = rasterio.open(self.path)
        except rasterio.errors.RasterioIOError as exc:
            raise InputDataError(f"{self.path}: cannot open the raster ({exc}); expected a GeoTIFF") from exc
        with dataset:
            if dataset.crs is None:
                raise InputDataError(f"{self.path}: the raster has no CRS; expected the output grid's CRS")
            scale = max(1.0, max(dataset.width, dataset.height) / max_pixels)
            shape = (max(1, round(dataset.height / scale)), max(1, round(dataset.width / scale)))
            data = dataset.read(1, out_shape=shape, masked=True, resampling=Resampling.nearest)
            self.values = data.astype("float64").filled(np.nan)
            self.crs = pyproj.CRS.from_user_input(dataset.crs.to_wkt())
            left, bottom, right, top = dataset.bounds
            self.extent = (left, right, bottom, top)

    @property
    def mid_latitude(self) -> float:
        """Latitude of the map centre [deg]."""
        left, right, bottom, top = self.extent
        if self.crs.is_geographic:
            return (bottom + top) / 2
        to_geographic = pyproj.Transformer.from_crs(self.crs, self.crs.geodetic_crs, always_xy=True)
        return to_geographic.transform((left + right) / 2, (bottom + top) / 2)[1]

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


# --- drawing helpers -------------------------------------------------------------------------------------

def _png(figure: Figure, dpi: int) -> bytes:
    buffer = io.BytesIO()
    figure.savefig(buffer, format="png", dpi=dpi, facecolor="white")
    return buffer.getvalue()


def _map_axes(figure: Figure, raster: _MapRaster, title: str):
    axes = figure.add_axes((0.03, 0.19, 0.94, 0.72))
    axes.set_xticks([])
    axes.set_yticks([])
    for spine in axes.spines.values():
        spine.set_edgecolor("#BBBBBB")
    axes.set_title(title, loc="left", fontsize=10, color=_INK, pad=6, parse_math=False)
    return axes


def _draw_districts(axes, zones: gpd.GeoDataFrame | None, raster: _MapRaster, highlight: str | None) -> None:
    if zones is None or len(zones) == 0:
        return
    on_map = zones_on_grid(zones, raster.crs)
    on_map.boundary.plot(ax=axes, color=OUTLINE_COLOUR, linewidth=0.8)
    if highlight is not None:
        on_map[on_map["district"] == highlight].boundary.plot(ax=axes, color="#000000", linewidth=2.6)
    halo = [patheffects.withStroke(linewidth=3, foreground="white")]
    left, right, bottom, top = raster.extent
    labelled = on_map if len(on_map) <= MAX_MAP_LABELS else on_map[on_map["district"] == highlight]
    for name, geometry in zip(labelled["district"], labelled.geometry):
        if geometry is None or geometry.is_empty:
            continue
        point = geometry.representative_point()
        if left <= point.x <= right and bottom <= point.y <= top:
            # parse_math=False: a name is plain text ("$5$" is not mathematics)
            axes.annotate(str(name), (point.x, point.y), ha="center", va="center", fontsize=9, color=_INK,
                          path_effects=halo, parse_math=False)
    axes.set_xlim(left, right)
    axes.set_ylim(bottom, top)
    axes.set_xlabel("")  # geopandas labels the axes with the CRS's axis names; the frame is enough
    axes.set_ylabel("")


def _set_ground_aspect(axes, raster: _MapRaster) -> None:
    """Equal ground distances along both axes at the map centre. Set last: imshow and geopandas reset it."""
    if raster.crs.is_geographic:
        axes.set_aspect(1.0 / max(math.cos(math.radians(raster.mid_latitude)), 1e-6))
    else:
        axes.set_aspect("equal")


def _draw_scale_bar(axes, raster: _MapRaster) -> float:
    """Scale bar in the lower left corner, about a quarter of the map wide; returns its length [m]."""
    left, right, bottom, top = raster.extent
    metres_per_unit = raster.metres_per_x_unit()
    length_m = nice_scale_length(0.25 * (right - left) * metres_per_unit)
    length_units = length_m / metres_per_unit
    x0 = left + 0.04 * (right - left)
    y0 = bottom + 0.05 * (top - bottom)
    height = 0.012 * (top - bottom)
    axes.add_patch(Rectangle((x0, y0), length_units / 2, height, facecolor=_INK, edgecolor=_INK, zorder=5))
    axes.add_patch(Rectangle((x0 + length_units / 2, y0), length_units / 2, height, facecolor="white",
                             edgecolor=_INK, zorder=5))
    halo = [patheffects.withStroke(linewidth=3, foreground="white")]
    axes.annotate(_format_length(length_m), (x0 + length_units / 2, y0 + 2.2 * height), ha="center",
                  va="bottom", fontsize=8, color=_INK, path_effects=halo, zorder=6)
    return length_m


def _class_rgba(classes: np.ndarray) -> np.ndarray:
    rgba = np.zeros(classes.shape + (4,), dtype="float64")
    for code, colour in CLASS_COLOURS.items():
        rgba[classes == code] = mcolors.to_rgba(colour)
    return rgba  # nodata stays transparent over the white figure


# --- public figures --------------------------------------------------------------------------------------

MAP_SIZE_IN = (4.8, 4.6)


def class_map_figure(class_path, zones: gpd.GeoDataFrame | None = None, *, title: str = "",
                     highlight: str | None = None, size_in: tuple[float, float] = MAP_SIZE_IN) -> Figure:
    """The favoured-pathway map of one scenario: classes, legend, scale bar, district outlines and names.

    class_path: a ``pathway_class.tif``. zones: districts with a ``district`` column (any CRS), or None.
    highlight: a district drawn with a heavy outline. size_in: figure (width, height) [inch].
    """
    raster = _MapRaster(class_path)
    figure = Figure(figsize=size_in)
    axes = _map_axes(figure, raster, title)
    axes.imshow(_class_rgba(raster.values), extent=raster.extent, interpolation="nearest", origin="upper")
    _draw_districts(axes, zones, raster, highlight)
    _draw_scale_bar(axes, raster)
    _set_ground_aspect(axes, raster)
    handles = [Patch(facecolor=CLASS_COLOURS[c], edgecolor="#999999", label=CLASS_LABELS[c]) for c in CLASS_COLOURS]
    handles.append(Patch(facecolor=NODATA_COLOUR, edgecolor="#999999", label="no data"))
    figure.legend(handles=handles, loc="lower center", ncol=2, frameon=False, fontsize=8,
                  bbox_to_anchor=(0.5, 0.0), handlelength=1.4, columnspacing=1.2)
    return figure


def class_map_png(class_path, zones: gpd.GeoDataFrame | None = None, *, title: str = "",
                  highlight: str | None = None, dpi: int = 130) -> bytes:
    """PNG bytes of :func:`class_map_figure`."""
    return _png(class_map_figure(class_path, zones, title=title, highlight=highlight), dpi)


def change_map_figure(change_path, zones: gpd.GeoDataFrame | None = None, *, title: str = "",
                      highlight: str | None = None, size_in: tuple[float, float] = MAP_SIZE_IN) -> Figure:
    """Map of ``advantage_change.tif`` (scenario minus baseline) on a diverging scale centred on 0."""
    raster = _MapRaster(change_path)
    figure = Figure(figsize=size_in)
    axes = _map_axes(figure, raster, title)
    finite = raster.values[np.isfinite(raster.values)]
    largest = float(np.max(np.abs(finite))) if finite.size else 0.0
    limit = max(0.05, math.ceil(largest * 20) / 20)  # round up to 0.05, never a zero-width scale
    image = axes.imshow(raster.values, extent=raster.extent, interpolation="nearest", origin="upper",
                        cmap=CHANGE_COLORMAP, norm=mcolors.TwoSlopeNorm(0.0, -limit, limit))
    _draw_districts(axes, zones, raster, highlight)
    _draw_scale_bar(axes, raster)
    _set_ground_aspect(axes, raster)
    bar_axes = figure.add_axes((0.15, 0.10, 0.7, 0.03))
    bar = figure.colorbar(image, cax=bar_axes, orientation="horizontal")
    bar.set_label("\u2190 towards C3      change of the advantage      towards C4 \u2192", fontsize=8, color=_INK)
    bar.ax.tick_params(labelsize=7.5)
    return figure


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


def save_png(data: bytes, path: str | os.PathLike) -> Path:
    """Write PNG bytes to ``path`` atomically (temporary name in the same folder, then os.replace)."""
    return atomic_write(path, lambda temporary: temporary.write_bytes(data), what="the figure")
