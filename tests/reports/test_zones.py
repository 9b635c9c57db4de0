"""Zonal statistics against areas derived independently of exactextract.

All rasters and district polygons here are SYNTHETIC, made up for these tests; the district names
(Orvanne, Telmira, Quessel, Far Reach) are invented and describe no real place.

Sources of the expected values, named beside each check:
- "hand derivation": widths and heights of the polygon's pieces in each grid column, worked out in the
  comments (rectangles aligned with the grid).
- "derived here: exact geometry of the polygon ∩ cell": the polygon is intersected with every cell box by
  shapely/GEOS (an algorithm independent of exactextract's coverage fractions) and the pieces' areas summed.
- "pyproj.Geod": geodesic areas on the WGS84 ellipsoid (Karney 2013, as implemented in PROJ's geodesic
  library), of the pieces with edges densified so that they follow the lines of constant latitude.
"""

from __future__ import annotations

import math
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import pyproj
import pytest
import shapely
from rasterio.transform import from_origin
from shapely.geometry import Polygon, box

from suitability.errors import InputDataError
from suitability.reports.zones import (
    COLUMNS,
    district_distribution,
    district_monthly_means,
    output_grid,
    warmest_months,
    OutputGrid,
    ellipsoidal_zone_area_m2,
    read_zones,
    write_table_csv,
    write_table_geopackage,
    zonal_statistics,
)
from suitability.variables import CLASS_C3, CLASS_C4, CLASS_CONTESTED, CLASS_NODATA

from . import write_scenario_folder

UTM = "EPSG:32740"
# Projected grid: 8 columns x 6 rows of 1000 m cells, top-left corner (300000, 7400000).
UTM_TRANSFORM = from_origin(300000, 7400000, 1000, 1000)
# Geographic grid: 8 x 6 cells of 0.1 degree, top-left corner (56.0 E, 23.5 S).
GEO_TRANSFORM = from_origin(56.0, -23.5, 0.1, 0.1)
SHAPE = (6, 8)
GEOD = pyproj.Geod(ellps="WGS84")


def _column_pattern():
    """Classes by column (0-1 C3, 2 contested, 3-7 C4), one nodata cell at row 2, column 1; advantage
    -0.3 + 0.2 * column. The baseline; the scenario turns column 0 to C4 and adds 0.1 to the advantage."""
    columns = np.broadcast_to(np.arange(SHAPE[1]), SHAPE)
    classes = np.where(columns <= 1, CLASS_C3, np.where(columns == 2, CLASS_CONTESTED, CLASS_C4)).astype("uint8")
    classes[2, 1] = CLASS_NODATA
    advantage = -0.3 + 0.2 * columns
    scenario_classes = classes.copy()
    scenario_classes[:, 0] = CLASS_C4
    return classes, advantage, scenario_classes


def _outputs(tmp_path: Path, crs: str, transform) -> dict[str, Path]:
    classes, advantage, scenario_classes = _column_pattern()
    months = np.broadcast_to(np.arange(SHAPE[0])[:, None], SHAPE).astype(float)  # months = row index
    baseline = write_scenario_folder(tmp_path / "baseline", crs, transform, classes, advantage, months=months)
    warmer = write_scenario_folder(
        tmp_path / "warmer", crs, transform, scenario_classes, advantage + 0.1,
        baseline_classes=classes, baseline_advantage=advantage, months=months,
    )
    return {"baseline": baseline, "warmer": warmer}


def _zones(tmp_path: Path, geometries: dict[str, object], crs: str, name="zones.gpkg") -> Path:
    path = tmp_path / name
    gpd.GeoDataFrame({"district": list(geometries)}, geometry=list(geometries.values()), crs=crs).to_file(path)
    return path


def _row(table: pd.DataFrame, district: str, scenario: str) -> pd.Series:
    rows = table[(table["district"] == district) & (table["scenario"] == scenario)]
    assert len(rows) == 1
    return rows.iloc[0]


