"""Figures: scale bars, colours, layout and the data each chart draws.

All rasters and districts here are SYNTHETIC, made up for these tests; the district names are invented.
Sources are named beside each check.
"""

from __future__ import annotations

import io
import math
import re
import warnings
from types import SimpleNamespace

import colorspacious
import geopandas as gpd
import numpy as np
import pandas as pd
import pyproj
import pytest
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.patches import Rectangle
from PIL import Image
from rasterio.transform import from_origin
from shapely.geometry import box

from suitability.reports import figures
from suitability.variables import CLASS_C3, CLASS_C4, CLASS_CONTESTED, CLASS_NO_SEASON, CLASS_NODATA

from . import write_raster

GEOD = pyproj.Geod(ellps="WGS84")


def _rgb(figure) -> np.ndarray:
    canvas = FigureCanvasAgg(figure)
    canvas.draw()
    return np.asarray(canvas.buffer_rgba())[..., :3]


def _hex_rgb(colour: str) -> np.ndarray:
    return np.array([int(colour[i:i + 2], 16) for i in (1, 3, 5)], dtype=np.uint8)


def _three_band_classes(height=40, width=60):
    """Columns 0-19 C3, 20-39 contested, 40-59 C4; a nodata block in the top-left corner."""
    classes = np.full((height, width), CLASS_C4, dtype=np.uint8)
    classes[:, :20] = CLASS_C3
    classes[:, 20:40] = CLASS_CONTESTED
    classes[:5, :5] = CLASS_NODATA
    return classes


# --- scale-bar geometry ----------------------------------------------------------------------------------

@pytest.mark.parametrize("latitude", [0.0, -24.0, 45.0, 60.0])
def test_metres_per_degree_longitude_matches_geod(latitude):
    # pyproj.Geod (Karney 2013) distance over 0.001 degree of longitude, scaled to one degree; over so short
    # a step the geodesic and the parallel differ by far less than 1e-9.
    distance = GEOD.inv(56.0, latitude, 56.001, latitude)[2] * 1000
    assert figures.metres_per_degree_longitude(latitude) == pytest.approx(distance, rel=1e-7)


def test_metres_per_degree_at_equator():
    # Hand derivation: at the equator a degree of longitude is pi/180 * a = 111319.49 m for WGS84's a.
    assert figures.metres_per_degree_longitude(0.0) == pytest.approx(math.pi / 180 * 6378137.0, rel=1e-12)


@pytest.mark.parametrize("longest, expected", [(37_000, 20_000), (50_000, 50_000), (9.99, 5), (1000, 1000),
                                               (199, 100), (0.3, 0.2)])
def test_nice_scale_length(longest, expected):
    # Derived here from the definition: the largest 1, 2 or 5 x 10^k not longer than the given length.
    assert figures.nice_scale_length(longest) == pytest.approx(expected)


def _scale_bar(figure):
    """The axes holding the scale bar: below the map frame, off the data, with the map's ground scale."""
    return next(a for a in figure.axes if a.get_gid() == "scale_bar")


def _scale_bar_width(figure) -> float:
    axes = _scale_bar(figure)
    return sum(p.get_width() for p in axes.patches if isinstance(p, Rectangle) and p.get_zorder() == 5)


