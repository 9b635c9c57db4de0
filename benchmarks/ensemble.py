"""An ensemble run against the same members run as single scenarios (issue 12's closing note).

On an invented square region (a fictional patch, not a real place) with a 12-month baseline and, per
member, a 30-year monthly noleap series of Tmin/Tmax (2041-2070, each member warmer by its own amount):

- ``ensemble``: baseline + one scenario with ``members: [m1, m2, m3]`` (a ``{member}`` pattern), which writes
  the scenario's layers plus the ensemble layers (median advantage, C4-favoured share, change agreement);
- ``ensemble+members``: the same with ``output.member_outputs: true`` (each member's layers written too);
- ``singles``: baseline + three scenarios, one per member file, each written like any scenario.

Each kind runs ``--repeat`` times, interleaved with the others; the fastest run of each kind is reported
(every wall time is kept in the JSON).

Each run is its own process (``suitability.run``); reported: wall time, peak resident memory of that process
(ru_maxrss, through benchmarks/child_usage.py) and the manifest's timings (opening the inputs, all scenarios in one pass). Nothing here asserts
a timing; numbers are measurements of this machine at this moment (other work on it shows up in them).

Usage: python benchmarks/ensemble.py [--size 256] [--members 3]
Results: benchmarks/results/ensemble.json and ensemble.md.

``--marginal-size N`` instead measures the cost of one more member (issue 15's target: at most 1.2x the
kernel time of its own work): the ensemble scenario with 2 and with 4 members at N x N cells, with and without
the canopy crossover layer, each kind ``--repeat`` times interleaved; one more member costs (wall of 4 -
wall of 2) / 2 of the fastest runs, compared with N² x 12 cell-steps at the kernel's rate measured in this
process before the runs (on 2 threads, and twice the 1-thread rate; ``run.kernel_benchmark``). A member's
own work includes reading and averaging its 30-year series, which the kernel time does not.
Results: benchmarks/results/ensemble_marginal.json and ensemble_marginal.md; with ``--member-resolutions``
(several, e.g. ``0.01 0.25``: members on the grid itself and at a climate model's resolution, interleaved in
one run) ``ensemble_marginal_by_member_resolution.{json,md}``.
"""

from __future__ import annotations

import argparse
import json
import os
import shutil
import subprocess
import sys
import time
from pathlib import Path

import numpy as np

REPO = Path(__file__).resolve().parents[1]
if str(REPO) not in sys.path:
    sys.path.insert(0, str(REPO))
from benchmarks.child_usage import MeasuredChild  # noqa: E402

RESULTS = REPO / "benchmarks" / "results"
SCRATCH = RESULTS / "tmp" / "ensemble"
RESOLUTION = 0.01  # degrees