def _cell_boxes(transform):
    for row in range(SHAPE[0]):
        for col in range(SHAPE[1]):
            x0, y1 = transform @ (col, row)
            x1, y0 = transform @ (col + 1, row + 1)
            yield row, col, box(x0, y0, x1, y1)


def _class_areas_from_cell_geometry(polygon, transform, classes, area_of) -> dict[int, float]:
    """Derived here: exact geometry of the polygon ∩ cell, summed per class [m2]."""
    areas = {CLASS_C3: 0.0, CLASS_CONTESTED: 0.0, CLASS_C4: 0.0, CLASS_NODATA: 0.0}
    for row, col, cell in _cell_boxes(transform):
        piece = polygon.intersection(cell)
        if not piece.is_empty:
            areas[int(classes[row, col])] += area_of(piece)
    return areas


def _geod_area(geometry) -> float:
    """pyproj.Geod area [m2] of a lon/lat geometry, edges densified to 0.0005 degree."""
    dense = shapely.orient_polygons(shapely.segmentize(geometry, 0.0005))
    return abs(GEOD.geometry_area_perimeter(dense)[0])


# --- projected grid ---------------------------------------------------------------------------------------

def test_projected_rectangle_matches_hand_derivation(tmp_path):
    # Rectangle x 300500..304250, y 7396500..7398500 (2000 m tall). Widths per column (hand derivation):
    # col 0: 500 m, cols 1-3: 1000 m, col 4: 250 m  ->  areas 1.0e6, 2.0e6, 2.0e6, 2.0e6, 0.5e6 m2.
    # Nodata cell (row 2, col 1) spans y 7397000..7398000, fully inside: 1.0e6 m2 of col 1 has no data.
    zones = _zones(tmp_path, {"Orvanne": box(300500, 7396500, 304250, 7398500)}, UTM)
    table = zonal_statistics(zones, "district", _outputs(tmp_path, UTM, UTM_TRANSFORM), "baseline")
    base, warm = _row(table, "Orvanne", "baseline"), _row(table, "Orvanne", "warmer")
    rel = 1e-6

    assert base["district_area_ha"] == pytest.approx(3750 * 2000 / 1e4, rel=rel)  # hand: 750 ha
    assert base["coverage_share"] == pytest.approx(1.0, rel=rel)
    # hand: C3 = col 0 (1.0e6) + col 1 minus nodata (1.0e6) = 200 ha; contested = col 2 = 200 ha;
    # C4 = col 3 (2.0e6) + col 4 (0.5e6) = 250 ha; mapped = 650 ha of 750 ha.
    assert base["area_c3_ha"] == pytest.approx(200.0, rel=rel)
    assert base["area_contested_ha"] == pytest.approx(200.0, rel=rel)
    assert base["area_c4_ha"] == pytest.approx(250.0, rel=rel)
    assert base["valid_share"] == pytest.approx(650 / 750, rel=rel)
    assert base["share_c4"] == pytest.approx(250 / 650, rel=rel)
    # hand: advantage -0.3, -0.1, 0.1, 0.3, 0.5 in cols 0-4 with weights 1, 1, 2, 2, 0.5 (1e6 m2):
    # mean = (-0.3 - 0.1 + 0.2 + 0.6 + 0.25) / 6.5 = 0.1;
    # E[x^2] = (0.09 + 0.01 + 0.02 + 0.18 + 0.125) / 6.5 = 0.425 / 6.5; sd = sqrt(E[x^2] - 0.01).
    assert base["advantage_mean"] == pytest.approx(0.1, rel=rel)
    assert base["advantage_std"] == pytest.approx(math.sqrt(0.425 / 6.5 - 0.01), rel=rel)
    # hand: months = row index; rows 1, 2, 3 hold y 7398000..7398500 (500 m), 7397000..7398000 (1000 m,
    # minus the nodata cell's 1000 m of width), 7396500..7397000 (500 m). Weighted over valid land:
    # row 1: 3750*500, row 2: 2750*1000, row 3: 3750*500 m2 -> mean = (1*1.875 + 2*2.75 + 3*1.875) / 6.5.
    assert base["c4_favoured_months_mean"] == pytest.approx((1.875 + 5.5 + 5.625) / 6.5, rel=rel)
    # hand: the scenario turns col 0 (1.0e6 m2 = 100 ha) from C3 to C4 and adds 0.1 everywhere.
    assert warm["c3_to_c4_ha"] == pytest.approx(100.0, rel=rel)
    assert warm["c4_to_c3_ha"] == 0.0
    assert warm["area_c4_ha"] == pytest.approx(350.0, rel=rel)
    assert warm["share_c4_change"] == pytest.approx(100 / 650, rel=rel)
    assert warm["advantage_change_mean"] == pytest.approx(0.1, rel=rel)
    assert base["flag"] == "" and warm["flag"] == ""
    assert list(table.columns) == list(COLUMNS)


