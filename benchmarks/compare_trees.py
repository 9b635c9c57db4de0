"""Two source trees side by side: the compiled kernel per thread and end-to-end runs, interleaved.

For a change whose effect on speed is a few per cent on a shared machine, single timings say little:
this runs the same measurement on two checkouts (e.g. a git worktree of an older commit and this one)
alternately, each in its own process with ``PYTHONPATH`` set to that tree, and reports per-tree medians
and the median of the paired ratios (new / old, each pair measured back to back). INVENTED inputs
(benchmarks/synthetic.py). Nothing here asserts a timing.

Usage:
    git worktree add --detach /tmp/old <commit>
    python benchmarks/compare_trees.py --old /tmp/old [--new .] [--kernel-cells 20000] [--rounds 7]
        [--sizes 1000 2000] [--e2e-rounds 2] [--out benchmarks/results/compare.json]
        [--new-setting physiology.crossover_temperature=false]   (a layer the old tree does not make)

Kernel: one process per tree and round loads the kernel (numba's cache, compiled in a warm-up process
first), runs it once on the cells, then times ``--repeats`` runs on one thread and reports their median
(cell-steps/s; one cell-step = one cell, one month, both pathways). End to end: ``suitability run`` on
the synthetic region (12 months x 3 scenarios, all layers, COG), wall time, CPU time and the peak
resident memory of that process (ru_maxrss, through benchmarks/child_usage.py).
"""

from __future__ import annotations

import argparse
import json
import os
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from datetime import datetime, timezone
from pathlib import Path

import numpy as np

REPO = Path(__file__).resolve().parents[1]
if str(REPO) not in sys.path:
    sys.path.insert(0, str(REPO))

from benchmarks.child_usage import MeasuredChild  # noqa: E402
from benchmarks.synthetic import cell_inputs  # noqa: E402

_KERNEL_CHILD = r"""
import json, statistics, sys, time
import numpy as np
from suitability import kernel, model
cells = dict(np.load(sys.argv[1]))
repeats = int(sys.argv[2])
def run(part):
    return kernel.monthly_canopy_assimilation(
        tmin_c=part["tmin"], tmax_c=part["tmax"], shortwave_mj=part["shortwave"],
        water_availability=part["water_availability"], latitude_deg=part["latitude"],
        elevation_m=part["elevation"], day_of_year=model.REPRESENTATIVE_DAY, co2_ppm=420.0)
start = time.perf_counter()
run({k: v[:64] for k, v in cells.items()})
load = time.perf_counter() - start
run(cells)
times, cpu = [], []
for _ in range(repeats):
    start, start_cpu = time.perf_counter(), time.thread_time()
    run(cells)
    times.append(time.perf_counter() - start)
    cpu.append(time.thread_time() - start_cpu)
print(json.dumps({"load_s": load, "times_s": times, "median_s": statistics.median(times), "cpu_s": cpu,
                  "median_cpu_s": statistics.median(cpu), "file": kernel.__file__}))
"""

_REGION_CHILD = r"""
import sys
from pathlib import Path
from benchmarks.synthetic import write_region
print(write_region(Path(sys.argv[1]), int(sys.argv[2]), scenarios=3, workers=int(sys.argv[3])))
"""


def _environment(tree: Path) -> dict:
    environment = dict(os.environ, PYTHONPATH=str(tree), NUMBA_NUM_THREADS="1")
    return environment


def _child(tree: Path, code: str, *args) -> str:
    result = subprocess.run([sys.executable, "-c", code, *map(str, args)], env=_environment(tree), cwd=tree,
                            capture_output=True, text=True, check=False)
    if result.returncode != 0:
        raise RuntimeError(f"{tree}: {result.stderr[-3000:]}")
    return result.stdout.strip().splitlines()[-1]


