"""Helpers for the report tests: synthetic output folders on small grids.

All data written here are SYNTHETIC, made up for the tests; the district names are invented and describe
no real place.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import rasterio

from suitability.variables import CLASS_NODATA

CLASS_LAYERS = ("pathway_class", "class_transition", "change_agreement")


def write_raster(path: Path, values: np.ndarray, crs: str, transform) -> Path:
    """Write one single-band GeoTIFF the way the output contract describes (uint8 classes, float32 else)."""
    is_class = Path(path).stem in CLASS_LAYERS
    dtype = "uint8" if is_class else "float32"
    nodata = CLASS_NODATA if is_class else np.nan
    values = np.asarray(values)
    with rasterio.open(
        path, "w", driver="GTiff", width=values.shape[1], height=values.shape[0], count=1, dtype=dtype,
        crs=crs, transform=transform, nodata=nodata,
    ) as dataset:
        dataset.write(values.astype(dtype), 1)
    return Path(path)


def write_scenario_folder(
    folder: Path,
    crs: str,
    transform,
    classes: np.ndarray,
    advantage: np.ndarray,
    *,
    baseline_classes: np.ndarray | None = None,
    baseline_advantage: np.ndarray | None = None,
    c3: np.ndarray | None = None,
    c4: np.ndarray | None = None,
    months: np.ndarray | None = None,
) -> Path:
    """Write a synthetic scenario output folder; change layers when a baseline is given."""
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    shape = classes.shape
    c3 = np.full(shape, 800.0) if c3 is None else c3
    c4 = np.full(shape, 900.0) if c4 is None else c4
    months = np.full(shape, 4.0) if months is None else months
    valid = classes != CLASS_NODATA
    layers = {
        "pathway_class": classes,
        "pathway_advantage": np.where(valid, advantage, np.nan),
        "c3_assimilation": np.where(valid, c3, np.nan),
        "c4_assimilation": np.where(valid, c4, np.nan),
        "c4_favoured_months": np.where(valid, months, np.nan),
        "photorespiration_share": np.where(valid, 0.2, np.nan),
        "crossover_temperature": np.where(valid, 24.0, np.nan),
    }
    if baseline_classes is not None:
        both = valid & (baseline_classes != CLASS_NODATA)
        layers["class_transition"] = np.where(both, baseline_classes * 10 + classes, CLASS_NODATA)
        layers["advantage_change"] = np.where(both, advantage - baseline_advantage, np.nan)
    for name, values in layers.items():
        write_raster(folder / f"{name}.tif", values, crs, transform)
    return folder