def test_class_map_projected_scale_bar_colours_and_labels(tmp_path):
    # Grid of 60 x 40 cells of 1 km in UTM: 60 km wide; a quarter is 15 km -> the scale bar shows 10 km
    # (hand derivation from nice_scale_length's rule) and is 10 000 m long in map units.
    path = write_raster(tmp_path / "pathway_class.tif", _three_band_classes(), "EPSG:32740",
                        from_origin(300000, 7400000, 1000, 1000))
    zones = gpd.GeoDataFrame({"district": ["Orvanne", "Telmira"]},
                             geometry=[box(302000, 7362000, 330000, 7398000), box(330000, 7362000, 358000, 7398000)],
                             crs="EPSG:32740").to_crs("EPSG:4326")  # another CRS: the map reprojects them
    figure = figures.class_map_figure(path, zones, title="baseline")
    texts = [t.get_text() for t in figure.axes[0].texts]
    assert "10 km" in [t.get_text() for t in _scale_bar(figure).texts]
    assert _scale_bar_width(figure) == pytest.approx(10_000, rel=1e-9)
    # Off the data: the bar's axes lies wholly below the map frame, and spans the frame's ground scale.
    FigureCanvasAgg(figure).draw()
    frame, bar = figure.axes[0].get_position(), _scale_bar(figure).get_position()
    assert bar.y1 <= frame.y0 and bar.width == pytest.approx(frame.width)
    assert _scale_bar(figure).get_xlim() == figure.axes[0].get_xlim()
    assert "Orvanne" in texts and "Telmira" in texts
    image = _rgb(figure)
    # Derived from the synthetic layout: the three class colours are all drawn, C3 left of contested left
    # of C4 (mean column of the pixels of each colour).
    centres = []
    for code in (CLASS_C3, CLASS_CONTESTED, CLASS_C4):
        match = np.all(image == _hex_rgb(figures.CLASS_COLOURS[code]), axis=-1)
        assert match.sum() > 1000, f"class {code} colour not drawn"
        centres.append(np.nonzero(match)[1].mean())
    assert centres[0] < centres[1] < centres[2]


def test_zoom_bounds_centre_the_district_and_refuse_an_unknown_one(tmp_path):
    path = write_raster(tmp_path / "pathway_class.tif", _three_band_classes(), "EPSG:32740",
                        from_origin(300000, 7400000, 1000, 1000))
    zones = gpd.GeoDataFrame({"district": ["Orvanne", "Telmira"]},
                             geometry=[box(302000, 7362000, 330000, 7398000), box(330000, 7362000, 358000, 7398000)],
                             crs="EPSG:32740")
    # Orvanne: 28 x 36 km centred on (316000, 7380000); half of 36 km x (0.5 + 0.15) each side.
    assert figures.zoom_bounds(zones, "Orvanne", path) == pytest.approx(
        (316000 - 23400, 7380000 - 23400, 316000 + 23400, 7380000 + 23400))
    with pytest.raises(ValueError, match="no district 'Nowhere'"):
        figures.zoom_bounds(zones, "Nowhere", path)


def test_class_map_geographic_scale_bar_from_latitude(tmp_path):
    # 1 degree wide, centred on 24.5 S. pyproj.Geod gives the length of a degree along that parallel; a
    # quarter of the width is about 25 km -> a 20 km bar, whose width in degrees is 20 km / that length.
    path = write_raster(tmp_path / "pathway_class.tif", _three_band_classes(40, 100), "EPSG:4326",
                        from_origin(56.0, -24.3, 0.01, 0.01))
    figure = figures.class_map_figure(path, None)
    degree_m = GEOD.inv(56.0, -24.5, 56.001, -24.5)[2] * 1000
    assert "20 km" in [t.get_text() for t in _scale_bar(figure).texts]
    assert _scale_bar_width(figure) == pytest.approx(20_000 / degree_m, rel=1e-6)
    # Equal ground distances on both axes: the aspect is 1 / cos(latitude) (hand derivation, sphere)
    assert figure.axes[0].get_aspect() == pytest.approx(1 / math.cos(math.radians(24.5)), rel=1e-9)


def test_north_arrow_follows_the_meridian_convergence(tmp_path):
    # UTM zone 40S, map centre 300-360 km east: grid north differs from true north by the meridian
    # convergence, which pyproj's projection factors give independently (Snyder 1987, UTM).
    path = write_raster(tmp_path / "pathway_class.tif", _three_band_classes(), "EPSG:32740",
                        from_origin(300000, 7400000, 1000, 1000))
    figure = figures.class_map_figure(path, None)
    raster = figures._MapRaster(path)
    lon, lat = raster.centre_lonlat
    convergence = pyproj.Proj("EPSG:32740").get_factors(lon, lat).meridian_convergence
    assert raster.grid_north_degrees() == pytest.approx(-convergence, abs=0.01)
    assert any(a.get_gid() == "north_arrow" for a in figure.axes)


