"""Exact-coverage zonal statistics of the output rasters per district and scenario.

Each district polygon is intersected with the output grid by ``exactextract``, which gives, for every cell
the polygon touches, the fraction of the cell it covers. A cell's weight in every statistic is

    w_i = coverage_i * cell_area_i                                                      [m2]

so partial cells count in proportion to the land they contribute. Cell areas are those of the run's
target grid (:meth:`suitability.grid.TargetGrid.row_cell_area_m2`): the map-plane area on projected grids,
the exact ellipsoidal quadrangle (Snyder 1987, eq. 3-12) on geographic ones.

Weighted means use the weights of the cells where that layer has data; the standard deviation is the
weighted population standard deviation sqrt(sum w (x - m)^2 / sum w).
"""

from __future__ import annotations

import contextlib
import math
import os
from collections.abc import Iterable, Mapping
from dataclasses import dataclass
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import pyproj
import rasterio
import shapely
from exactextract import exact_extract
from exactextract.raster import NumPyRasterSource
from rasterio.windows import Window

from suitability.atomic import atomic_write
from suitability.outputs import write_csv
from suitability.errors import InputDataError, OutputError
from suitability.grid import TargetGrid, ellipsoidal_zone_area_m2  # noqa: F401 - the area formula is re-exported
from suitability.inputs.districts import read_zones  # noqa: F401 - read by the inputs; re-exported for the reports
from suitability.variables import (
    CHANGE,
    CLASS_C3,
    CLASS_C4,
    CLASS_CONTESTED,
    CLASS_NO_SEASON,
    CLASS_NODATA,
    layer_names,
)

#: Layers every scenario folder must hold for the statistics.
SCENARIO_LAYERS = (
    "pathway_class",
    "pathway_advantage",
    "c3_assimilation",
    "c4_assimilation",
    "c4_favoured_months",
)
#: Extra layers every non-baseline scenario folder must hold: the registry's change layers.
CHANGE_LAYERS = layer_names(CHANGE)
#: Layers used when a scenario folder holds them (written only for ensembles or parameter draws): their
#: columns are NaN otherwise, and the brief's statements about them appear only when they are present.
OPTIONAL_LAYERS = (
    "c4_favoured_share", "change_agreement",                     # climate-model ensembles (variables.py)
    "c4_advantage_probability", "towards_c4_probability",         # parameter draws (uncertainty)
    "class_change_probability",
)

#: The classes of the transition accounting, in order from C3 to C4 then the rest, with the short keys of
#: their table columns. "nodata" is land without results (off the grid or no valid input there).
TRANSITION_CLASSES: dict[str, int] = {
    "c3": CLASS_C3, "contested": CLASS_CONTESTED, "c4": CLASS_C4, "noseason": CLASS_NO_SEASON, "nodata": CLASS_NODATA,
}
#: Rank of each growing class from C3 to C4: a move to a higher rank is "towards C4", to a lower one "towards C3".
_RANK = {CLASS_C3: 0, CLASS_CONTESTED: 1, CLASS_C4: 2}


def transition_column(before: str, after: str) -> str:
    """Column of the district table holding the land in class ``before`` in the baseline and ``after``
    in the scenario [ha] (keys of :data:`TRANSITION_CLASSES`), e.g. ``c3_to_c4_ha``."""
    return f"{before}_to_{after}_ha"


TRANSITION_COLUMNS = tuple(transition_column(b, a) for b in TRANSITION_CLASSES for a in TRANSITION_CLASSES)
TOWARDS_C4 = tuple(transition_column(b, a) for b, cb in TRANSITION_CLASSES.items() for a, ca in TRANSITION_CLASSES.items()
                   if cb in _RANK and ca in _RANK and _RANK[ca] > _RANK[cb])
TOWARDS_C3 = tuple(transition_column(b, a) for b, cb in TRANSITION_CLASSES.items() for a, ca in TRANSITION_CLASSES.items()
                   if cb in _RANK and ca in _RANK and _RANK[ca] < _RANK[cb])
#: Probability or member share at or above which the brief calls a result "in at least 90 % of draws" or
#: "in at least 80 % of members" (80 %: IPCC AR6 WGI Cross-Chapter Box Atlas.1, as indicators.AGREEMENT_SHARE;
#: 90 %: "very likely" in the IPCC calibrated language, Mastrandrea et al. 2010).
MEMBER_SHARE = 0.8
DRAW_PROBABILITY = 0.9