def kernel_rounds(trees: dict, n_cells: int, rounds: int, repeats: int, scratch: Path) -> dict:
    cells_file = scratch / "cells.npz"
    np.savez(cells_file, **cell_inputs(n_cells))
    for tree in trees.values():  # compile or load numba's cache once, untimed
        _child(tree, _KERNEL_CHILD, cells_file, 1)
    rates = {name: [] for name in trees}
    cpu_rates = {name: [] for name in trees}
    names = list(trees)
    for round_ in range(rounds):
        order = names if round_ % 2 == 0 else names[::-1]
        for name in order:
            measured = json.loads(_child(trees[name], _KERNEL_CHILD, cells_file, repeats))
            rates[name].append(n_cells * 12 / measured["median_s"])
            cpu_rates[name].append(n_cells * 12 / measured["median_cpu_s"])
            print(f"  kernel round {round_} {name}: {rates[name][-1] / 1e6:.3f} M cell-steps/s wall, "
                  f"{cpu_rates[name][-1] / 1e6:.3f} M per CPU second", flush=True)
    ratios = [new / old for new, old in zip(rates["new"], rates["old"])]
    cpu_ratios = [new / old for new, old in zip(cpu_rates["new"], cpu_rates["old"])]
    return {"cells": n_cells, "rounds": rounds, "repeats_per_round": repeats,
            "cell_steps_per_s": rates, "cell_steps_per_cpu_s": cpu_rates,
            "median_cell_steps_per_s": {name: statistics.median(values) for name, values in rates.items()},
            "median_cell_steps_per_cpu_s": {name: statistics.median(values) for name, values in cpu_rates.items()},
            "paired_ratios_new_over_old": ratios, "median_ratio_new_over_old": statistics.median(ratios),
            "paired_cpu_ratios_new_over_old": cpu_ratios,
            "median_cpu_ratio_new_over_old": statistics.median(cpu_ratios)}


def end_to_end_rounds(trees: dict, size: int, rounds: int, scratch: Path, new_settings=()) -> dict:
    configs = {name: Path(_child(tree, _REGION_CHILD, scratch / f"region_{name}_{size}", size, os.cpu_count()))
               for name, tree in trees.items()}
    _set_config_values(configs["new"], new_settings)
    rows = {name: [] for name in trees}
    names = list(trees)
    for round_ in range(rounds):
        order = names if round_ % 2 == 0 else names[::-1]
        for name in order:
            rows[name].append(_measure(trees[name], configs[name]))
            row = rows[name][-1]
            print(f"  {size}² round {round_} {name}: {row['wall_s']:.1f} s wall, {row['cpu_s']:.0f} s CPU, "
                  f"peak {row['peak_rss_mib']:.0f} MiB", flush=True)
    ratios = [old["wall_s"] / new["wall_s"] for new, old in zip(rows["new"], rows["old"])]
    return {"size": size, "cell_steps": size * size * 12 * 3, "rounds": rounds, "runs": rows,
            "median_wall_s": {name: statistics.median(r["wall_s"] for r in runs) for name, runs in rows.items()},
            "median_peak_rss_mib": {name: statistics.median(r["peak_rss_mib"] for r in runs)
                                    for name, runs in rows.items()},
            "paired_speedups_old_wall_over_new_wall": ratios, "median_speedup": statistics.median(ratios)}


def _set_config_values(config: Path, settings) -> None:
    """Set ``section.key=value`` items (values read as YAML) in the config file of one tree, e.g. to turn
    off in the new tree a layer the old tree does not make (``physiology.crossover_temperature=false``)."""
    if not settings:
        return
    import yaml

    data = yaml.safe_load(config.read_text())
    for item in settings:
        path, _, value = item.partition("=")
        *sections, key = path.split(".")
        target = data
        for section in sections:
            target = target.setdefault(section, {})
        target[key] = yaml.safe_load(value)
    config.write_text(yaml.safe_dump(data, sort_keys=False))


def _measure(tree: Path, config: Path) -> dict:
    command = [sys.executable, "-c", "from suitability.cli import app; app()", "run", str(config), "--no-progress"]
    start = time.perf_counter()
    with tempfile.TemporaryFile() as log:
        usage = MeasuredChild(command, env=_environment(tree), cwd=tree, stdout=log, stderr=subprocess.STDOUT).wait()
        wall = time.perf_counter() - start
        if usage.returncode != 0:
            log.seek(0)
            raise RuntimeError(f"{tree}: {log.read().decode(errors='replace')[-3000:]}")
    return {"wall_s": round(wall, 2), "cpu_s": round(usage.ru_utime + usage.ru_stime, 2),
            "peak_rss_mib": round(usage.ru_maxrss / 1024, 1)}


