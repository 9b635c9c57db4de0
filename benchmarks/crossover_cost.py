"""The cost of the canopy crossover (suitability.model.canopy_crossover) beside the model pass, on the demo.

Loads the demo climate of the INVENTED Kessarine Basin (configs/demo.yaml) into memory once, then times
``suitability.evaluate`` for the baseline scenario with ``physiology.crossover_temperature`` false (the
model pass) and true (the pass plus the crossover solver), alternating, and reports how many model
evaluations of one cell and month the solver made per cell-month searched. Every season month (as with
the datacube), or with ``--warmest-only`` each cell's warmest season month (a run without the datacube).
Run: ``python benchmarks/crossover_cost.py [--engine numpy] [--warmest-only]``.
Timings include whatever else runs on the machine; no test asserts them.
"""

from __future__ import annotations

import argparse
import time
from pathlib import Path

import numpy as np

import suitability
from suitability import tie_solver
from suitability.config import load_config
from suitability.grid import TargetGrid
from suitability.inputs.climate import load_climate

DEMO = Path(__file__).resolve().parents[1] / "configs" / "demo.yaml"


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--engine", default="compiled", choices=("compiled", "numpy"))
    parser.add_argument("--repeats", type=int, default=2)
    parser.add_argument("--warmest-only", action="store_true",
                        help="no monthly layers: the crossover of each cell's warmest season month only (a run "
                             "without the datacube)")
    args = parser.parse_args()
    cfg = load_config(DEMO)
    grid = TargetGrid.from_region(cfg.region, cfg.config_dir)
    climate = load_climate(cfg.climate, grid, cfg.config_dir).assign(latitude=grid.latitude(512)).compute()
    physiology = cfg.physiology.model_dump()
    scenario = next(s for s in cfg.scenarios if s.name == cfg.baseline)
    counts: list = []
    original = tie_solver._call

    def counting(excess, offsets, active, counter):
        return original(excess, offsets, active, counts)

    tie_solver._call = counting
    times = {False: [], True: []}
    for _ in range(args.repeats):
        for crossover in (False, True):
            counts.clear()
            started = time.perf_counter()
            result = suitability.evaluate(
                climate, scenario, physiology={**physiology, "crossover_temperature": crossover}, season=cfg.season,
                classes=cfg.classes, engine=args.engine, monthly_layers=not args.warmest_only)
            times[crossover].append(time.perf_counter() - started)
    cells = int(np.isfinite(climate["tmin"].isel(month=0)).sum())
    base, full = min(times[False]), min(times[True])
    layer = "crossover_temperature" if args.warmest_only else "monthly_crossover_temperature"
    searched = int((~np.isnan(np.asarray(result[layer]))).sum())  # ±inf (no tie in range) was searched too
    print(f"demo baseline, {cells} cells, engine {args.engine}, "
          f"{'warmest month only' if args.warmest_only else 'every season month'}: model pass {base:.2f} s, "
          f"with the crossover {full:.2f} s (x{full / base:.2f}); {searched} cell-months searched, "
          f"{sum(counts) / max(searched, 1):.2f} model evaluations each ({len(counts)} solver passes)")


if __name__ == "__main__":
    main()