def test_projected_triangle_matches_exact_cell_geometry(tmp_path):
    triangle = Polygon([(300300, 7394200), (307700, 7394900), (301100, 7399800)])
    zones = _zones(tmp_path, {"Telmira": triangle}, UTM)
    table = zonal_statistics(zones, "district", _outputs(tmp_path, UTM, UTM_TRANSFORM), "baseline")
    base = _row(table, "Telmira", "baseline")
    classes, _, _ = _column_pattern()
    expected = _class_areas_from_cell_geometry(triangle, UTM_TRANSFORM, classes, lambda g: g.area)
    # derived here: exact geometry of the polygon ∩ cell (GEOS), to 1e-6 relative
    assert base["area_c3_ha"] == pytest.approx(expected[CLASS_C3] / 1e4, rel=1e-6)
    assert base["area_contested_ha"] == pytest.approx(expected[CLASS_CONTESTED] / 1e4, rel=1e-6)
    assert base["area_c4_ha"] == pytest.approx(expected[CLASS_C4] / 1e4, rel=1e-6)
    # hand derivation (shoelace formula): area = |x1(y2 - y3) + x2(y3 - y1) + x3(y1 - y2)| / 2
    (x1, y1), (x2, y2), (x3, y3) = triangle.exterior.coords[:3]
    shoelace_m2 = abs(x1 * (y2 - y3) + x2 * (y3 - y1) + x3 * (y1 - y2)) / 2
    assert base["district_area_ha"] == pytest.approx(shoelace_m2 / 1e4, rel=1e-9)
    by_class_and_nodata = base[["area_c3_ha", "area_contested_ha", "area_c4_ha"]].sum() + expected[CLASS_NODATA] / 1e4
    assert by_class_and_nodata == pytest.approx(shoelace_m2 / 1e4, rel=0.005)  # brief: within 0.5 %


# --- geographic grid --------------------------------------------------------------------------------------

def test_geographic_cell_areas_match_geod():
    grid = OutputGrid(pyproj.CRS("EPSG:4326"), GEO_TRANSFORM, SHAPE[1], SHAPE[0])
    areas = grid.row_cell_area_m2(np.arange(SHAPE[0]))
    for row, _, cell in _cell_boxes(GEO_TRANSFORM):
        if _ == 0:  # one cell per row is enough: the area depends on the row only
            # pyproj.Geod area of the cell with its parallels densified (independent of Snyder's formula)
            assert areas[row] == pytest.approx(_geod_area(cell), rel=1e-9)


def test_sphere_limit_of_zone_area():
    # Archimedes' hat-box theorem (a textbook identity): a zone of a sphere between latitudes phi1 and
    # phi2 has area R^2 * dlambda * (sin phi2 - sin phi1). A near-sphere (1/f = 1e9) must approach it.
    radius, phi1, phi2, width = 6_371_000.0, math.radians(-24.0), math.radians(-23.0), math.radians(0.5)
    sphere = radius**2 * width * abs(math.sin(phi2) - math.sin(phi1))
    assert ellipsoidal_zone_area_m2(phi1, phi2, width, radius, 0.0) == pytest.approx(sphere, rel=1e-12)
    assert ellipsoidal_zone_area_m2(phi1, phi2, width, radius, 1e9) == pytest.approx(sphere, rel=1e-7)