def markdown(result: dict) -> str:
    old, new = result["commits"]["old"], result["commits"]["new"]
    lines = [f"# Side-by-side run {result['created']}: {old} (old) against {new} (new)", "",
             f"Machine: {result.get('cpu', 'unknown')}, {os.cpu_count()} cores; load average at start "
             f"{tuple(round(v, 2) for v in result['load_average_at_start'])}, at end "
             f"{tuple(round(v, 2) for v in result['load_average_at_end'])} (other work shared the machine). "
             "Each tree in its own processes, alternately (benchmarks/compare_trees.py). Invented inputs "
             "(benchmarks/synthetic.py). Ratios are medians of the pairs measured back to back.", ""]
    k = result.get("kernel")
    if k:
        lines += [f"## Kernel, one thread, {k['cells']} cells x 12 months ({k['rounds']} rounds x {k['repeats_per_round']} runs)", "",
                  "| tree | median cell-steps/s (wall) | median cell-steps per CPU second |", "|---|---|---|"]
        for name in ("old", "new"):
            lines.append(f"| {name} ({result['commits'][name]}) | {k['median_cell_steps_per_s'][name] / 1e6:.2f} M | "
                         f"{k['median_cell_steps_per_cpu_s'][name] / 1e6:.2f} M |")
        lines += ["", f"New over old, per CPU second: median {k['median_cpu_ratio_new_over_old']:.3f} (pairs: "
                  + ", ".join(f"{r:.2f}" for r in k["paired_cpu_ratios_new_over_old"]) + f"); wall: median "
                  f"{k['median_ratio_new_over_old']:.3f}.", ""]
    if result.get("end_to_end"):
        lines += ["## End to end (`suitability run`, 12 months x 3 scenarios, all layers, COG)", ""]
        if result.get("new_settings"):
            lines += ["The new tree's runs with " + ", ".join(f"`{item}`" for item in result["new_settings"]) + ".", ""]
        lines += ["| cells | tree | median wall s | median CPU s | median peak RSS MiB | runs (wall s) |",
                  "|---|---|---|---|---|---|"]
        for row in result["end_to_end"]:
            for name in ("old", "new"):
                runs = row["runs"][name]
                cpu = sorted(r["cpu_s"] for r in runs)[len(runs) // 2]
                lines.append(f"| {row['size']}² | {name} | {row['median_wall_s'][name]:.1f} | {cpu:.0f} | "
                             f"{row['median_peak_rss_mib'][name]:.0f} | " + ", ".join(f"{r['wall_s']:.1f}" for r in runs) + " |")
            lines.append(f"| {row['size']}² | old wall / new wall | {row['median_speedup']:.3f} | | | " +
                         ", ".join(f"{r:.2f}" for r in row["paired_speedups_old_wall_over_new_wall"]) + " |")
        lines.append("")
    return "\n".join(lines)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--old", type=Path, required=True, help="the other tree (e.g. a worktree of an older commit)")
    parser.add_argument("--new", type=Path, default=REPO)
    parser.add_argument("--kernel-cells", type=int, default=20000)
    parser.add_argument("--rounds", type=int, default=7, help="kernel rounds (one process per tree each)")
    parser.add_argument("--repeats", type=int, default=3, help="timed kernel runs per process")
    parser.add_argument("--sizes", type=int, nargs="*", default=[1000, 2000])
    parser.add_argument("--e2e-rounds", type=int, default=2)
    parser.add_argument("--new-setting", action="append", default=[], metavar="SECTION.KEY=VALUE",
                        help="a config value for the new tree's end-to-end runs only (repeatable)")
    parser.add_argument("--out", type=Path, default=REPO / "benchmarks" / "results" / "compare.json")
    args = parser.parse_args()
    trees = {"old": args.old.resolve(), "new": args.new.resolve()}
    (REPO / "benchmarks" / "results" / "tmp").mkdir(parents=True, exist_ok=True)
    scratch = Path(tempfile.mkdtemp(prefix="compare-trees-", dir=REPO / "benchmarks" / "results" / "tmp"))
    from benchmarks.run import machine

    result = {"created": datetime.now(timezone.utc).isoformat(timespec="seconds"), "load_average_at_start": os.getloadavg(),
              "cpu": machine()["cpu"], "new_settings": args.new_setting,
              "trees": {name: str(tree) for name, tree in trees.items()},
              "commits": {name: subprocess.run(["git", "-C", str(tree), "rev-parse", "--short", "HEAD"],
                                               capture_output=True, text=True).stdout.strip()
                          for name, tree in trees.items()}}
    try:
        if args.rounds:
            print("kernel ...", flush=True)
            result["kernel"] = kernel_rounds(trees, args.kernel_cells, args.rounds, args.repeats, scratch)
        result["end_to_end"] = []
        for size in args.sizes:
            print(f"end to end {size}² ...", flush=True)
            result["end_to_end"].append(end_to_end_rounds(trees, size, args.e2e_rounds, scratch, args.new_setting))
    finally:
        shutil.rmtree(scratch, ignore_errors=True)
    result["load_average_at_end"] = os.getloadavg()
    args.out.parent.mkdir(parents=True, exist_ok=True)
    args.out.write_text(json.dumps(result, indent=2) + "\n")
    args.out.with_suffix(".md").write_text(markdown(result))
    print(json.dumps({k: v for k, v in result.get("kernel", {}).items() if k.startswith("median")}, indent=1))
    for row in result["end_to_end"]:
        print(row["size"], row["median_wall_s"], row["median_peak_rss_mib"], f"speedup {row['median_speedup']:.3f}")


if __name__ == "__main__":
    main()