def test_graticule_labels_are_degrees_at_the_frame(tmp_path):
    path = write_raster(tmp_path / "pathway_class.tif", _three_band_classes(), "EPSG:32740",
                        from_origin(300000, 7400000, 1000, 1000))
    figure = figures.class_map_figure(path, None)
    axes = figure.axes[0]
    labels = [t.get_text() for t in axes.get_xticklabels()]
    assert labels and all(label.endswith("\u00b0 E") for label in labels)
    # Each labelled longitude crosses the bottom edge where pyproj puts it (independent transform).
    to_geo = pyproj.Transformer.from_crs("EPSG:32740", "EPSG:4326", always_xy=True)
    bottom = axes.get_ylim()[0]
    for x, label in zip(axes.get_xticks(), labels):
        lon, _ = to_geo.transform(x, bottom)
        assert lon == pytest.approx(float(label.split("\u00b0")[0]), abs=1e-6)
    assert all(label.endswith("\u00b0 S") for label in (t.get_text() for t in axes.get_yticklabels()))


@pytest.mark.parametrize("extent", [
    (300000, 7460000, 200, 160),  # the demo's frame: the 23 deg S line 4 km below the top edge
    (330000, 7420000, 140, 140),  # about 1.3 deg across: 0.25 deg lines before (labels 23.8 for 23.75)
])
def test_graticule_labels_stay_off_the_title_and_each_other_and_say_their_exact_value(tmp_path, extent):
    west, north, width, height = extent
    classes = np.full((height, width), CLASS_C3, dtype=np.uint8)
    path = write_raster(tmp_path / "pathway_class.tif", classes, "EPSG:32740", from_origin(west, north, 1000, 1000))
    figure = figures.class_map_figure(path, None, title="A title as long as a scenario's, to the right edge "
                                      "of the map", size_in=(6.3, 4.2))
    renderer = FigureCanvasAgg(figure).get_renderer()
    figure.draw(renderer)
    axes = figure.axes[0]
    title = next(t for t in figure.texts if t.get_gid() == "title").get_window_extent(renderer)
    frame = axes.get_window_extent(renderer)
    x_labels = [t for t in axes.get_xticklabels() if t.get_text()]
    y_labels = [t for t in axes.get_yticklabels() if t.get_text()]
    assert len(x_labels) >= 2 and len(y_labels) >= 2
    boxes = [t.get_window_extent(renderer) for t in x_labels + y_labels]
    for i, first in enumerate(boxes):
        assert not first.overlaps(title)
        for second in boxes[i + 1:]:
            assert not first.overlaps(second)
    for label in y_labels:  # a latitude label stays within the frame's height
        extent_ = label.get_window_extent(renderer)
        assert frame.y0 - 0.5 <= extent_.y0 and extent_.y1 <= frame.y1 + 0.5
    # Each label is the exact degree of its line where pyproj puts it (independent transform).
    to_geo = pyproj.Transformer.from_crs("EPSG:32740", "EPSG:4326", always_xy=True)
    (left, _), (bottom, _) = axes.get_xlim(), axes.get_ylim()
    for x, label in zip(axes.get_xticks(), x_labels):
        assert to_geo.transform(x, bottom)[0] == pytest.approx(float(label.get_text().split("\u00b0")[0]), abs=1e-6)
    for y, label in zip(axes.get_yticks(), y_labels):
        assert -to_geo.transform(left, y)[1] == pytest.approx(float(label.get_text().split("\u00b0")[0]), abs=1e-6)


