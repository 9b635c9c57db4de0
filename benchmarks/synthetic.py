"""A seeded synthetic region of any size, for benchmarks and scale tests. INVENTED DATA.

The "Kessarine Basin synthetic grid" is a made-up landscape, not a real place: a 400 km square in
EPSG:32740, placed in open ocean at about 24-28° S 56-60° E (like the demo region) only so that day
length and sun angles are realistic. Its climate is a few smooth analytic fields (a seasonal cycle, an
elevation gradient, seeded plane waves) on a coarse 2 km input grid, written as 12-band GeoTIFFs; the
target grid has ``size`` x ``size`` cells over the same square, so every size samples the same invented
climate and the cost per cell can be compared across sizes. A small invented lake is nodata.

Two uses:

* :func:`write_region` writes the inputs and a ready-to-run config (YAML) into a folder;
* :func:`write_members` adds an invented ensemble scenario (members made by warming the region's climate);
* :func:`cell_inputs` returns in-memory arrays of ``n`` cells x 12 months for kernel benchmarks.

Usage: ``python benchmarks/synthetic.py --size 2000 --out /tmp/region`` (prints the config path).
Deliberately does not import the ``suitability`` package: the inputs stay independent of the code they
exercise.
"""

from __future__ import annotations

import argparse
from pathlib import Path

import numpy as np
import rasterio
import yaml
from rasterio.transform import from_origin

SEED = 5281
NOTE = ("Kessarine Basin synthetic grid: INVENTED data for benchmarks, made by benchmarks/synthetic.py; "
        "placed in open ocean near 26 S 58 E only for realistic sun angles. Not a real place.")
CRS = "EPSG:32740"
XMIN, YMIN, SIDE_M = 300_000.0, 7_000_000.0, 400_000.0
INPUT_CELL_M = 2_000.0
NODATA = -9999.0
MONTHS = np.arange(1, 13)


def _waves(x, y, seed, n_modes=12, wavelengths=(30e3, 200e3)):
    """Smooth seeded field of roughly unit amplitude: a sum of plane waves."""
    rng = np.random.RandomState(seed)
    lam = rng.uniform(*wavelengths, n_modes)
    theta, phase = rng.uniform(0, 2 * np.pi, (2, n_modes))
    amp = lam / lam.sum()
    return sum(a * np.cos(2 * np.pi / w * (np.cos(t) * x + np.sin(t) * y) + p)
               for a, w, t, p in zip(amp, lam, theta, phase))


def _fields(x, y, seed):
    """Invented elevation [m] and monthly tmin, tmax [°C], shortwave [MJ m-2 d-1], water [0-1]."""
    east, north = (x - XMIN) / SIDE_M, (y - YMIN) / SIDE_M  # 0..1 across the square
    elevation = np.clip(150.0 + 1600.0 * east * (1.0 - north) + 250.0 * _waves(x, y, seed), 0.0, 3500.0)
    season = np.cos(2 * np.pi * (MONTHS - 1.0) / 12.0)[:, None, None]  # southern summer in January
    tmean = 19.0 + 5.0 * season - 0.0065 * elevation + 1.5 * _waves(x, y, seed + 1)
    diurnal = 9.0 + 3.0 * north + 1.0 * _waves(x, y, seed + 2)
    tmin = tmean - 0.5 * diurnal
    tmax = tmean + 0.5 * diurnal
    cloud = 0.5 + 0.25 * _waves(x, y, seed + 3) + 0.15 * season
    shortwave = (19.0 + 7.0 * season) * (1.0 - 0.45 * np.clip(cloud, 0.0, 1.0))
    water = np.clip(0.55 + 0.3 * season + 0.25 * _waves(x, y, seed + 4) - 0.2 * east, 0.05, 1.0)
    lake = ((x - (XMIN + 0.55 * SIDE_M)) / 9e3) ** 2 + ((y - (YMIN + 0.4 * SIDE_M)) / 5e3) ** 2 < 1.0
    return elevation, tmin, tmax, shortwave, water, lake