def _partial_cell_bounds(polygon, transform, classes) -> dict[int, float]:
    """Derived here: per class, a bound on the error of coverage * cell area in cells the polygon cuts [m2].

    Within a cell the ellipsoid's area per square degree varies as cos(phi) / (1 - e^2 sin^2 phi)^2, so a
    piece of planar (lon/lat) fraction c of a cell of area A has a true area within c*A*s of c*A, where s
    is the spread of that density over the cell relative to its value at mid-cell. Sums c*A*s per class.
    """
    ellipsoid = pyproj.CRS("EPSG:4326").ellipsoid
    flattening = 1 / ellipsoid.inverse_flattening
    ecc2 = flattening * (2 - flattening)

    def density(phi_deg):
        phi = math.radians(phi_deg)
        return math.cos(phi) / (1 - ecc2 * math.sin(phi) ** 2) ** 2

    bounds = {CLASS_C3: 0.0, CLASS_CONTESTED: 0.0, CLASS_C4: 0.0, CLASS_NODATA: 0.0}
    for row, col, cell in _cell_boxes(transform):
        piece = polygon.intersection(cell)
        if piece.is_empty or piece.area >= cell.area * (1 - 1e-12):
            continue
        y0, y1 = cell.bounds[1], cell.bounds[3]
        spread = abs(density(y0) - density(y1)) / density((y0 + y1) / 2)
        bounds[int(classes[row, col])] += _geod_area(cell) * piece.area / cell.area * spread
    return bounds


@pytest.mark.parametrize(
    "name, polygon",
    [
        ("Quessel", box(56.05, -24.03, 56.63, -23.62)),
        ("Telmira", Polygon([(56.03, -24.08), (56.77, -24.01), (56.11, -23.52)])),
    ],
)
def test_geographic_areas_match_geod_of_clipped_cells(tmp_path, name, polygon):
    zones = _zones(tmp_path, {name: polygon}, "EPSG:4326")
    table = zonal_statistics(zones, "district", _outputs(tmp_path, "EPSG:4326", GEO_TRANSFORM), "baseline")
    base = _row(table, name, "baseline")
    classes, _, _ = _column_pattern()
    # pyproj.Geod area of each polygon ∩ cell piece, summed per class
    expected = _class_areas_from_cell_geometry(polygon, GEO_TRANSFORM, classes, _geod_area)
    tolerance_m2 = _partial_cell_bounds(polygon, GEO_TRANSFORM, classes)
    for column, code in (("area_c3_ha", CLASS_C3), ("area_contested_ha", CLASS_CONTESTED), ("area_c4_ha", CLASS_C4)):
        assert tolerance_m2[code] < 1e-3 * expected[code]  # the bound itself is small
        assert abs(base[column] * 1e4 - expected[code]) <= tolerance_m2[code] + 1e-6 * expected[code]
    # district area: pyproj.Geod of the whole polygon (same measure), and classes + nodata within 0.5 %
    assert base["district_area_ha"] == pytest.approx(_geod_area(polygon) / 1e4, rel=1e-6)
    mapped_and_nodata_ha = base[["area_c3_ha", "area_contested_ha", "area_c4_ha"]].sum() + expected[CLASS_NODATA] / 1e4
    assert mapped_and_nodata_ha == pytest.approx(base["district_area_ha"], rel=0.005)


# --- CRS handling -----------------------------------------------------------------------------------------

def _densified_in(geometries: dict[str, object], step: float, source: str, target: str) -> dict[str, object]:
    transformer = pyproj.Transformer.from_crs(source, target, always_xy=True)
    return {
        name: shapely.transform(shapely.segmentize(geometry, step), lambda xy: np.column_stack(transformer.transform(xy[:, 0], xy[:, 1])))
        for name, geometry in geometries.items()
    }


NUMERIC = [c for c in COLUMNS if c not in ("district", "scenario", "flag")]