def write_inputs(folder: Path, size: int, members: list[str], member_resolution: float = RESOLUTION) -> None:
    """The baseline on the grid itself; each member's series at ``member_resolution`` degrees (the grid's,
    or coarser, as climate-model output comes), one cell beyond the region on every side when coarser."""
    import xarray as xr

    lat = -20.0 - RESOLUTION * (np.arange(size) + 0.5)  # descending, as many model grids are
    lon = 55.0 + RESOLUTION * (np.arange(size) + 0.5)
    coords = {"lat": ("lat", lat, {"units": "degrees_north", "standard_name": "latitude"}),
              "lon": ("lon", lon, {"units": "degrees_east", "standard_name": "longitude"})}
    field = np.linspace(-6.0, 6.0, size)[None, None, :] + np.zeros((1, size, 1))  # a west-east gradient
    months = np.arange(1, 13)
    season = 4.0 * np.cos(2 * np.pi * (months - 1) / 12.0)[:, None, None]
    tmean = 293.15 + season + field
    time = xr.date_range("2000-01-01", periods=12, freq="MS", calendar="noleap", use_cftime=True)
    base = xr.Dataset({"tmin": (("time", "lat", "lon"), (tmean - 5).astype("f4"), {"units": "K"}),
                       "tmax": (("time", "lat", "lon"), (tmean + 5).astype("f4"), {"units": "K"}),
                       "rsds": (("time", "lat", "lon"), np.full((12, size, size), 220.0, "f4"), {"units": "W m-2"}),
                       "wa": (("time", "lat", "lon"), np.full((12, size, size), 0.9, "f4"), {"units": "1"})},
                      coords={"time": time, **coords})
    base.to_netcdf(folder / "baseline.nc")
    series = xr.date_range("2041-01-01", periods=12 * 30, freq="MS", calendar="noleap", use_cftime=True)
    step_month = np.array([t.month for t in series])
    step_year = np.array([t.year for t in series])
    if member_resolution != RESOLUTION:
        cells = int(np.ceil(size * RESOLUTION / member_resolution)) + 2
        lat = -20.0 + member_resolution - member_resolution * (np.arange(cells) + 0.5)
        lon = 55.0 - member_resolution + member_resolution * (np.arange(cells) + 0.5)
        coords = {"lat": ("lat", lat, coords["lat"][2]), "lon": ("lon", lon, coords["lon"][2])}
        field = (-6.0 + 12.0 * (lon - 55.0) / (size * RESOLUTION))[None, None, :] + np.zeros((1, cells, 1))
    for i, member in enumerate(members):
        warming = 1.0 + 1.5 * i
        trend = (warming * (step_year - 2041) / 29.0)[:, None, None]
        tm = 293.15 + 4.0 * np.cos(2 * np.pi * (step_month - 1) / 12.0)[:, None, None] + trend + field
        ds = xr.Dataset({"tasmin": (("time", "lat", "lon"), (tm - 5).astype("f4"), {"units": "K"}),
                         "tasmax": (("time", "lat", "lon"), (tm + 5).astype("f4"), {"units": "K"})},
                        coords={"time": series, **coords})
        ds.to_netcdf(folder / f"tas_{member}.nc",
                     encoding={"time": {"units": "days since 2000-01-01", "calendar": "noleap"}})


def write_config(folder: Path, name: str, size: int, members: list[str], mode: str, crossover: bool = True) -> Path:
    import yaml

    climate = {"tmin": {"path": "baseline.nc", "variable": "tmin"}, "tmax": {"path": "baseline.nc", "variable": "tmax"},
               "shortwave": {"path": "baseline.nc", "variable": "rsds"},
               "water_availability": {"path": "baseline.nc", "variable": "wa"}}

    def own(path):
        return {"tmin": {"path": path, "variable": "tasmin"}, "tmax": {"path": path, "variable": "tasmax"}}

    scenarios = [{"name": "baseline", "co2_ppm": 420}]
    if mode == "singles":
        scenarios += [{"name": f"future_{m}", "co2_ppm": 560, "period": [2041, 2070], "climate": own(f"tas_{m}.nc")}
                      for m in members]
    else:
        scenarios += [{"name": "future", "co2_ppm": 560, "period": [2041, 2070], "members": members,
                       "climate": own("tas_{member}.nc")}]
    cfg = {"region": {"name": "Invented benchmark patch (fictional)",
                      "grid": {"crs": "EPSG:4326", "resolution": RESOLUTION,
                               "bounds": [55.0, -20.0 - RESOLUTION * size, 55.0 + RESOLUTION * size, -20.0]}},
           "climate": climate, "scenarios": scenarios,
           "output": {"folder": f"out_{name}", "member_outputs": mode == "ensemble+members", "overwrite": True},
           "compute": {"scheduler": "threads"}}
    if not crossover:
        cfg["physiology"] = {"crossover_temperature": False}
    path = folder / f"{name}.yaml"
    path.write_text(yaml.safe_dump(cfg, sort_keys=False))
    return path


