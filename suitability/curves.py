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
from .outputs import write_csv
from .physiology import crossover_temperature, leaf_assimilation

LEAF_TEMPERATURES_C = np.arange(0.0, 50.5, 0.5)


def leaf_curves(co2_ppm: Iterable[float], *, absorbed_par: float = 1500.0, vpd_kpa: float = 1.0,
                c3_params=None, c4_params=None) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Net leaf assimilation of both pathways over 0-50 °C at each CO2, and the crossover temperatures.

    co2_ppm: ambient CO2 mole fractions [µmol mol-1]. absorbed_par: [µmol m-2 s-1]. vpd_kpa: [kPa].
    Returns (curves, crossovers): curves has columns co2_ppm, leaf_temperature_c, c3_net, c4_net
    [µmol m-2 s-1]; crossovers has co2_ppm and crossover_temperature_c [°C], the leaf quantum-yield
    crossover (``suitability.physiology.crossover``) at each pathway's Ci/Ca for ``vpd_kpa``.
    c3_params, c4_params: anything ``resolve_params`` accepts (None = the default set); they are used for
    the curves and for the crossover temperatures alike.
    """
    crossover_params = {"C3": c3_params, "C4": c4_params}
    rows, crossings = [], []
    for co2 in co2_ppm:
        c3 = leaf_assimilation("C3", LEAF_TEMPERATURES_C, absorbed_par, co2, vpd_kpa=vpd_kpa, params=c3_params)
        c4 = leaf_assimilation("C4", LEAF_TEMPERATURES_C, absorbed_par, co2, vpd_kpa=vpd_kpa, params=c4_params)
        rows.append(pd.DataFrame({
            "co2_ppm": co2, "leaf_temperature_c": LEAF_TEMPERATURES_C,
            "c3_net": np.asarray(c3.net), "c4_net": np.asarray(c4.net),
        }))
        # The leaf quantum-yield crossover at the curves' own VPD (each pathway's canopy Ci/Ca).
        crossover = crossover_temperature(co2, params=crossover_params, vpd_kpa=vpd_kpa)
        crossings.append({"co2_ppm": co2, "crossover_temperature_c": float(crossover)})
    return pd.concat(rows, ignore_index=True), pd.DataFrame(crossings)


def write_curves(co2_ppm: Iterable[float], folder: Path, *, absorbed_par: float = 1500.0, c3_params=None,
                 c4_params=None) -> dict[str, Path]:
    """Write ``leaf_curves.csv``, ``crossover.csv`` and ``leaf_curves.png`` into ``folder``.

    c3_params, c4_params: as in :func:`leaf_curves` (None = the default sets).
    """
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    curves, crossings = leaf_curves(list(co2_ppm), absorbed_par=absorbed_par, c3_params=c3_params,
                                   c4_params=c4_params)
    paths = {"curves": folder / "leaf_curves.csv", "crossover": folder / "crossover.csv", "figure": folder / "leaf_curves.png"}
    write_csv(curves, paths["curves"])
    write_csv(crossings, paths["crossover"])
    figure, axis = plt.subplots(figsize=(7, 4.5), dpi=120)
    colours = plt.get_cmap("viridis")(np.linspace(0.1, 0.85, len(crossings)))
    for colour, (co2, group) in zip(colours, curves.groupby("co2_ppm", sort=False)):
        axis.plot(group.leaf_temperature_c, group.c3_net, color=colour, linestyle="--", label=f"C3, {co2:g} ppm")
        axis.plot(group.leaf_temperature_c, group.c4_net, color=colour, linestyle="-", label=f"C4, {co2:g} ppm")
    axis.set_xlabel("leaf temperature (°C)")
    axis.set_ylabel("net assimilation (µmol m⁻² s⁻¹)")
    axis.set_title(f"Leaf net assimilation at absorbed PAR {absorbed_par:g} µmol m⁻² s⁻¹")
    axis.grid(alpha=0.3)
    axis.legend(fontsize=7, ncol=2)
    figure.tight_layout()
    atomic_write(paths["figure"], lambda p: figure.savefig(p, format="png"), what="the figure")
    plt.close(figure)
    return paths