@pytest.mark.parametrize("other_crs", ["EPSG:4326", "EPSG:3857"])
def test_polygons_in_another_crs_give_the_same_numbers_projected_grid(tmp_path, other_crs):
    # Polygons defined in the grid CRS, densified to 10 m and transformed; the reference table uses the
    # grid-CRS originals. Same shapes, so the same numbers (derived here: invariance under reprojection).
    geometries = {
        "Orvanne": box(300500, 7396500, 304250, 7398500),
        "Telmira": Polygon([(300300, 7394200), (307700, 7394900), (301100, 7399800)]),
    }
    outputs = _outputs(tmp_path, UTM, UTM_TRANSFORM)
    reference = zonal_statistics(_zones(tmp_path, geometries, UTM, "a.gpkg"), "district", outputs, "baseline")
    moved = _densified_in(geometries, 10.0, UTM, other_crs)
    other = zonal_statistics(_zones(tmp_path, moved, other_crs, "b.gpkg"), "district", outputs, "baseline")
    pd.testing.assert_frame_equal(reference[NUMERIC], other[NUMERIC], rtol=1e-6, atol=1e-9)


def test_polygons_in_another_crs_give_the_same_numbers_geographic_grid(tmp_path):
    geometries = {"Quessel": box(56.05, -24.03, 56.63, -23.62)}
    outputs = _outputs(tmp_path, "EPSG:4326", GEO_TRANSFORM)
    reference = zonal_statistics(_zones(tmp_path, geometries, "EPSG:4326", "a.gpkg"), "district", outputs, "baseline")
    moved = _densified_in(geometries, 0.0001, "EPSG:4326", UTM)
    other = zonal_statistics(_zones(tmp_path, moved, UTM, "b.gpkg"), "district", outputs, "baseline")
    pd.testing.assert_frame_equal(reference[NUMERIC], other[NUMERIC], rtol=1e-6, atol=1e-9)


# --- districts that do not fit the grid ---------------------------------------------------------------------

def test_partly_outside_and_no_overlap_are_flagged(tmp_path):
    geometries = {
        # hand derivation: x 296000..300000 is off the grid, 300000..304000 on it -> half of it on the grid
        "Orvanne": box(296000, 7395000, 304000, 7397000),
        "Far Reach": box(100000, 7000000, 102000, 7002000),  # far from the grid: no overlap at all
    }
    table = zonal_statistics(_zones(tmp_path, geometries, UTM), "district", _outputs(tmp_path, UTM, UTM_TRANSFORM),
                             "baseline")
    half, far = _row(table, "Orvanne", "baseline"), _row(table, "Far Reach", "baseline")
    assert half["coverage_share"] == pytest.approx(0.5, rel=1e-9)
    assert "partly outside" in half["flag"]
    # hand: on-grid part x 300000..304000, y 7395000..7397000 = rows 3-4, cols 0-3, no nodata there
    assert half["valid_share"] == pytest.approx(0.5, rel=1e-6)
    assert half[["area_c3_ha", "area_contested_ha", "area_c4_ha"]].sum() == pytest.approx(800.0, rel=1e-6)
    assert far["coverage_share"] == 0.0 and far["valid_share"] == 0.0
    assert far["area_c4_ha"] == 0.0 and far["c3_to_c4_ha"] == 0.0
    assert "no overlap" in far["flag"]
    assert math.isnan(far["advantage_mean"])  # no data to average, and the flag says why
    assert far["district_area_ha"] == pytest.approx(400.0, rel=1e-9)  # hand: 2 km x 2 km


# --- bad input ----------------------------------------------------------------------------------------------

def test_missing_crs_is_an_error(tmp_path):
    path = tmp_path / "nocrs.shp"
    gpd.GeoDataFrame({"district": ["Orvanne"]}, geometry=[box(0, 0, 1, 1)]).to_file(path)
    with pytest.raises(InputDataError, match="no CRS") as error:
        read_zones(path, "district")
    assert str(path) in str(error.value)


def test_empty_file_is_an_error(tmp_path):
    path = tmp_path / "empty.gpkg"
    gpd.GeoDataFrame({"district": pd.Series([], dtype=str)}, geometry=[], crs=UTM).to_file(path)
    with pytest.raises(InputDataError, match="no features") as error:
        read_zones(path, "district")
    assert str(path) in str(error.value)