#: Columns of the table returned by :func:`zonal_statistics`, in order, with their meaning.
COLUMNS: dict[str, str] = {
    "district": "district name, from the zones' name field",
    "scenario": "scenario name",
    "district_area_ha": "area of the whole district polygon [ha]",
    "coverage_share": "share of the district's area that lies on the output grid [0-1]",
    "valid_share": "share of the district's area with results (any class, no growing season included) [0-1]",
    "area_c3_ha": "land where C3 is favoured [ha]",
    "area_contested_ha": "land where neither pathway is clearly favoured [ha]",
    "area_c4_ha": "land where C4 is favoured [ha]",
    "area_noseason_ha": "land with results but no month of growing season [ha]",
    "share_c3": "area_c3_ha / area with results [0-1]",
    "share_contested": "area_contested_ha / area with results [0-1]",
    "share_c4": "area_c4_ha / area with results [0-1]",
    "share_noseason": "area_noseason_ha / area with results [0-1]",
    "advantage_mean": "area-weighted mean pathway advantage (A4 - A3)/(A4 + A3) [-1..1]",
    "advantage_std": "area-weighted standard deviation of the pathway advantage [-]",
    "c3_assimilation_mean": "area-weighted mean seasonal C3 assimilation [g C m-2]",
    "c4_assimilation_mean": "area-weighted mean seasonal C4 assimilation [g C m-2]",
    "c4_favoured_months_mean": "area-weighted mean number of months in which C4 is favoured [months]",
    "advantage_change_mean": "area-weighted mean change of the advantage against the baseline, 0 for it [-2..2]",
    "share_c4_change": "share_c4 minus the baseline's share_c4, 0 for the baseline [-1..1]",
    "towards_c4_ha": "land whose class moves towards C4 against the baseline: C3 to contested, C3 to C4, "
                     "contested to C4 [ha]",
    "towards_c3_ha": "land whose class moves towards C3 against the baseline: C4 to contested, C4 to C3, "
                     "contested to C3 [ha]",
    **{transition_column(b, a): f"land in class {b} in the baseline and {a} in the scenario [ha] "
       "(nodata: no results, including land off the grid; the 25 columns sum to district_area_ha)"
       for b in TRANSITION_CLASSES for a in TRANSITION_CLASSES},
    "members": "number of climate-model members of an ensemble scenario, empty for a single climate [count]",
    "c4_most_members_ha": f"land where C4 is favoured in at least {MEMBER_SHARE:.0%} of the members [ha]",
    "agree_towards_c4_ha": "land where the members agree (80 %) that the advantage moves towards C4 [ha]",
    "agree_towards_c3_ha": "land where the members agree (80 %) that the advantage moves towards C3 [ha]",
    "ensemble_mapped_ha": "land with ensemble results (the base of the two agreement columns) [ha]",
    "c4_very_likely_ha": f"land where C4 is favoured in at least {DRAW_PROBABILITY:.0%} of parameter draws [ha]",
    "c3_very_likely_ha": f"land where C3 or a tie is found in at least {DRAW_PROBABILITY:.0%} of parameter draws [ha]",
    "towards_c4_very_likely_ha": f"land that moves towards C4 in at least {DRAW_PROBABILITY:.0%} of paired draws [ha]",
    "class_change_very_likely_ha": f"land whose class changes in at least {DRAW_PROBABILITY:.0%} of paired draws [ha]",
    "draws_mapped_ha": "land with parameter-draw results (the base of the draw columns) [ha]",
    "flag": "empty when all is well, else what is wrong (no overlap, partly outside, mostly without results, "
            "mostly outside the growing season, repaired)",
}
#: Columns holding areas [ha] (summed for a region) and shares [0-1] (recomputed from areas, never summed).
AREA_COLUMNS = tuple(c for c in COLUMNS if c.endswith("_ha"))

#: A district with results on less than this share of its area is flagged "mostly without results"; one
#: with more than this share of its results outside the growing season "mostly outside the growing season"
#: (half: common practice, no source).
MOSTLY = 0.5
_SQUARE_METRES_PER_HECTARE = 1.0e4
# Districts whose share on the grid falls below this are flagged as partly outside.
_FULL_COVERAGE = 0.999


#: The grid of the output rasters is the run's target grid; kept under this name for the zonal code.
OutputGrid = TargetGrid