def test_numbered_labels_never_overlap(tmp_path):
    path = write_raster(tmp_path / "pathway_class.tif", _three_band_classes(), "EPSG:32740",
                        from_origin(300000, 7400000, 1000, 1000))
    # 400 districts of 1.5 km: a number at 7.5 pt is wider than a district at this map's scale.
    boxes = [box(300000 + 1500 * (i % 20), 7365000 + 1500 * (i // 20), 300000 + 1500 * (i % 20 + 1),
                 7365000 + 1500 * (i // 20 + 1)) for i in range(400)]
    zones = gpd.GeoDataFrame({"district": [f"D{i}" for i in range(400)]}, geometry=boxes, crs="EPSG:32740")
    numbers = {f"D{i}": i + 1 for i in range(400)}
    figure = figures.class_map_figure(path, zones, numbers=numbers)
    renderer = FigureCanvasAgg(figure).get_renderer()
    frame = figure.axes[0].get_window_extent(renderer)
    drawn = [t.get_window_extent(renderer) for t in figure.axes[0].texts]
    assert 0 < len(drawn) < 400  # some numbers would collide at this size: left out, and the brief says so
    assert sum(not ok for ok in figure.labels_drawn.values()) == 400 - len(drawn)
    for i, a in enumerate(drawn):
        assert frame.x0 <= a.x0 and a.x1 <= frame.x1 and frame.y0 <= a.y0 and a.y1 <= frame.y1
        for b in drawn[i + 1:]:
            assert not a.overlaps(b)


def test_district_crossover_chart_draws_the_points():
    points = pd.DataFrame({"district": ["Orvanne", "Telmira"] * 2, "scenario": ["Today"] * 2 + ["Warmer"] * 2,
                           "warm_c": [20.0, 25.0, 23.0, 28.0], "q05": [21.0, 21.5, 21.0, 21.5],
                           "q50": [22.0, 22.5, 22.0, 22.5], "q95": [23.0, 23.5, 23.0, 23.5]})
    figure = figures.district_crossover_figure(points)
    axes = figure.axes[0]
    tie = next(line for line in axes.lines if line.get_gid() == "tie")
    assert list(tie.get_xdata()) == list(tie.get_ydata())  # the diagonal: warm months at the crossover
    marks = {c.get_label(): c for c in axes.containers}
    assert set(marks) == {"Today", "Warmer"}
    today = marks["Today"].lines[0]
    assert list(today.get_xdata()) == [20.0, 25.0] and list(today.get_ydata()) == [22.0, 22.5]


def test_a_highlighted_district_is_drawn_without_pandas_deprecations():
    # One district's row is a one-row frame: its Series once reached matplotlib, which called float() on
    # them; pandas deprecates that (FutureWarning, "will raise a TypeError in the future").
    points = pd.DataFrame({"district": ["Orvanne", "Telmira"], "scenario": ["Today", "Today"],
                           "warm_c": [20.0, 25.0], "q05": [21.0, 21.5], "q50": [22.0, 22.5], "q95": [23.0, 24.5]})
    with warnings.catch_warnings():
        warnings.simplefilter("error", FutureWarning)
        figure = figures.district_crossover_figure(points, highlight="Telmira")
    own = figure.axes[0].containers[-1]
    assert list(own.lines[0].get_xdata()) == [25.0] and list(own.lines[0].get_ydata()) == [22.5]
    (bar,) = own.lines[2]
    assert bar.get_segments()[0][:, 1].tolist() == [21.5, 24.5]  # the 5-95 % bar: 22.5 - 1.0 to 22.5 + 2.0


def test_change_map_is_diverging_and_centred(tmp_path):
    change = np.linspace(-0.12, 0.31, 60)[None, :].repeat(30, axis=0)
    path = write_raster(tmp_path / "advantage_change.tif", change, "EPSG:32740", from_origin(0, 30000, 1000, 1000))
    figure = figures.change_map_figure(path, None)
    image = figure.axes[0].images[0]
    # Derived here: the largest |change| 0.31 rounds up to 0.35, the scale is symmetric about 0.
    assert image.norm.vmin == pytest.approx(-0.35) and image.norm.vmax == pytest.approx(0.35)
    assert image.norm(0.0) == pytest.approx(0.5)
    assert image.get_cmap().name == figures.CHANGE_COLORMAP


def test_class_colours_stay_distinct_for_colour_blind_readers():
    # Independent library colorspacious: CVD simulation (Machado et al. 2009) at full severity, distances in
    # CAM02-UCS (Luo et al. 2006). A distance of 20 or more counts as clearly distinct (common practice,
    # no source).
    colours = {code: _hex_rgb(c) / 255 for code, c in figures.CLASS_COLOURS.items()}
    assert set(colours) == {CLASS_C3, CLASS_CONTESTED, CLASS_C4, CLASS_NO_SEASON}
    for deficiency in ("deuteranomaly", "protanomaly", "tritanomaly"):
        space = {"name": "sRGB1+CVD", "cvd_type": deficiency, "severity": 100}
        seen = {code: np.clip(colorspacious.cspace_convert(rgb, space, "sRGB1"), 0, 1) for code, rgb in colours.items()}
        for a in seen:
            for b in seen:
                if a < b:
                    assert colorspacious.deltaE(seen[a], seen[b], input_space="sRGB1") >= 20, (deficiency, a, b)


# --- charts ----------------------------------------------------------------------------------------------

def _table():
    rows = []
    for district, base, warm in (("Orvanne", (0.6, 0.3, 0.1), (0.2, 0.3, 0.5)), ("Telmira", (0.1, 0.1, 0.8), (0.0, 0.05, 0.95))):
        for scenario, shares in (("baseline", base), ("warmer", warm)):
            rows.append({"district": district, "scenario": scenario, "share_c3": shares[0],
                         "share_contested": shares[1], "share_c4": shares[2]})
    rows.append({"district": "Far Reach", "scenario": "baseline", "share_c3": np.nan, "share_contested": np.nan,
                 "share_c4": np.nan})
    return pd.DataFrame(rows)


def test_class_share_chart_draws_the_table():
    table = _table()
    shares = figures.class_share_table(table)
    # Plumbing against the input table: percent = 100 * share, districts without data left out.
    assert list(zip(shares["district"], shares["scenario"])) == [
        ("Orvanne", "baseline"), ("Orvanne", "warmer"), ("Telmira", "baseline"), ("Telmira", "warmer")]
    assert shares["C4 favoured"].tolist() == pytest.approx([10, 50, 80, 95])
    figure = figures.class_share_figure(table)
    bars = [p for p in figure.axes[0].patches if isinstance(p, Rectangle)]
    assert len(bars) == 4 * 3
    # Each district-scenario bar stack adds up to 100 % (the shares of one row sum to 1 by construction).
    ends = {}
    for bar in bars:
        y = round(bar.get_y() + bar.get_height() / 2, 6)
        ends[y] = max(ends.get(y, 0), bar.get_x() + bar.get_width())
    assert list(ends.values()) == pytest.approx([100.0] * 4)


def test_crossover_chart_plots_the_function_and_the_scenarios():
    def linear(co2, o2_percent):  # a stand-in with a known shape: 12 degC + 0.025 degC per ppm
        return 12 + 0.025 * np.asarray(co2)

    scenarios = [SimpleNamespace(name="baseline", co2_ppm=420, temperature_offset_c=0.0),
                 SimpleNamespace(name="hot", co2_ppm=700, temperature_offset_c=3.0)]
    figure = figures.crossover_figure(23.5, scenarios, crossover=linear)
    lines = {line.get_gid(): line for line in figure.axes[0].lines}
    co2 = lines["crossover"].get_xdata()
    assert co2[0] == 250 and co2[-1] == 1000  # the brief's CO2 range
    assert lines["crossover"].get_ydata() == pytest.approx(linear(co2, 20.95))
    assert set(lines["warm_season"].get_ydata()) == {23.5}
    assert lines["scenario:hot"].get_xdata()[0] == 700
    assert lines["scenario:hot"].get_ydata()[0] == pytest.approx(26.5)  # hand: 23.5 + 3.0


def test_crossover_chart_with_the_physiology_function():
    function = figures.physiology_crossover()
    assert function.__module__.startswith("suitability.physiology")
    figure = figures.crossover_figure(23.5, [])
    line = next(line for line in figure.axes[0].lines if line.get_gid() == "crossover")
    co2, temperature = line.get_xdata(), line.get_ydata()
    finite = np.isfinite(temperature)
    # Ehleringer, Cerling & Helliker (1997): the crossover temperature rises with CO2.
    assert np.all(np.diff(temperature[finite]) > 0)
    # The chart draws the physiology's leaf quantum-yield crossover of the default (grass) sets. With the
    # Collatz et al. (1992) fitted C4 yield 0.04 it lies far above the Collatz, Berry & Clark (1998) 22 degC
    # (37.9 degC at 350 ppm); the 22 degC checks are in tests/physiology (grass yields; canopy tie).
    assert np.interp(350, co2[finite], temperature[finite]) == pytest.approx(float(function(350.0)), abs=0.05)


def test_png_bytes_are_a_real_non_blank_image(tmp_path):
    path = write_raster(tmp_path / "pathway_class.tif", _three_band_classes(), "EPSG:32740",
                        from_origin(300000, 7400000, 1000, 1000))
    data = figures.class_map_png(path, None, dpi=80)
    image = np.asarray(Image.open(io.BytesIO(data)).convert("L"), dtype=float)  # Pillow decodes it
    assert image.shape[0] > 200 and image.shape[1] > 200
    assert image.std() > 10  # not a blank page
    saved = figures.save_png(data, tmp_path / "map.png")
    assert saved.read_bytes() == data
    assert sorted(p.name for p in tmp_path.iterdir()) == ["map.png", "pathway_class.tif"]


def test_highlighted_district_has_a_heavy_outline(tmp_path):
    path = write_raster(tmp_path / "pathway_class.tif", _three_band_classes(), "EPSG:32740",
                        from_origin(300000, 7400000, 1000, 1000))
    zones = gpd.GeoDataFrame({"district": ["Orvanne", "Telmira"]},
                             geometry=[box(302000, 7362000, 330000, 7398000), box(330000, 7362000, 358000, 7398000)],
                             crs="EPSG:32740")
    plain = figures.class_map_figure(path, zones)
    marked = figures.class_map_figure(path, zones, highlight="Telmira")
    widths = [c.get_linewidth()[0] for c in marked.axes[0].collections]
    # Derived here: one extra outline collection, heavier than the others, tracing Telmira's box.
    assert len(marked.axes[0].collections) == len(plain.axes[0].collections) + 1
    heavy = marked.axes[0].collections[int(np.argmax(widths))]
    vertices = np.concatenate([p.vertices for p in heavy.get_paths()])
    assert vertices[:, 0].min() == pytest.approx(330000) and vertices[:, 0].max() == pytest.approx(358000)


def test_maps_drawn_through_one_frame_are_the_maps_drawn_alone(tmp_path):
    # Derived here: a map drawn into the kept frame of the previous map (MapFrames) must be the map drawn on
    # its own, pixel for pixel and in its SVG, whatever layer (classes, change with its colour bar) came
    # before; a map of another district gets a frame of its own.
    transform = from_origin(300000, 7400000, 1000, 1000)
    classes = write_raster(tmp_path / "pathway_class.tif", _three_band_classes(), "EPSG:32740", transform)
    change = write_raster(tmp_path / "advantage_change.tif",
                          np.linspace(-0.3, 0.2, 40 * 60, dtype="float32").reshape(40, 60), "EPSG:32740", transform)
    zones = gpd.GeoDataFrame({"district": ["Orvanne", "Telmira"]},
                             geometry=[box(302000, 7362000, 330000, 7398000), box(330000, 7362000, 358000, 7398000)],
                             crs="EPSG:32740")
    frames = figures.MapFrames()
    sequence = [(figures.class_map_figure, classes, "Telmira"), (figures.change_map_figure, change, "Telmira"),
                (figures.class_map_figure, classes, "Telmira"), (figures.change_map_figure, change, "Orvanne"),
                (figures.class_map_figure, classes, "Orvanne")]
    built = []
    for draw, path, district in sequence:
        options = dict(title=f"{path.stem} of {district}", highlight=district, zoom=True, size_in=(7.0, 4.35))
        kept = draw(path, zones, frames=frames, **options)
        built.append(kept)
        kept_png, kept_svg = figures.figure_bytes(kept, "png"), figures.figure_bytes(kept, "svg")
        alone = draw(path, zones, **options)
        assert np.array_equal(np.asarray(Image.open(io.BytesIO(kept_png))),
                              np.asarray(Image.open(io.BytesIO(figures.figure_bytes(alone, "png")))))
        # ids are random and the date is the moment of saving
        strip_ids = lambda svg: re.sub(rb'(id|href|clip-path)="[^"]*"|<dc:date>[^<]*</dc:date>', b"", svg)  # noqa: E731
        assert strip_ids(kept_svg) == strip_ids(figures.figure_bytes(alone, "svg"))
    assert built[0] is built[1] is built[2] and built[3] is built[4] and built[2] is not built[3]


def test_png_is_rgb_and_the_same_pixels_as_matplotlib_draws(tmp_path):
    # Reference: matplotlib's own PNG writer (savefig, RGBA on a white face). The brief's PNG drops the alpha
    # channel, which is all opaque there, and keeps every pixel and the resolution.
    path = write_raster(tmp_path / "pathway_class.tif", _three_band_classes(), "EPSG:32740",
                        from_origin(300000, 7400000, 1000, 1000))
    figure = figures.class_map_figure(path, None, title="baseline")
    dpi_before = figure.dpi
    ours = Image.open(io.BytesIO(figures.figure_bytes(figure, "png", dpi=120)))
    assert figure.dpi == dpi_before != 120  # left as it was
    buffer = io.BytesIO()
    figure.savefig(buffer, format="png", dpi=120, facecolor="white")
    reference = np.asarray(Image.open(buffer))
    assert ours.mode == "RGB" and ours.info["dpi"] == pytest.approx((120, 120), abs=0.05)
    assert reference.shape[-1] == 4 and reference[..., 3].min() == 255
    assert np.array_equal(np.asarray(ours), reference[..., :3])


def _drawn_change_map(tmp_path, size_in):
    """A change map of changes from -0.3 to 0.2, drawn (text placed); (figure, renderer)."""
    path = write_raster(tmp_path / "advantage_change.tif",
                        np.linspace(-0.3, 0.2, 40 * 60, dtype="float32").reshape(40, 60), "EPSG:32740",
                        from_origin(300000, 7400000, 1000, 1000))
    figure = figures.change_map_figure(path, None, title="warmer", size_in=size_in)
    canvas = FigureCanvasAgg(figure)
    canvas.draw()  # places the axis label and the tick labels
    return figure, canvas.get_renderer()


@pytest.mark.parametrize("size_in", [(7.0, 4.35), figures.MAP_SIZE_IN])
def test_change_map_scale_label_is_inside_the_figure(tmp_path, size_in):
    # Derived here: the words saying which way is towards C3 and towards C4 must be on the figure (they were
    # drawn below the colour bar, off the bottom of the half-page map), clear of the map frame and the scale bar.
    figure, renderer = _drawn_change_map(tmp_path, size_in)
    bar_axes = figure.axes[-1]
    label = bar_axes.xaxis.label
    assert "towards C4" in label.get_text()
    box, whole = label.get_window_extent(renderer), figure.bbox
    assert whole.x0 <= box.x0 and box.x1 <= whole.x1 and whole.y0 <= box.y0 and box.y1 <= whole.y1
    assert not box.overlaps(figure.axes[0].get_window_extent(renderer))
    scale_bar = _scale_bar(figure)
    for part in [*scale_bar.patches, *scale_bar.texts]:
        assert not box.overlaps(part.get_window_extent(renderer))


@pytest.mark.parametrize("size_in", [(7.0, 4.35), figures.MAP_SIZE_IN])
def test_change_map_scale_ticks_are_readable_and_symmetric(tmp_path, size_in):
    # Derived here: the scale runs from -limit to +limit (limit: the largest change rounded up to 0.05,
    # here 0.3); matplotlib's own ticks put nine labels on it, run together at 7 pt.
    figure, renderer = _drawn_change_map(tmp_path, size_in)
    labels = [t for t in figure.axes[-1].get_xticklabels() if t.get_text()]
    assert [t.get_text() for t in labels] == ["\u22120.3", "\u22120.15", "0", "+0.15", "+0.3"]
    boxes = [t.get_window_extent(renderer) for t in labels]
    for first, second in zip(boxes, boxes[1:]):
        assert first.x1 < second.x0