def _write(path: Path, bands: np.ndarray, transform, description: str) -> None:
    profile = dict(driver="GTiff", width=bands.shape[-1], height=bands.shape[-2], count=bands.shape[0],
                   dtype="float32", crs=CRS, transform=transform, nodata=NODATA, tiled=True, blockxsize=256,
                   blockysize=256, compress="deflate", predictor=3)
    with rasterio.open(path, "w", **profile) as dst:
        dst.write(bands.astype(np.float32))
        dst.update_tags(note=NOTE, description=description)


def write_region(folder: Path | str, size: int, *, rows: int | None = None, seed: int = SEED, scenarios: int = 3,
                 chunk_size: int = 512, scheduler: str = "threads", workers: int | None = None, engine: str = "compiled",
                 months: list[int] | None = None, layers="all", datacube: bool = False,
                 output_folder: Path | str | None = None, inputs_on_target_grid: bool = False) -> Path:
    """Write the invented inputs and a config for a ``size`` x ``size`` target grid; return the config path.

    rows: fewer rows than ``size`` keep the southern strip of the square (same cell size).
    scenarios: 1-3 of (baseline 420 ppm, co2_700, warming_3c). months: season months (default all 12).
    The outputs go to ``output_folder`` (default ``folder/out``). inputs_on_target_grid: write the inputs
    on the target grid itself (no resampling in the run) instead of the coarse 2 km input grid.
    """
    folder = Path(folder)
    data = folder / "data"
    data.mkdir(parents=True, exist_ok=True)
    rows = rows or size
    if inputs_on_target_grid:
        cell = SIDE_M / size
        x0, y0, n_x, n_y = XMIN, YMIN + cell * rows, size, rows
    else:  # one extra input cell each side, so bilinear sampling has neighbours
        cell = INPUT_CELL_M
        n_x = n_y = int(SIDE_M / cell) + 2
        x0, y0 = XMIN - cell, YMIN + SIDE_M + cell
    transform = from_origin(x0, y0, cell, cell)
    xx, yy = np.meshgrid(x0 + cell * (np.arange(n_x) + 0.5), y0 - cell * (np.arange(n_y) + 0.5))
    elevation, tmin, tmax, shortwave, water, lake = _fields(xx, yy, seed)
    for monthly in (tmin, tmax, water):
        monthly[:, lake] = NODATA
    _write(data / "elevation.tif", elevation[None], transform, "elevation [m], invented")
    _write(data / "tmin.tif", tmin, transform, "monthly mean daily minimum temperature [degC], invented")
    _write(data / "tmax.tif", tmax, transform, "monthly mean daily maximum temperature [degC], invented")
    _write(data / "shortwave.tif", shortwave, transform, "monthly mean daily shortwave [MJ m-2 d-1], invented")
    _write(data / "water_availability.tif", water, transform, "monthly water availability [0-1], invented")

    all_scenarios = [
        {"name": "baseline", "co2_ppm": 420},
        {"name": "co2_700", "description": "CO2 raised to 700 ppm", "co2_ppm": 700},
        {"name": "warming_3c", "description": "present CO2, 3 degC warmer", "co2_ppm": 420,
         "temperature_offset_c": 3.0},
    ]
    compute = {"chunk_size": chunk_size, "scheduler": scheduler, "engine": engine}
    if workers is not None:
        compute["workers"] = workers
    config = {
        "region": {"name": "Kessarine Basin synthetic grid (invented)",
                   "grid": {"crs": CRS, "resolution": SIDE_M / size,
                            "bounds": [XMIN, YMIN, XMIN + SIDE_M, YMIN + SIDE_M * rows / size]}},
        "climate": {
            "tmin": {"path": "data/tmin.tif", "units": "degC"},
            "tmax": {"path": "data/tmax.tif", "units": "degC"},
            "shortwave": {"path": "data/shortwave.tif", "units": "MJ m-2 d-1"},
            "water_availability": {"path": "data/water_availability.tif", "units": "fraction"},
            "elevation": {"path": "data/elevation.tif", "units": "m"},
        },
        "season": {"months": months or list(range(1, 13))},
        "scenarios": all_scenarios[:scenarios],
        "baseline": "baseline",
        "output": {"folder": str(output_folder or folder / "out"), "layers": layers, "datacube": datacube,
                   "overwrite": True},
        "compute": compute,
    }
    path = folder / f"synthetic_{size}x{rows}.yaml"
    header = f"# {NOTE}\n"
    path.write_text(header + yaml.safe_dump(config, sort_keys=False))
    return path