def test_missing_name_field_lists_the_fields(tmp_path):
    path = tmp_path / "zones.geojson"
    gpd.GeoDataFrame({"NAME_2": ["Orvanne"], "code": [7]}, geometry=[box(0, 0, 1, 1)], crs="EPSG:4326").to_file(path)
    with pytest.raises(InputDataError, match="district") as error:
        read_zones(path, "district")
    assert "NAME_2" in str(error.value) and "code" in str(error.value) and str(path) in str(error.value)


def test_duplicate_names_are_an_error(tmp_path):
    path = _zones(tmp_path, {"a": box(0, 0, 1, 1)}, UTM)
    gpd.GeoDataFrame({"district": ["Telmira", "Orvanne", "Telmira"]}, geometry=[box(0, 0, 1, 1)] * 3,
                     crs=UTM).to_file(path)
    with pytest.raises(InputDataError, match="duplicate district names: Telmira"):
        read_zones(path, "district")


def test_missing_layer_and_missing_baseline_are_errors(tmp_path):
    outputs = _outputs(tmp_path, UTM, UTM_TRANSFORM)
    zones = _zones(tmp_path, {"Orvanne": box(300500, 7396500, 304250, 7398500)}, UTM)
    with pytest.raises(InputDataError, match="baseline scenario 'present'"):
        zonal_statistics(zones, "district", outputs, "present")
    (outputs["warmer"] / "class_transition.tif").unlink()
    with pytest.raises(InputDataError, match="class_transition"):
        zonal_statistics(zones, "district", outputs, "baseline")


def test_layer_on_another_grid_is_an_error(tmp_path):
    outputs = _outputs(tmp_path, UTM, UTM_TRANSFORM)
    classes, advantage, _ = _column_pattern()
    write_scenario_folder(outputs["warmer"], UTM, from_origin(300500, 7400000, 1000, 1000), classes, advantage,
                          baseline_classes=classes, baseline_advantage=advantage)
    zones = _zones(tmp_path, {"Orvanne": box(300500, 7396500, 304250, 7398500)}, UTM)
    with pytest.raises(InputDataError, match="not on the grid"):
        zonal_statistics(zones, "district", outputs, "baseline")


# --- writers ------------------------------------------------------------------------------------------------

def test_csv_and_geopackage_writers_round_trip(tmp_path):
    geometries = {"Orvanne": box(300500, 7396500, 304250, 7398500), "Far Reach": box(0, 0, 10, 10)}
    zones = _zones(tmp_path, geometries, UTM)
    table = zonal_statistics(zones, "district", _outputs(tmp_path, UTM, UTM_TRANSFORM), "baseline")
    out = tmp_path / "out"
    out.mkdir()
    (out / "districts.csv").write_text("old content\n")  # replaced, not appended to
    csv_path = write_table_csv(table, out / "districts.csv")
    back = pd.read_csv(csv_path, keep_default_na=False, na_values=[""])
    pd.testing.assert_frame_equal(back[NUMERIC], table[NUMERIC], rtol=1e-12)
    gpkg = write_table_geopackage(table, zones, "district", out / "districts.gpkg")
    import pyogrio

    assert [name for name, _ in pyogrio.list_layers(gpkg)] == ["baseline", "warmer"]
    layer = gpd.read_file(gpkg, layer="warmer")
    assert list(layer["district"]) == ["Orvanne", "Far Reach"]
    expected = table[table["scenario"] == "warmer"].reset_index(drop=True)
    pd.testing.assert_frame_equal(layer[NUMERIC], expected[NUMERIC], rtol=1e-12)
    assert layer.crs == pyproj.CRS(UTM)
    assert sorted(p.name for p in out.iterdir()) == ["districts.csv", "districts.gpkg"]  # no temporaries left