def output_grid(path: Path) -> TargetGrid:
    """Read the grid of an output raster; a missing CRS or a rotated or south-up grid is an error."""
    with _open_raster(path) as dataset:
        if dataset.crs is None:
            raise InputDataError(f"{path}: the raster has no CRS; expected the CRS of the output grid")
        transform = dataset.transform
        if transform.b != 0 or transform.d != 0 or transform.e >= 0:
            raise InputDataError(
                f"{path}: expected a north-up grid without rotation, found transform {tuple(transform)[:6]}"
            )
        return TargetGrid(pyproj.CRS.from_user_input(dataset.crs.to_wkt()), transform, dataset.width, dataset.height)


def zones_on_grid(zones: gpd.GeoDataFrame, grid_crs: pyproj.CRS) -> gpd.GeoDataFrame:
    """Return ``zones`` in ``grid_crs``, edges densified first so they follow their true shape there.

    exactextract does not reproject (it only warns on a CRS mismatch), so this must happen before it. Edges
    are split into pieces no longer than 1/1000 of the layer's extent, in its own CRS, before the vertices
    are transformed: a straight edge in one CRS is curved in another.
    """
    if pyproj.CRS.from_user_input(zones.crs).equals(grid_crs):
        return zones
    xmin, ymin, xmax, ymax = zones.total_bounds
    segment = math.hypot(xmax - xmin, ymax - ymin) / 1000.0
    densified = zones.geometry.segmentize(segment) if segment > 0 else zones.geometry
    return gpd.GeoDataFrame(zones.drop(columns=zones.geometry.name), geometry=densified, crs=zones.crs).to_crs(
        grid_crs
    )


def geometry_area_m2(geometry, grid: TargetGrid) -> float:
    """Area of ``geometry`` (in the grid CRS) [m2], measured as the cell areas are.

    Projected: planar area times the squared axis unit. Geographic: geodesic area on the grid's ellipsoid
    (pyproj.Geod, Karney 2013) of the geometry with edges densified to a quarter cell, so that edges that
    are straight in longitude/latitude are followed.
    """
    if geometry is None or geometry.is_empty:
        return 0.0
    unit = grid.crs.axis_info[0].unit_conversion_factor
    if not grid.is_geographic:
        return float(geometry.area) * unit * unit
    step = min(abs(grid.transform.a), abs(grid.transform.e)) / 4.0
    dense = shapely.segmentize(geometry, step)
    if unit != math.pi / 180.0:
        dense = shapely.transform(dense, lambda xy: xy * unit * 180.0 / math.pi)
    ellipsoid = grid.crs.ellipsoid
    geod = pyproj.Geod(a=ellipsoid.semi_major_metre, b=ellipsoid.semi_minor_metre)
    area, _ = geod.geometry_area_perimeter(shapely.orient_polygons(dense))
    return abs(float(area))


@dataclass(frozen=True)
class _DistrictCells:
    """The grid cells one district covers: flat row/col indices and weights w = coverage * area [m2]."""

    rows: np.ndarray
    cols: np.ndarray
    weights_m2: np.ndarray

    @property
    def window(self) -> Window:
        r0, c0 = int(self.rows.min()), int(self.cols.min())
        return Window(c0, r0, int(self.cols.max()) - c0 + 1, int(self.rows.max()) - r0 + 1)


def _district_cells(geometry, grid: TargetGrid, template: NumPyRasterSource, crs) -> _DistrictCells:
    features = gpd.GeoDataFrame({"id": [0]}, geometry=[geometry], crs=crs)
    result = exact_extract(template, features, ["cell_id", "coverage"], output="pandas")
    cell_ids = np.asarray(result["cell_id"].iloc[0], dtype="int64")
    coverage = np.asarray(result["coverage"].iloc[0], dtype="float64")
    rows, cols = np.divmod(cell_ids, grid.width)
    return _DistrictCells(rows, cols, coverage * grid.row_cell_area_m2(rows))


def _grid_template(grid: TargetGrid) -> NumPyRasterSource:
    # A zero-memory stand-in raster: only the grid geometry matters for cell ids and coverage.
    xmin, ymin, xmax, ymax = grid.bounds
    cells = np.broadcast_to(np.uint8(0), (grid.height, grid.width))
    return NumPyRasterSource(cells, xmin, ymin, xmax, ymax, srs_wkt=grid.crs.to_wkt())