def write_members(config: Path | str, members: list[str], *, scenario: str = "warmer_ensemble", co2_ppm: float = 560.0,
                  seed: int = SEED) -> Path:
    """Add an INVENTED ensemble scenario to the config written by :func:`write_region`; return the config path.

    Each member's Tmin and Tmax are the region's own (``data/tmin.tif``, ``data/tmax.tif``, on whatever grid
    they were written) warmed by ``1 + i`` degC for the i-th member plus a seeded smooth pattern of about
    +-0.7 degC of the member's own, written to ``data/tmin_<member>.tif`` / ``data/tmax_<member>.tif``; the
    scenario reads them through a ``{member}`` pattern. Made-up warming, not any model's projection.
    """
    config = Path(config)
    data = config.parent / "data"
    settings = yaml.safe_load(config.read_text())
    for i, member in enumerate(members):
        for layer in ("tmin", "tmax"):
            with rasterio.open(data / f"{layer}.tif") as src:
                bands, transform = src.read(), src.transform
            xx, yy = np.meshgrid(transform.c + transform.a * (np.arange(bands.shape[2]) + 0.5),
                                 transform.f + transform.e * (np.arange(bands.shape[1]) + 0.5))
            warming = 1.0 + i + 0.7 * _waves(xx, yy, seed + 100 + i)
            warmed = np.where(bands == NODATA, NODATA, bands + warming[None])
            _write(data / f"{layer}_{member}.tif", warmed, transform,
                   f"{layer} of invented ensemble member {member} [degC]: the region's warmed by a made-up amount")
    settings["scenarios"].append({
        "name": scenario, "description": "invented ensemble: the region's climate warmed by made-up amounts",
        "co2_ppm": co2_ppm, "members": list(members),
        "climate": {layer: {"path": f"data/{layer}_{{member}}.tif", "units": "degC"} for layer in ("tmin", "tmax")},
    })
    config.write_text(f"# {NOTE}\n" + yaml.safe_dump(settings, sort_keys=False))
    return config


def cell_inputs(n_cells: int, seed: int = SEED) -> dict[str, np.ndarray]:
    """In-memory inputs for ``n_cells`` cells scattered over the synthetic square (lake cells included).

    Returns float32 arrays: tmin, tmax [°C], shortwave [MJ m-2 d-1], water_availability [0-1], each
    (n_cells, 12); latitude [degrees north] and elevation [m], each (n_cells,). Latitude follows from the
    northing by the spherical approximation 1° = 111.32 km about 26.5° S, which is plenty for a benchmark.
    """
    rng = np.random.default_rng(seed)
    x = XMIN + SIDE_M * rng.random(n_cells)
    y = YMIN + SIDE_M * rng.random(n_cells)
    elevation, tmin, tmax, shortwave, water, lake = _fields(x[None, :], y[None, :], seed)
    monthly = {"tmin": tmin, "tmax": tmax, "shortwave": shortwave, "water_availability": water}
    result = {name: np.ascontiguousarray(values[:, 0, :].T, np.float32) for name, values in monthly.items()}
    for name in ("tmin", "tmax", "water_availability"):
        result[name][lake[0]] = np.nan
    result["elevation"] = np.asarray(elevation[0], np.float32)
    result["latitude"] = np.asarray(-26.5 + (y - (YMIN + 0.5 * SIDE_M)) / 111_320.0, np.float32)
    return result


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--size", type=int, required=True, help="cells per side of the target grid")
    parser.add_argument("--out", type=Path, required=True, help="folder for the inputs and the config")
    parser.add_argument("--scenarios", type=int, default=3)
    args = parser.parse_args()
    print(write_region(args.out, args.size, scenarios=args.scenarios))


if __name__ == "__main__":
    main()