def test_district_distribution_reads_a_monthly_layer_at_the_districts_own_months(tmp_path):
    # A 12-band crossover layer (one band per month, as a per-cell, per-month tie temperature would be):
    # band m holds 20 + m in every cell, except column 0 which holds 30 + m. A district's cells take the
    # mean of its own months' bands. Hand derivation: months (1, 2, 12) -> 20 + 5 = 25 in columns 1-4 and
    # 35 in column 0; a district of columns 0-3 (1/4 of its cells in column 0): 5 % and 50 % -> 25, 95 % -> 35.
    import rasterio

    path = tmp_path / "crossover_temperature.tif"
    values = np.stack([np.where(np.arange(5)[None, :] == 0, 30.0 + m, 20.0 + m) * np.ones((4, 1)) for m in range(1, 13)])
    with rasterio.open(path, "w", driver="GTiff", width=5, height=4, count=12, dtype="float32", crs=UTM,
                       transform=from_origin(300000, 7400000, 1000, 1000), nodata=np.nan) as dst:
        dst.write(values.astype("float32"))
    zones = _zones(tmp_path, {"Orvanne": box(300000, 7396000, 304000, 7400000)}, UTM)
    quantiles = district_distribution(zones, "district", path, {"Orvanne": [1, 2, 12]})
    assert quantiles.loc["Orvanne"].tolist() == pytest.approx([25.0, 25.0, 35.0])
    monthly = district_monthly_means(zones, "district", output_grid(path), values)
    # Hand: area-weighted mean of band m over columns 0-3 = (30 + m + 3 * (20 + m)) / 4 = 22.5 + m
    assert monthly.loc["Orvanne"].tolist() == pytest.approx([22.5 + m for m in range(1, 13)])
    assert warmest_months(monthly.loc["Orvanne"]) == [12, 11, 10]


def test_district_monthly_means_of_a_lazy_field_in_row_chunks_compute_each_chunk_once(tmp_path):
    # Hand derivation: two districts over a 6 x 5 grid of 1 km cells, the field in row chunks of 2 (three
    # stripes). Band m holds 10 * row + m, except one NaN cell in row 1 of "Tessil", which is left out of
    # the mean. "Tessil" covers rows 0-2, columns 0-1: (5 * 10 * mean row + m) over the five finite cells,
    # rows 0, 0, 1, 2, 2 -> mean row 1.0 -> 10 + m. "Mavrel" covers rows 3-5, columns 2-4: rows 3, 4, 5 in
    # equal parts -> 40 + m. Each row chunk is computed once, whatever the number of districts.
    import dask
    import dask.array as da
    import rasterio

    grid_path = tmp_path / "grid.tif"
    with rasterio.open(grid_path, "w", driver="GTiff", width=5, height=6, count=1, dtype="uint8", crs=UTM,
                       transform=from_origin(300000, 7400000, 1000, 1000)) as dst:
        dst.write(np.zeros((1, 6, 5), dtype="uint8"))
    rows = np.arange(6, dtype="float64")[:, None] * np.ones((1, 5))
    values = np.stack([10.0 * rows + m for m in range(1, 13)])
    values[:, 1, 1] = np.nan
    zones = _zones(tmp_path, {"Tessil": box(300000, 7397000, 302000, 7400000),
                              "Mavrel": box(302000, 7394000, 305000, 7397000)}, UTM)
    computed = []

    def counted(block):
        computed.append(block.shape)
        return block

    lazy = da.from_array(values, chunks=(12, 2, 5)).map_blocks(counted, dtype="float64")
    with dask.config.set(scheduler="synchronous"):
        from_lazy = district_monthly_means(zones, "district", output_grid(grid_path), lazy)
    from_numpy = district_monthly_means(zones, "district", output_grid(grid_path), values)
    assert from_lazy.loc["Tessil"].tolist() == pytest.approx([10.0 + m for m in range(1, 13)])
    assert from_lazy.loc["Mavrel"].tolist() == pytest.approx([40.0 + m for m in range(1, 13)])
    pd.testing.assert_frame_equal(from_lazy, from_numpy)
    assert len([shape for shape in computed if shape == (12, 2, 5)]) == 3