def _open_raster(path: Path):
    try:
        return rasterio.open(path)
    except rasterio.errors.RasterioIOError as exc:
        raise InputDataError(f"{path}: cannot open the raster ({exc}); expected a GeoTIFF of the output grid") from exc


def _scenario_layer_paths(folder: Path, scenario: str, is_baseline: bool) -> dict[str, Path]:
    names = SCENARIO_LAYERS + (() if is_baseline else CHANGE_LAYERS)
    paths = {name: Path(folder) / f"{name}.tif" for name in names}
    missing = [str(p) for p in paths.values() if not p.exists()]
    if missing:
        raise InputDataError(
            f"scenario {scenario!r}: missing output layer(s) {', '.join(missing)}; expected the output "
            f"folder of a finished run with the layers {', '.join(names)}"
        )
    for name in OPTIONAL_LAYERS:
        if (Path(folder) / f"{name}.tif").exists():
            paths[name] = Path(folder) / f"{name}.tif"
    return paths


def _open_on_grid(path: Path, grid: TargetGrid, stack: contextlib.ExitStack):
    """Open ``path`` for the duration of ``stack``, after checking it lies on ``grid``."""
    other = output_grid(path)
    if not grid.same_grid(other.crs, other.transform, other.shape):
        raise InputDataError(
            f"{path}: the raster is not on the grid of the other outputs; expected the CRS, shape and "
            f"transform of the baseline's pathway_class.tif"
        )
    return stack.enter_context(_open_raster(path))


def _read_cells(dataset, cells: _DistrictCells) -> np.ndarray:
    """Values of ``dataset`` (band 1) at the district's cells, float64, NaN where nodata."""
    window = cells.window
    block = dataset.read(1, window=window, masked=True).astype("float64").filled(np.nan)
    return block[cells.rows - int(window.row_off), cells.cols - int(window.col_off)]


def _read_classes(dataset, cells: _DistrictCells) -> np.ndarray:
    """Class codes at the district's cells, nodata as CLASS_NODATA."""
    values = _read_cells(dataset, cells)
    return np.where(np.isfinite(values), values, CLASS_NODATA).astype("int64")


def _weighted_mean_std(values: np.ndarray, weights: np.ndarray) -> tuple[float, float]:
    valid = np.isfinite(values) & (weights > 0)
    total = weights[valid].sum()
    if total <= 0:
        return math.nan, math.nan
    mean = float(np.sum(weights[valid] * values[valid]) / total)
    variance = float(np.sum(weights[valid] * (values[valid] - mean) ** 2) / total)
    return mean, math.sqrt(max(variance, 0.0))


def _hectares(weights: np.ndarray, where: np.ndarray) -> float:
    return float(weights[where].sum()) / _SQUARE_METRES_PER_HECTARE


_GROWING = {"area_c3_ha": CLASS_C3, "area_contested_ha": CLASS_CONTESTED, "area_c4_ha": CLASS_C4,
            "area_noseason_ha": CLASS_NO_SEASON}


def _transition_areas(w: np.ndarray, before: np.ndarray, after: np.ndarray, off_grid_ha: float) -> dict[str, float]:
    """The 5 x 5 transition accounting [ha]. Pairs where both classes are valid come from the
    ``class_transition`` codes (read by the caller into ``before``/``after``); land off the grid is
    nodata -> nodata, so the 25 areas sum to the district area."""
    areas = {}
    for b, code_b in TRANSITION_CLASSES.items():
        for a, code_a in TRANSITION_CLASSES.items():
            areas[transition_column(b, a)] = _hectares(w, (before == code_b) & (after == code_a))
    areas[transition_column("nodata", "nodata")] += off_grid_ha
    return areas


