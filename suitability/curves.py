"""Leaf response curves for quick checks: C3 and C4 net assimilation versus leaf temperature.

`suitability curves` writes the table as CSV and a figure as PNG; researchers use it to see what a
parameter set does before running a region.
"""

from __future__ import annotations

from pathlib import Path
from typing import Iterable

import numpy as np
import pandas as pd

from .atomic import atomic_write
from .outputs import dictionary_path, write_csv, write_data_dictionary
from .physiology import quantum_yield_crossover, leaf_assimilation
from .physiology.atmosphere import air_pressure_from_elevation

LEAF_TEMPERATURES_C = np.arange(0.0, 50.5, 0.5)
#: The columns of ``leaf_curves.csv`` and ``crossover.csv`` with their units (written beside each CSV).
CURVE_COLUMNS = {"co2_ppm": "ambient CO2 mole fraction [ppm]", "leaf_temperature_c": "leaf temperature [degC]",
                 "c3_net": "net leaf CO2 assimilation of the C3 leaf [umol m-2 s-1]",
                 "c4_net": "net leaf CO2 assimilation of the C4 leaf [umol m-2 s-1]"}
CROSSOVER_COLUMNS = {"co2_ppm": "ambient CO2 mole fraction [ppm]",
                     "quantum_yield_crossover_c": "leaf temperature above which the C4 light-limited quantum yield "
                                                "exceeds the C3 one [degC]"}


