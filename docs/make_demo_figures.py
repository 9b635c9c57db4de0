"""Redraw the two demo figures of the README from a finished demo run (the region is INVENTED).

    suitability run configs/demo.yaml --overwrite
    python docs/make_demo_figures.py            # writes docs/demo_pathway_class.png, docs/demo_crossover.png

The class map is the briefs' own map figure (suitability.reports.figures.class_map_figure) of the baseline
``pathway_class.tif``. The crossover figure plots, per month, the median and the 5-95 % range over cells of
the datacube's ``monthly_crossover_temperature`` (baseline and the 700 ppm scenario) against the monthly mean
temperature (Tmin + Tmax)/2 of the inputs on the run's grid, the comparison the model makes
(suitability.model.month_mean_temperature): a month is C4-favoured where its mean is above its crossover.
"""

from __future__ import annotations

import argparse
from pathlib import Path

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
import xarray as xr  # noqa: E402

from suitability.config import load_config  # noqa: E402
from suitability.grid import TargetGrid  # noqa: E402
from suitability.inputs.climate import load_climate  # noqa: E402
from suitability.inputs.districts import read_zones  # noqa: E402
from suitability.reports import figures  # noqa: E402

REPO = Path(__file__).resolve().parents[1]
LINES = {"baseline": "#1b7837", "co2_only": "#762a83"}  # green / purple, as in the earlier figure
TEMPERATURE = "#e69f00"
NO_TIE_C = 45.0  # upper end of the crossover search (README: +inf, not C4-favoured at any mean up to 45 °C)


def _spread(values: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Per month (axis 0): 5 %, median and 95 % over the cells with a value (NaN: outside the season or no
    data). +inf (no tie up to the solver's 45 °C) counts as the highest value and is drawn at 45 °C."""
    flat = values.reshape(values.shape[0], -1)
    rows = [np.percentile(m[~np.isnan(m)], (5, 50, 95), method="inverted_cdf") for m in flat]
    return tuple(np.minimum(np.array(column), NO_TIE_C) for column in zip(*rows))


def class_map(cfg, out: Path) -> None:
    baseline = next(s for s in cfg.scenarios if s.name == cfg.baseline)
    zones = read_zones(Path(cfg.config_dir) / cfg.brief.zones, cfg.brief.name_field) if cfg.brief else None
    title = f"Invented demo region, {baseline.name} ({baseline.co2_ppm:g} ppm)"
    png = figures.class_map_png(Path(cfg.output.folder) / baseline.name / "pathway_class.tif", zones, title=title)
    figures.save_png(png, out)


def crossover(cfg, out: Path) -> None:
    grid = TargetGrid.from_region(cfg.region, cfg.config_dir)
    climate = load_climate(cfg.climate, grid, cfg.config_dir)
    mean = (0.5 * (climate["tmin"] + climate["tmax"])).values.astype(float)
    months = np.arange(1, 13)
    figure, axes = plt.subplots(figsize=(7.2, 4.4), dpi=100)
    for scenario in cfg.scenarios:
        if scenario.name not in LINES:
            continue
        with xr.open_dataset(Path(cfg.output.folder) / scenario.name / "monthly_assimilation.nc") as cube:
            values = cube["monthly_crossover_temperature"].values.astype(float)
        low, mid, high = _spread(values)
        colour = LINES[scenario.name]
        axes.fill_between(months, low, high, color=colour, alpha=0.25, linewidth=0)
        axes.plot(months, mid, color=colour,
                  label=f"canopy crossover, {scenario.co2_ppm:g} ppm (median, 5-95 % of cells)")
    low, mid, high = _spread(mean)
    axes.fill_between(months, low, high, color=TEMPERATURE, alpha=0.25, linewidth=0)
    axes.plot(months, mid, color=TEMPERATURE, label="monthly mean temperature (median, 5-95 % of cells)")
    axes.axhline(NO_TIE_C, color="#777777", linewidth=0.8, linestyle=":")
    axes.text(12.3, NO_TIE_C - 0.4, "45 °C: no tie up to 45 °C (+inf)", ha="right", va="top", fontsize=7.5,
              color="#555555")
    axes.set_xticks(months)
    axes.set_xlabel("month")
    axes.set_ylabel("°C")
    axes.set_title("Invented demo region: C4 favoured in a month where its mean is above its crossover",
                   fontsize=10)
    axes.legend(loc="lower left", fontsize=7.5, frameon=False)
    figure.tight_layout()
    figures.save_png(figures.figure_bytes(figure, "png", dpi=100), out)
    plt.close(figure)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--config", type=Path, default=REPO / "configs" / "demo.yaml")
    parser.add_argument("--out", type=Path, default=REPO / "docs")
    args = parser.parse_args()
    cfg = load_config(args.config)
    class_map(cfg, args.out / "demo_pathway_class.png")
    crossover(cfg, args.out / "demo_crossover.png")


if __name__ == "__main__":
    main()
