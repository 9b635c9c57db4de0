"""A generator of INVENTED regions with many districts, for the brief tests.

Everything written here is made up: the region ("Marrowdene Reach"), its district names (syllables
joined at random), its climate and its output layers. Nothing describes a real place. The grid sits in
the open ocean (UTM zone 40S) only so that coordinates and day lengths are realistic.

The layers are built so that maps, tables and the crossover chart agree by construction: each cell's
class comes from its warm-season temperature against its crossover temperature, as the model's classes
relate to the per-cell crossover layer (issue 10).
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import geopandas as gpd
import numpy as np
import rasterio
import shapely
from rasterio.transform import from_origin

from suitability.variables import CLASS_C3, CLASS_C4, CLASS_CONTESTED, CLASS_NO_SEASON, CLASS_NODATA

from . import write_raster

REGION = "Marrowdene Reach"
CRS = "EPSG:32740"
CELL_M = 1000.0
ORIGIN = (300000.0, 7500000.0)
SYLLABLES = ("mar", "ven", "tol", "ess", "quir", "dal", "orn", "bel", "sha", "ri", "kel", "um", "tra", "vo",
             "lin", "gar", "pel", "ost", "ne", "ad")
MARGIN = 0.05


@dataclass
class InventedRegion:
    """Paths and arrays of one generated region (all invented)."""

    root: Path
    zones_path: Path
    name_field: str
    scenario_folders: dict[str, Path]
    baseline: str
    transform: object
    shape: tuple[int, int]
    monthly_temperature: np.ndarray  # (12, y, x) [deg C], the baseline climate's monthly means
    districts: list[str]


def district_names(count: int, rng: np.random.Generator) -> list[str]:
    names: list[str] = []
    while len(names) < count:
        parts = rng.choice(SYLLABLES, size=rng.integers(2, 4))
        name = "".join(parts).capitalize()
        if name not in names:
            names.append(name)
    return names


def _districts(count: int, width: int, height: int, rng) -> gpd.GeoDataFrame:
    x0, y1 = ORIGIN
    x1, y0 = x0 + width * CELL_M, y1 - height * CELL_M
    # The region: a rounded blob that sticks out of the grid on the east by a few kilometres, so some
    # districts are partly off the grid.
    angles = np.linspace(0, 2 * np.pi, 90, endpoint=False)
    radius = 1 + 0.08 * np.sin(3 * angles) + 0.05 * np.cos(5 * angles)
    cx, cy = (x0 + x1) / 2 + 0.04 * (x1 - x0), (y0 + y1) / 2
    region = shapely.Polygon(np.column_stack([cx + 0.5 * (x1 - x0) * radius * np.cos(angles),
                                              cy + 0.47 * (y1 - y0) * radius * np.sin(angles)]))
    seeds = []
    while len(seeds) < count:
        p = shapely.Point(rng.uniform(x0, x1 + 0.1 * (x1 - x0)), rng.uniform(y0, y1))
        if region.contains(p):
            seeds.append(p)
    cells = shapely.voronoi_polygons(shapely.MultiPoint(seeds), extend_to=region)
    polygons = [cell.intersection(region) for cell in cells.geoms]
    order = [min(range(count), key=lambda i: polygons[j].distance(seeds[i])) for j in range(count)]
    polygons = [polygons[order.index(i)] for i in range(count)]
    names = district_names(count, rng)
    return gpd.GeoDataFrame({"district_name": names}, geometry=polygons, crs=CRS)


def make_region(root: Path, count: int = 100, *, width: int = 240, height: int = 200, seed: int = 14,
                ensemble_members: int = 0, draws: bool = False) -> InventedRegion:
    """Write an invented region of ``count`` districts: districts file and the output folders of a run
    with a baseline and three scenarios (CO2 only, warming only, both). ``ensemble_members`` > 0 adds the
    ensemble layers to the warming scenario, ``draws`` the parameter-draw layers to the combined one."""
    rng = np.random.default_rng(seed)
    root = Path(root)
    root.mkdir(parents=True, exist_ok=True)
    transform = from_origin(*ORIGIN, CELL_M, CELL_M)
    zones = _districts(count, width, height, rng)
    zones_path = root / "districts.gpkg"
    zones.to_file(zones_path, engine="pyogrio")

    rows, cols = np.mgrid[0:height, 0:width]
    # Warm-season temperature rises from 17 degC in the west to 27 degC in the east, minus a cold upland
    # in the north-west (no growing season at its top); a lake in the south is nodata.
    east = cols / (width - 1)
    upland = np.exp(-(((cols - 0.18 * width) / (0.12 * width)) ** 2 + ((rows - 0.22 * height) / (0.14 * height)) ** 2))
    warm = 17 + 10 * east - 16 * upland + rng.normal(0, 0.3, (height, width))
    month = np.arange(1, 13)[:, None, None]
    monthly = warm[None] - 6 + 6 * np.cos(2 * np.pi * (month - 1) / 12)  # warmest in January (south)
    lake = ((cols - 0.55 * width) / (0.07 * width)) ** 2 + ((rows - 0.8 * height) / (0.06 * height)) ** 2 < 1
    inside = np.zeros((height, width), bool)
    centres = shapely.points(ORIGIN[0] + (cols + 0.5) * CELL_M, ORIGIN[1] - (rows + 0.5) * CELL_M)
    inside[:] = shapely.contains(shapely.union_all(zones.geometry.to_numpy()), centres)
    valid = inside & ~lake
    no_season = valid & (warm < 9)

    scenarios = {  # name: (CO2 [ppm], warming [degC], rise of the crossover with CO2 [degC])
        "baseline": (420, 0.0, 0.0),
        "co2_only": (700, 0.0, 3.0),
        "warming_only": (420, 2.5, 0.0),
        "co2_and_warming": (700, 2.5, 3.0),
    }
    base_crossover = 22.0 + 0.4 * np.sin(rows / 17.0)
    folders = {}
    base_classes = base_advantage = None
    for name, (_co2, warming, rise) in scenarios.items():
        crossover = base_crossover + rise
        advantage = np.clip(0.05 * (warm + warming - crossover), -0.9, 0.9)
        classes = np.where(advantage > MARGIN, CLASS_C4, np.where(advantage < -MARGIN, CLASS_C3, CLASS_CONTESTED))
        classes = np.where(no_season, CLASS_NO_SEASON, classes)
        classes = np.where(valid, classes, CLASS_NODATA).astype("uint8")
        advantage = np.where(valid, advantage, np.nan)
        months = np.where(valid, ((monthly + warming) > crossover[None]).sum(axis=0), np.nan)
        folder = root / "out" / name
        folder.mkdir(parents=True, exist_ok=True)
        layers = {
            "pathway_class": classes,
            "pathway_advantage": advantage,
            "c3_assimilation": np.where(valid, 900 - 20 * (warm - 20), np.nan),
            "c4_assimilation": np.where(valid, 900 + 25 * (warm - 20), np.nan),
            "c4_favoured_months": months,
            "crossover_temperature": np.where(valid, crossover, np.nan),
        }
        if base_classes is not None:
            both = (classes != CLASS_NODATA) & (base_classes != CLASS_NODATA)
            layers["class_transition"] = np.where(both, base_classes * 10 + classes, CLASS_NODATA)
            layers["advantage_change"] = np.where(both, advantage - base_advantage, np.nan)
        for layer, values in layers.items():
            write_raster(folder / f"{layer}.tif", values, CRS, transform)
        if name == "warming_only" and ensemble_members:
            _ensemble_layers(folder, advantage, base_advantage, valid, ensemble_members, rng, transform)
        if name == "co2_and_warming" and draws:
            _draw_layers(folder, advantage, base_advantage, valid, transform)
        if name == "baseline":
            base_classes, base_advantage = classes, advantage
        folders[name] = folder
    return InventedRegion(root, zones_path, "district_name", folders, "baseline", transform, (height, width),
                          monthly, list(zones["district_name"]))


def _ensemble_layers(folder, advantage, base_advantage, valid, members, rng, transform) -> None:
    spread = rng.normal(0, 0.04, (members,) + advantage.shape)
    stack = advantage[None] + spread
    share = np.where(valid, (stack > MARGIN).mean(axis=0), np.nan)
    change = stack - base_advantage[None]
    rising, falling = (change > 0).mean(axis=0), (change < 0).mean(axis=0)
    agreement = np.where(rising >= 0.8, 3, np.where(falling >= 0.8, 1, 2))
    write_raster(folder / "c4_favoured_share.tif", share, CRS, transform)
    write_raster(folder / "change_agreement.tif", np.where(valid, agreement, CLASS_NODATA).astype("uint8"), CRS,
                 transform)
    names = ", ".join(f"model_{i + 1}" for i in range(members))
    for path in folder.glob("*.tif"):
        with rasterio.open(path, "r+") as dataset:
            dataset.update_tags(ensemble_members=names)


def _draw_layers(folder, advantage, base_advantage, valid, transform) -> None:
    # A logistic probability of the advantage (spread 0.05 of the index): invented, for the statements only.
    probability = np.where(valid, 1 / (1 + np.exp(-(advantage - MARGIN) / 0.03)), np.nan)
    towards = np.where(valid, 1 / (1 + np.exp(-(advantage - base_advantage) / 0.02)), np.nan)
    write_raster(folder / "c4_advantage_probability.tif", probability, CRS, transform)
    write_raster(folder / "towards_c4_probability.tif", towards, CRS, transform)
    write_raster(folder / "class_change_probability.tif", np.where(valid, np.abs(towards - 0.5) * 2, np.nan), CRS,
                 transform)