def leaf_curves(co2_ppm: Iterable[float], *, absorbed_par: float = 1500.0, vpd_kpa: float = 1.0,
                c3_params=None, c4_params=None, o2_percent: float = 20.95,
                elevation_m: float | None = None) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Net leaf assimilation of both pathways over 0-50 °C at each CO2, and the crossover temperatures.

    co2_ppm: ambient CO2 mole fractions [µmol mol-1]. absorbed_par: [µmol m-2 s-1]. vpd_kpa: [kPa].
    Returns (curves, crossovers): curves has columns co2_ppm, leaf_temperature_c, c3_net, c4_net
    [µmol m-2 s-1]; crossovers has co2_ppm and quantum_yield_crossover_c [°C], the leaf quantum-yield
    crossover (``suitability.physiology.crossover``) at each pathway's Ci/Ca for ``vpd_kpa``.
    c3_params, c4_params: anything ``resolve_params`` accepts (None = the default set); they are used for
    the curves and for the crossover temperatures alike. o2_percent: ambient O2 [%]. elevation_m: elevation
    [m] that sets the air pressure (FAO-56 eq. 7); None = the physiology's standard pressure (101.325 kPa).
    """
    pressure = {}
    if elevation_m is not None:
        pressure = {"pressure_kpa": float(air_pressure_from_elevation(float(elevation_m)))}
        if not np.isfinite(pressure["pressure_kpa"]):
            raise ValueError(f"elevation {elevation_m} m is outside the range of the air-pressure equation")
    crossover_params = {"C3": c3_params, "C4": c4_params}
    rows, crossings = [], []
    for co2 in co2_ppm:
        common = dict(vpd_kpa=vpd_kpa, o2_percent=o2_percent, **pressure)
        c3 = leaf_assimilation("C3", LEAF_TEMPERATURES_C, absorbed_par, co2, params=c3_params, **common)
        c4 = leaf_assimilation("C4", LEAF_TEMPERATURES_C, absorbed_par, co2, params=c4_params, **common)
        rows.append(pd.DataFrame({
            "co2_ppm": co2, "leaf_temperature_c": LEAF_TEMPERATURES_C,
            "c3_net": np.asarray(c3.net), "c4_net": np.asarray(c4.net),
        }))
        # The leaf quantum-yield crossover at the curves' own VPD (each pathway's canopy Ci/Ca).
        crossover = quantum_yield_crossover(co2, o2_percent=o2_percent, params=crossover_params, vpd_kpa=vpd_kpa,
                                          **pressure)
        crossings.append({"co2_ppm": co2, "quantum_yield_crossover_c": float(crossover)})
    return pd.concat(rows, ignore_index=True), pd.DataFrame(crossings)


def write_curves(co2_ppm: Iterable[float], folder: Path, *, absorbed_par: float = 1500.0, c3_params=None,
                 c4_params=None, o2_percent: float = 20.95, elevation_m: float | None = None) -> dict[str, Path]:
    """Write ``leaf_curves.csv``, ``crossover.csv`` and ``leaf_curves.png`` into ``folder``.

    c3_params, c4_params, o2_percent, elevation_m: as in :func:`leaf_curves` (None = the default sets).
    """
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    curves, crossings = leaf_curves(list(co2_ppm), absorbed_par=absorbed_par, c3_params=c3_params,
                                   c4_params=c4_params, o2_percent=o2_percent, elevation_m=elevation_m)
    paths = {"curves": folder / "leaf_curves.csv", "crossover": folder / "crossover.csv", "figure": folder / "leaf_curves.png"}
    write_csv(curves, paths["curves"])
    write_csv(crossings, paths["crossover"])
    write_data_dictionary(CURVE_COLUMNS, dictionary_path(paths["curves"]))
    write_data_dictionary(CROSSOVER_COLUMNS, dictionary_path(paths["crossover"]))
    figure, axis = plt.subplots(figsize=(7, 4.5), dpi=120)
    colours = plt.get_cmap("viridis")(np.linspace(0.1, 0.85, len(crossings)))
    for colour, (co2, group) in zip(colours, curves.groupby("co2_ppm", sort=False)):
        axis.plot(group.leaf_temperature_c, group.c3_net, color=colour, linestyle="--", label=f"C3, {co2:g} ppm")
        axis.plot(group.leaf_temperature_c, group.c4_net, color=colour, linestyle="-", label=f"C4, {co2:g} ppm")
    axis.set_xlabel("leaf temperature (°C)")
    axis.set_ylabel("net assimilation (µmol m⁻² s⁻¹)")
    axis.set_title(f"Leaf net assimilation at absorbed PAR {absorbed_par:g} µmol m⁻² s⁻¹, "
                   f"O₂ {o2_percent:g} %, " + ("standard pressure" if elevation_m is None else f"{elevation_m:.0f} m"))
    axis.grid(alpha=0.3)
    axis.legend(fontsize=7, ncol=2)
    figure.tight_layout()
    atomic_write(paths["figure"], lambda p: figure.savefig(p, format="png"), what="the figure")
    plt.close(figure)
    return paths


def settings_from_config(cfg) -> dict:
    """What ``curves --config`` takes from a validated run config: both parameter sets (with overrides), the
    baseline scenario's O2 and, with an elevation layer, the median elevation of a sample of it within
    the region [m] (sea level without one). Returns keyword arguments of :func:`write_curves`, plus
    ``elevation_source`` (in words)."""
    from pyproj import CRS, Transformer

    from .grid import TargetGrid
    from .inputs import open_layer
    from .inputs.checks import read_sample

    settings = {
        "c3_params": cfg.physiology.c3.as_params() or None,
        "c4_params": cfg.physiology.c4.as_params() or None,
        "o2_percent": cfg.baseline_scenario.o2_percent,
        "elevation_m": None,
        "elevation_source": "the config has no elevation layer",
    }
    spec = cfg.climate.get("elevation")
    if spec is not None:
        grid = TargetGrid.from_region(cfg.region, cfg.config_dir)
        layer = open_layer("elevation", spec, cfg.config_dir)
        to_layer = Transformer.from_crs(grid.crs, CRS.from_user_input(layer.rio.crs.to_wkt()), always_xy=True)
        xmin, ymin, xmax, ymax = to_layer.transform_bounds(*grid.bounds, densify_pts=21)
        window = layer.sel(x=slice(xmin, xmax), y=slice(ymax, ymin))
        sample = read_sample(window if window.sizes["x"] and window.sizes["y"] else layer, f"{spec.path}: layer 'elevation'")
        if np.isfinite(sample).any():
            settings["elevation_m"] = float(np.nanmedian(sample))
            settings["elevation_source"] = f"median of the elevation layer within the region ({spec.path.name})"
    return settings