def run_apart(config: Path) -> dict:
    """``suitability.run(config)`` in its own process: wall time, peak RSS and the manifest's timings."""
    code = "import sys, suitability; print(suitability.run(sys.argv[1]).manifest_path)"
    started = time.perf_counter()
    child = MeasuredChild([sys.executable, "-c", code, str(config)], cwd=REPO, stdout=subprocess.PIPE,
                          stderr=subprocess.DEVNULL, env={**os.environ, "PYTHONPATH": str(REPO)})
    usage = child.wait()
    wall = time.perf_counter() - started
    out = child.process.stdout.read().decode().strip().splitlines()
    if usage.returncode != 0 or not out:
        raise RuntimeError(f"run of {config} failed (exit code {usage.returncode})")
    manifest = json.loads(Path(out[-1]).read_text())
    return {"wall_s": round(wall, 2), "peak_rss_mib": round(usage.ru_maxrss / 1024, 1), "timings": manifest["timings"]}


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--size", type=int, default=256, help="cells per side of the square region")
    parser.add_argument("--members", type=int, default=3)
    parser.add_argument("--repeat", type=int, default=2, help="runs of each kind, interleaved; the fastest is kept")
    parser.add_argument("--marginal-size", type=int, default=0,
                        help="measure one more member at this size instead (module docstring)")
    parser.add_argument("--member-resolutions", type=float, nargs="+", default=[RESOLUTION],
                        help=f"degrees of the members' series in --marginal-size, each measured in the same run "
                             f"(default {RESOLUTION}: the grid's; climate-model output comes at 0.1-1)")
    args = parser.parse_args()
    if args.marginal_size:
        marginal_member(args.marginal_size, args.repeat, args.member_resolutions)
        return
    members = [f"m{i + 1}" for i in range(args.members)]
    shutil.rmtree(SCRATCH, ignore_errors=True)
    SCRATCH.mkdir(parents=True)
    write_inputs(SCRATCH, args.size, members)
    runs, every = {}, {}
    for _ in range(args.repeat):  # interleaved, so that other load on the machine falls on every kind alike
        for mode in ("singles", "ensemble", "ensemble+members"):
            result = run_apart(write_config(SCRATCH, mode.replace("+", "_"), args.size, members, mode))
            every.setdefault(mode, []).append(result["wall_s"])
            if mode not in runs or result["wall_s"] < runs[mode]["wall_s"]:
                runs[mode] = result
            print(mode, json.dumps(result), flush=True)
    # Every scenario of a run (and every member) is computed and written in one dask pass: one timing.
    report = {
        "size": args.size, "cells": args.size ** 2, "members": args.members, "runs": runs,
        "wall_s_of_every_run": every,
        "scenarios_s": {mode: result["timings"]["scenarios_s"] for mode, result in runs.items()},
    }
    RESULTS.mkdir(exist_ok=True)
    (RESULTS / "ensemble.json").write_text(json.dumps(report, indent=2))
    lines = [f"# Ensemble against single runs ({args.size} x {args.size} cells, {args.members} members, "
             f"fastest of {args.repeat})", "",
             "| run | wall [s] | open inputs [s] | all scenarios, one pass [s] | peak RSS [MiB] |", "|---|---|---|---|---|"]
    for mode, result in runs.items():
        timing = result["timings"]
        lines.append(f"| {mode} | {result['wall_s']} | {timing['open_inputs_s']} | {timing['scenarios_s']:.2f} | "
                     f"{result['peak_rss_mib']} |")
    (RESULTS / "ensemble.md").write_text("\n".join(lines) + "\n")
    print("\n".join(lines))
    shutil.rmtree(SCRATCH, ignore_errors=True)