def _scenario_row(cells: _DistrictCells, layers: Mapping[str, object], baseline_classes: np.ndarray,
                  off_grid_ha: float, members: float) -> dict[str, float]:
    w = cells.weights_m2
    classes = _read_classes(layers["pathway_class"], cells)
    row: dict[str, float] = {key: _hectares(w, classes == code) for key, code in _GROWING.items()}
    mapped_ha = sum(row.values())
    row["mapped_m2"] = mapped_ha * _SQUARE_METRES_PER_HECTARE
    for key in _GROWING:
        share = key.replace("area_", "share_").removesuffix("_ha")
        row[share] = row[key] / mapped_ha if mapped_ha > 0 else math.nan
    row["advantage_mean"], row["advantage_std"] = _weighted_mean_std(
        _read_cells(layers["pathway_advantage"], cells), w
    )
    for layer in ("c3_assimilation", "c4_assimilation", "c4_favoured_months"):
        row[f"{layer}_mean"], _ = _weighted_mean_std(_read_cells(layers[layer], cells), w)
    if "class_transition" in layers:
        codes = _read_classes(layers["class_transition"], cells)
        both = codes != CLASS_NODATA
        # Where both classes are valid the pair is the transition layer's code; where either is nodata the
        # layer is nodata and the pair falls in a nodata row or column, the other class kept.
        before = np.where(both, codes // 10, baseline_classes)
        after = np.where(both, codes % 10, classes)
        row["advantage_change_mean"], _ = _weighted_mean_std(_read_cells(layers["advantage_change"], cells), w)
    else:  # the baseline compared with itself: every cell keeps its class
        before = after = classes
        row["advantage_change_mean"] = 0.0
    row |= _transition_areas(w, before, after, off_grid_ha)
    row["towards_c4_ha"] = sum(row[c] for c in TOWARDS_C4)
    row["towards_c3_ha"] = sum(row[c] for c in TOWARDS_C3)
    row |= _optional_columns(cells, layers, members)
    return row


_OPTIONAL_COLUMNS = ("members", "c4_most_members_ha", "agree_towards_c4_ha", "agree_towards_c3_ha",
                     "ensemble_mapped_ha", "c4_very_likely_ha", "c3_very_likely_ha", "towards_c4_very_likely_ha",
                     "class_change_very_likely_ha", "draws_mapped_ha")


def _optional_columns(cells: _DistrictCells, layers: Mapping[str, object], members: float) -> dict[str, float]:
    """Areas from the ensemble and parameter-draw layers where the folder holds them, NaN otherwise."""
    from suitability.indicators import AGREE_TOWARD_C3, AGREE_TOWARD_C4

    w = cells.weights_m2
    row = dict.fromkeys(_OPTIONAL_COLUMNS, math.nan)
    if "c4_favoured_share" in layers:
        share = _read_cells(layers["c4_favoured_share"], cells)
        row["members"] = members
        row["ensemble_mapped_ha"] = _hectares(w, np.isfinite(share))
        row["c4_most_members_ha"] = _hectares(w, share >= MEMBER_SHARE - 1e-9)
    if "change_agreement" in layers:
        agreement = _read_classes(layers["change_agreement"], cells)
        row["members"] = members
        row["agree_towards_c4_ha"] = _hectares(w, agreement == AGREE_TOWARD_C4)
        row["agree_towards_c3_ha"] = _hectares(w, agreement == AGREE_TOWARD_C3)
        if not math.isfinite(row["ensemble_mapped_ha"]):
            row["ensemble_mapped_ha"] = _hectares(w, agreement != CLASS_NODATA)
    draws = [name for name in ("c4_advantage_probability", "towards_c4_probability", "class_change_probability")
             if name in layers]
    for name, column, rule in (
        ("c4_advantage_probability", "c4_very_likely_ha", lambda p: p >= DRAW_PROBABILITY - 1e-9),
        ("c4_advantage_probability", "c3_very_likely_ha", lambda p: p <= 1 - DRAW_PROBABILITY + 1e-9),
        ("towards_c4_probability", "towards_c4_very_likely_ha", lambda p: p >= DRAW_PROBABILITY - 1e-9),
        ("class_change_probability", "class_change_very_likely_ha", lambda p: p >= DRAW_PROBABILITY - 1e-9),
    ):
        if name in layers:
            probability = _read_cells(layers[name], cells)
            with np.errstate(invalid="ignore"):
                row[column] = _hectares(w, rule(probability))
            if name == draws[0]:
                row["draws_mapped_ha"] = _hectares(w, np.isfinite(probability))
    return row


def _empty_row(off_grid_ha: float) -> dict[str, float]:
    row = {key: 0.0 for key in ("mapped_m2", *_GROWING, "towards_c4_ha", "towards_c3_ha", *TRANSITION_COLUMNS)}
    row[transition_column("nodata", "nodata")] = off_grid_ha
    row |= {key: math.nan for key in ("share_c3", "share_contested", "share_c4", "share_noseason", "advantage_mean",
                                      "advantage_std", "c3_assimilation_mean", "c4_assimilation_mean",
                                      "c4_favoured_months_mean", "advantage_change_mean")}
    row |= dict.fromkeys(_OPTIONAL_COLUMNS, math.nan)
    return row


def _flags(coverage_share: float, valid_share: float, noseason_share: float, repaired: bool, empty: bool) -> str:
    notes = []
    if empty:
        notes.append("the district has no geometry")
    elif coverage_share == 0:
        notes.append("no overlap with the output grid")
    elif coverage_share < _FULL_COVERAGE:
        notes.append(f"partly outside the output grid ({coverage_share:.0%} on it)")
    if coverage_share > 0 and valid_share == 0:
        notes.append("no valid data in the district")
    elif coverage_share > 0 and valid_share < MOSTLY:
        notes.append(f"mostly without results (results on {valid_share:.0%} of its area)")
    if math.isfinite(noseason_share) and noseason_share > MOSTLY:
        notes.append(f"mostly outside the growing season ({noseason_share:.0%} of its land with results)")
    if repaired:
        notes.append("invalid polygon repaired before use")
    return "; ".join(notes)


def _district_rows(on_grid: gpd.GeoDataFrame, grid: TargetGrid, datasets: Mapping, baseline: str,
                   members: Mapping[str, float]) -> list[dict]:
    template = _grid_template(grid)
    grid_box = shapely.box(*grid.bounds)
    rows: list[dict] = []
    for district, geometry in zip(on_grid["district"], on_grid.geometry):
        empty = geometry is None or geometry.is_empty
        repaired = not empty and not geometry.is_valid
        if repaired:
            geometry = shapely.make_valid(geometry)
        district_area = geometry_area_m2(geometry, grid)
        inside_area = geometry_area_m2(geometry.intersection(grid_box), grid) if district_area > 0 else 0.0
        coverage_share = min(1.0, inside_area / district_area) if district_area > 0 else 0.0
        cells = _district_cells(geometry, grid, template, on_grid.crs) if coverage_share > 0 else None
        if cells is not None and cells.weights_m2.sum() <= 0:
            cells, coverage_share = None, 0.0
        covered_ha = cells.weights_m2.sum() / _SQUARE_METRES_PER_HECTARE if cells is not None else 0.0
        off_grid_ha = max(0.0, district_area / _SQUARE_METRES_PER_HECTARE - covered_ha)
        if cells is not None:
            baseline_classes = _read_classes(datasets[baseline]["pathway_class"], cells)
            scenario_rows = {
                scenario: _scenario_row(cells, layers, baseline_classes, off_grid_ha,
                                        members.get(scenario, math.nan))
                for scenario, layers in datasets.items()
            }
        else:
            scenario_rows = {scenario: _empty_row(off_grid_ha) for scenario in datasets}
        baseline_share_c4 = scenario_rows[baseline]["share_c4"]
        for scenario, stats in scenario_rows.items():
            mapped = stats.pop("mapped_m2")
            valid_share = min(1.0, mapped / district_area) if district_area > 0 else 0.0
            rows.append(
                {
                    "district": district,
                    "scenario": scenario,
                    "district_area_ha": district_area / _SQUARE_METRES_PER_HECTARE,
                    "coverage_share": coverage_share,
                    "valid_share": valid_share,
                    **stats,
                    "share_c4_change": stats["share_c4"] - baseline_share_c4,
                    "flag": _flags(coverage_share, valid_share, stats["share_noseason"], repaired, empty),
                }
            )
    return rows


def ensemble_member_count(path: Path) -> float:
    """Number of members named in the ``ensemble_members`` tag of a scenario's GeoTIFF (NaN if none)."""
    with _open_raster(path) as dataset:
        listed = dataset.tags().get("ensemble_members", "")
    names = [name for name in (part.strip() for part in listed.split(",")) if name]
    return float(len(names)) if names else math.nan


def zonal_statistics(
    zones_path: str | os.PathLike,
    name_field: str,
    scenario_folders: Mapping[str, str | os.PathLike],
    baseline: str,
) -> pd.DataFrame:
    """Statistics of every scenario's output rasters for every district.

    zones_path: district polygons (GeoPackage, GeoJSON, Shapefile), any CRS (reprojected to the grid's).
    name_field: the field holding the district names (unique, non-empty).
    scenario_folders: scenario name -> its output folder (``<output>/<scenario>/``), baseline included.
    baseline: name of the baseline scenario (a key of ``scenario_folders``).

    Returns one row per district and scenario (districts in file order, scenarios in mapping order) with
    the columns of :data:`COLUMNS`. A district without overlap with the grid gets coverage_share 0, zero
    areas, NaN means and a ``flag`` saying so. The transition columns (25, baseline class by scenario class
    over C3, contested, C4, no growing season and no results) sum to the district's area. Raises
    InputDataError for unreadable or inconsistent inputs.
    """
    if baseline not in scenario_folders:
        raise InputDataError(
            f"baseline scenario {baseline!r} has no output folder; folders were given for: "
            f"{', '.join(scenario_folders) or '(none)'}"
        )
    layer_paths = {
        name: _scenario_layer_paths(Path(folder), name, name == baseline) for name, folder in scenario_folders.items()
    }
    grid = output_grid(layer_paths[baseline]["pathway_class"])
    zones = read_zones(zones_path, name_field)
    on_grid = zones_on_grid(zones, grid.crs)
    members = {name: ensemble_member_count(paths["pathway_class"]) for name, paths in layer_paths.items()}
    with contextlib.ExitStack() as stack:
        datasets = {
            scenario: {layer: _open_on_grid(path, grid, stack) for layer, path in paths.items()}
            for scenario, paths in layer_paths.items()
        }
        rows = _district_rows(on_grid, grid, datasets, baseline, members)
    return pd.DataFrame(rows, columns=list(COLUMNS))


def _weighted_quantiles(values: np.ndarray, weights: np.ndarray, quantiles) -> list[float]:
    """Quantiles of ``values`` with ``weights`` (the inverse of the weighted step CDF; NaN values dropped)."""
    valid = np.isfinite(values) & (weights > 0)
    if not valid.any():
        return [math.nan] * len(quantiles)
    order = np.argsort(values[valid], kind="stable")
    v, w = values[valid][order], weights[valid][order]
    cumulative = np.cumsum(w) / w.sum()
    return [float(v[min(np.searchsorted(cumulative, q - 1e-12), len(v) - 1)]) for q in quantiles]


def district_monthly_means(zones_path, name_field: str, grid: TargetGrid, monthly) -> pd.DataFrame:
    """Area-weighted mean of a monthly field per district (index: district, columns: months 1..12).

    monthly: (12, y, x) values on ``grid`` (numpy, or a lazy dask/xarray array). A lazy field is computed
    once, one stripe of row chunks at a time (bounded memory), and every district takes its cells from the
    stripes it spans: computing each district's window on its own recomputed the lazy field (its
    resampling) window by window, ten times the cost of one pass at 2000 x 2000 cells and 100 districts.
    Cells whose value is not finite are left out of a month's mean. Districts off the grid get NaN.
    """
    zones = zones_on_grid(read_zones(zones_path, name_field), grid.crs)
    template = _grid_template(grid)
    grid_box = shapely.box(*grid.bounds)
    cells_of = {}
    for district, geometry in zip(zones["district"], zones.geometry):
        cells_of[district] = None
        if geometry is not None and not geometry.is_empty:
            geometry = shapely.make_valid(geometry) if not geometry.is_valid else geometry
            if geometry.intersects(grid_box):
                cells = _district_cells(geometry, grid, template, zones.crs)
                if cells.weights_m2.sum() > 0:
                    cells_of[district] = cells
    months = int(monthly.shape[0])
    weighted = {d: np.zeros(months) for d, c in cells_of.items() if c is not None}
    weights = {d: np.zeros(months) for d in weighted}
    if weighted:
        for row0, stripe in _row_stripes(monthly):
            row1 = row0 + stripe.shape[1]
            for district in weighted:
                cells = cells_of[district]
                inside = (cells.rows >= row0) & (cells.rows < row1)
                if not inside.any():
                    continue
                values = stripe[:, cells.rows[inside] - row0, cells.cols[inside]].astype("float64")
                valid = np.isfinite(values) & (cells.weights_m2[inside] > 0)
                cell_weights = np.where(valid, cells.weights_m2[inside], 0.0)
                weighted[district] += (np.where(valid, values, 0.0) * cell_weights).sum(axis=1)
                weights[district] += cell_weights.sum(axis=1)
    rows = {}
    for district in cells_of:
        if district in weighted:
            with np.errstate(invalid="ignore", divide="ignore"):
                rows[district] = list(np.where(weights[district] > 0, weighted[district] / weights[district], np.nan))
        else:
            rows[district] = [math.nan] * months
    return pd.DataFrame.from_dict(rows, orient="index", columns=range(1, months + 1))


def _row_stripes(monthly):
    """(first row, numpy (months, rows, x)) of ``monthly``: a lazy field one stripe of row chunks at a time
    (12 months x 512 rows x 8000 columns of float32 is 197 MB), anything else at once."""
    import dask.array as da

    data = monthly.data if hasattr(monthly, "dims") else monthly  # an xarray DataArray: its array
    if not isinstance(data, da.Array):
        yield 0, np.asarray(data)
        return
    row0 = 0
    for height in data.chunks[1]:
        yield row0, np.asarray(data[:, row0:row0 + height, :].compute())
        row0 += height


def warmest_months(monthly_means: pd.Series, count: int = 3) -> list[int]:
    """The ``count`` warmest months (1-12) of a district's monthly means, warmest first (ties: earlier)."""
    finite = monthly_means.dropna()
    return [int(m) for m in finite.sort_values(ascending=False, kind="stable").index[:count]]


def district_distribution(zones_path, name_field: str, raster_path, months_of=None,
                          quantiles=(0.05, 0.5, 0.95)) -> pd.DataFrame:
    """Area-weighted quantiles of a layer's cells in each district (index: district; columns q05, q50, q95).

    A raster of 12 bands is a monthly layer: each cell's value is the mean of the bands of the district's
    months ``months_of[district]`` (1-12). A single band is used as it is.
    """
    grid = output_grid(Path(raster_path))
    zones = zones_on_grid(read_zones(zones_path, name_field), grid.crs)
    template = _grid_template(grid)
    grid_box = shapely.box(*grid.bounds)
    columns = [f"q{round(100 * q):02d}" for q in quantiles]
    rows = {}
    with _open_raster(Path(raster_path)) as dataset:
        monthly = dataset.count == 12
        for district, geometry in zip(zones["district"], zones.geometry):
            rows[district] = [math.nan] * len(quantiles)
            if geometry is None or geometry.is_empty or not geometry.intersects(grid_box):
                continue
            geometry = shapely.make_valid(geometry) if not geometry.is_valid else geometry
            cells = _district_cells(geometry, grid, template, zones.crs)
            if cells.weights_m2.sum() <= 0:
                continue
            window = cells.window
            bands = [1]
            if monthly:
                bands = list((months_of or {}).get(district) or [])
                if not bands:
                    continue
            block = dataset.read(bands, window=window, masked=True).astype("float64").filled(np.nan)
            picked = block[:, cells.rows - int(window.row_off), cells.cols - int(window.col_off)]
            rows[district] = _weighted_quantiles(picked.mean(axis=0), cells.weights_m2, quantiles)
    return pd.DataFrame.from_dict(rows, orient="index", columns=columns)


def _existing_folder(path: str | os.PathLike) -> Path:
    path = Path(path)
    if not path.parent.is_dir():
        raise OutputError(f"{path}: folder {path.parent} does not exist; expected an existing output folder")
    return path


def write_table_csv(table: pd.DataFrame, path: str | os.PathLike) -> Path:
    """Write the statistics table as CSV (UTF-8, no index) atomically: temporary name, then os.replace."""
    return write_csv(table, _existing_folder(path))


def write_table_geopackage(
    table: pd.DataFrame,
    zones_path: str | os.PathLike,
    name_field: str,
    path: str | os.PathLike,
    scenarios: Iterable[str] | None = None,
) -> Path:
    """Write the districts with their statistics to a GeoPackage, one layer per scenario, atomically.

    Each layer is named after its scenario and holds every district once, in the CRS of the zones file,
    with the table's columns as attributes. The file is built under a temporary name and os.replace'd.
    """
    zones = read_zones(zones_path, name_field)

    def write(temporary: Path) -> None:
        for scenario in scenarios if scenarios is not None else table["scenario"].unique():
            attributes = table[table["scenario"] == scenario]
            layer = zones.merge(attributes, on="district", how="left")
            layer.to_file(temporary, layer=str(scenario), driver="GPKG", engine="pyogrio")

    return atomic_write(_existing_folder(path), write, what="the district GeoPackage")