def marginal_member(size: int, repeat: int, member_resolutions: list[float] | None = None) -> None:
    """One more member's cost against the kernel time of its own work (module docstring), for members at each
    of ``member_resolutions`` degrees (default: the grid's), every kind interleaved in one run."""
    sys.path.insert(0, str(Path(__file__).resolve().parent))
    from run import kernel_benchmark

    resolutions = member_resolutions or [RESOLUTION]
    members = [f"m{i + 1}" for i in range(4)]
    shutil.rmtree(SCRATCH, ignore_errors=True)
    print("kernel ...", flush=True)
    kernel = kernel_benchmark(131072, 16384, 4096, repeats=3)
    kinds = {}
    for resolution in resolutions:
        folder = SCRATCH / f"members_{resolution:g}deg"
        folder.mkdir(parents=True)
        write_inputs(folder, size, members, resolution)
        kinds.update({(resolution, count, crossover): write_config(
            folder, f"members{count}_{'with' if crossover else 'without'}", size, members[:count], "ensemble", crossover)
            for crossover in (True, False) for count in (2, 4)})
    fastest, every = {}, {}
    for _ in range(repeat):  # interleaved, so that other load on the machine falls on every kind alike
        for key, config in kinds.items():
            result = run_apart(config)
            every.setdefault(str(key), []).append(result["wall_s"])
            if key not in fastest or result["wall_s"] < fastest[key]["wall_s"]:
                fastest[key] = result
            print(key, json.dumps(result), flush=True)
    kernel_s = {"2 threads": size * size * 12 / kernel["kernel_2_threads_cell_steps_per_s"],
                "twice 1 thread": size * size * 12 / (2 * kernel["kernel_1_thread_cell_steps_per_s"])}
    rows = []
    for resolution in resolutions:
        for crossover in (True, False):
            two, four = fastest[(resolution, 2, crossover)]["wall_s"], fastest[(resolution, 4, crossover)]["wall_s"]
            per_member = (four - two) / 2
            rows.append({"member_resolution_deg": resolution, "layers": "with crossover" if crossover else "without crossover",
                         "wall_2_members_s": two, "wall_4_members_s": four, "per_member_s": per_member,
                         **{f"ratio_to_kernel_{k.replace(' ', '_')}": per_member / v for k, v in kernel_s.items()}})
    stem = "ensemble_marginal" if resolutions == [RESOLUTION] else "ensemble_marginal_by_member_resolution"
    report = {"size": size, "cells": size * size, "repeat": repeat, "grid_resolution_deg": RESOLUTION,
              "kernel": kernel, "kernel_s_per_member": kernel_s, "one_more_member": rows,
              "fastest": {str(k): v for k, v in fastest.items()}, "every_run": every,
              "load_average_at_end": os.getloadavg()}
    RESULTS.mkdir(exist_ok=True)
    (RESULTS / f"{stem}.json").write_text(json.dumps(report, indent=2) + "\n")
    text = marginal_markdown(report)
    (RESULTS / f"{stem}.md").write_text(text)
    print(text)
    shutil.rmtree(SCRATCH, ignore_errors=True)


def marginal_markdown(report: dict) -> str:
    """The table of :func:`marginal_member`'s report."""
    size, kernel_s = report["size"], report["kernel_s_per_member"]
    lines = [f"# One more ensemble member ({size} x {size} cells, 12 months, fastest of {report['repeat']})", "",
             "Invented square region (see benchmarks/ensemble.py; not a real place). Each member is a 30-year "
             f"monthly series of Tmin and Tmax, at the grid's own {RESOLUTION:g}° or coarser (as climate-model output "
             "comes; then resampled bilinearly onto the grid). One more member = (wall with 4 members - wall with "
             f"2) / 2, against the kernel time of its own model work ({size}² x 12 cell-steps): "
             f"{kernel_s['2 threads']:.2f} s at the 2-thread kernel rate, {kernel_s['twice 1 thread']:.2f} s at "
             "twice the 1-thread rate, measured in this run before the runs. Every kind ran interleaved.", "",
             "| members' series | layers | wall, 2 members [s] | wall, 4 members [s] | one more member [s] "
             "| / kernel (2 threads) | / kernel (twice 1 thread) |", "|---|---|---|---|---|---|---|"]
    for row in report["one_more_member"]:
        lines.append(f"| {row['member_resolution_deg']:g}° | {row['layers']} | {row['wall_2_members_s']} | "
                     f"{row['wall_4_members_s']} | {row['per_member_s']:.2f} | {row['ratio_to_kernel_2_threads']:.2f}x | "
                     f"{row['ratio_to_kernel_twice_1_thread']:.2f}x |")
    return "\n".join(lines) + "\n"


if __name__ == "__main__":
    main()
