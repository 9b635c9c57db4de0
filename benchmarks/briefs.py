"""The brief phase's share of a run: 100 districts, 3 scenarios (issue 15). INVENTED DATA.

The region is the "Kessarine Basin synthetic grid" of ``synthetic.py`` (a made-up 400 km square, placed in
open ocean only for realistic sun angles; not a real place), cut into ``--grid`` x ``--grid`` invented
square districts named "District 01", "District 02", ... (a GeoPackage written here with geopandas).
The config gets a ``brief`` section; each run is ``suitability run CONFIG --no-progress`` in its own process.

Two kinds of run, interleaved ``--repeat`` times (the fastest of each kind is reported, every wall time is
kept in the JSON):

- ``per_district``: ``brief.per_district: true``, the demanding case: one brief per district (100 at the
  default grid) besides the scenario briefs, the brief of today and the comparison, each as HTML and PDF;
- ``region_only``: ``brief.per_district: false`` (the scenario, today and comparison briefs only).

Reported from each run's manifest: ``briefs_s`` (the brief phase: zonal statistics, figures, HTML, PDF)
and ``total_s`` (the run inside ``suitability.run``), and the brief phase's share of ``total_s`` and of the
process's wall time (which adds the interpreter start and imports). Nothing here asserts a timing; the
numbers are measurements of this machine at this moment (other work on it shows up in them).

Usage: python benchmarks/briefs.py [--size 1000] [--grid 10] [--repeat 1] [--keep]
Results: benchmarks/results/briefs.json and briefs.md.
"""

from __future__ import annotations

import argparse
import json
import os
import shutil
import subprocess
import sys
import time
from datetime import datetime, timezone
from pathlib import Path

import yaml

sys.path.insert(0, str(Path(__file__).resolve().parent))
from synthetic import CRS, NOTE, SIDE_M, XMIN, YMIN, write_region  # noqa: E402

REPO = Path(__file__).resolve().parents[1]
RESULTS = REPO / "benchmarks" / "results"
SCRATCH = RESULTS / "tmp" / "briefs"
KINDS = {"per_district": True, "region_only": False}


def write_districts(path: Path, grid: int) -> Path:
    """``grid`` x ``grid`` invented square districts over the synthetic square, row by row from the
    north-west, named "District 01" ... (two digits up to 99, three from 100)."""
    import geopandas as gpd
    import shapely

    side = SIDE_M / grid
    digits = max(2, len(str(grid * grid)))
    names, shapes = [], []
    for row in range(grid):
        for col in range(grid):
            x0 = XMIN + col * side
            y1 = YMIN + SIDE_M - row * side
            shapes.append(shapely.box(x0, y1 - side, x0 + side, y1))
            names.append(f"District {len(names) + 1:0{digits}d}")
    frame = gpd.GeoDataFrame({"district": names, "note": NOTE}, geometry=shapes, crs=CRS)
    frame.to_file(path, driver="GPKG", engine="pyogrio")
    return path


def write_config(region_config: Path, districts: Path, kind: str) -> Path:
    config = yaml.safe_load(region_config.read_text())
    config["region"]["invented"] = True  # every brief says the region is made up
    config["output"]["folder"] = str(region_config.parent / f"out_{kind}")
    config["brief"] = {"zones": str(districts), "name_field": "district", "per_district": KINDS[kind]}
    path = region_config.with_name(f"{region_config.stem}_{kind}.yaml")
    path.write_text(f"# {NOTE}\n" + yaml.safe_dump(config, sort_keys=False))
    return path


def run_apart(config: Path) -> dict:
    """``suitability run CONFIG --no-progress`` in its own process: wall time and the manifest's timings."""
    command = [str(Path(sys.executable).parent / "suitability"), "run", str(config), "--no-progress"]
    # This tree's package, not whichever checkout the console script was installed from.
    environment = dict(os.environ, PYTHONPATH=os.pathsep.join(filter(None, [str(REPO), os.environ.get("PYTHONPATH")])))
    started = time.perf_counter()
    process = subprocess.Popen(command, stdout=subprocess.PIPE, stderr=subprocess.PIPE, env=environment)
    stdout, stderr = process.communicate()
    wall = time.perf_counter() - started
    folder = Path(yaml.safe_load(config.read_text())["output"]["folder"])
    manifest = folder / "manifest.json"
    if process.returncode != 0 or not manifest.exists():
        output = (stderr + stdout).decode(errors="replace")[-3000:]
        raise RuntimeError(f"run of {config} failed (exit code {process.returncode}):\n{output}")
    timings = json.loads(manifest.read_text())["timings"]
    briefs = sorted((folder / "brief").glob("*"))
    return {
        "wall_s": round(wall, 2),
        "timings": {k: round(v, 2) for k, v in timings.items()},
        "briefs_s": round(timings["briefs_s"], 2),
        "total_s": round(timings["total_s"], 2),
        "briefs_share_of_total": round(timings["briefs_s"] / timings["total_s"], 4),
        "briefs_share_of_wall": round(timings["briefs_s"] / wall, 4),
        "html_files": sum(p.suffix == ".html" for p in briefs),
        "pdf_files": sum(p.suffix == ".pdf" for p in briefs),
        "figure_files": len(list((folder / "brief" / "figures").glob("*"))),
    }


def write_report(report: dict, name: str = "briefs") -> str:
    """results/<name>.json and .md; returns the Markdown. ``report["earlier"]`` (optional): runs of an
    earlier commit, {label: {"commit", "load_average_at_start", "runs"}}, tabled beside this one's."""
    RESULTS.mkdir(exist_ok=True)
    (RESULTS / f"{name}.json").write_text(json.dumps(report, indent=2) + "\n")
    lines = [f"# Brief phase of a run ({report['date']})", "",
             f"Invented region (benchmarks/synthetic.py): {report['size']}² cells, 12 months x 3 scenarios, all "
             f"layers, COG outputs; {report['districts']} invented square districts; {report['cpus']} cores. "
             "Fastest run of each kind. `briefs_s` and `total_s` are the manifest's timings; wall is the process.", "",
             "| commit | run | load at start | briefs (HTML + PDF) | figures | wall [s] | total_s [s] | briefs_s [s] "
             "| briefs / total |", "|---|---|---|---|---|---|---|---|---|"]
    sets = [*report.get("earlier", {}).values(), report]
    for entry in sets:
        for kind, r in entry["runs"].items():
            lines.append(f"| {entry['commit']} | {kind} | {entry['load_average_at_start'][0]:.1f} | "
                         f"{r['html_files']} + {r['pdf_files']} | {r['figure_files']} | {r['wall_s']} | "
                         f"{r['total_s']} | {r['briefs_s']} | {100 * r['briefs_share_of_total']:.1f} % |")
    text = "\n".join(lines) + "\n"
    (RESULTS / f"{name}.md").write_text(text)
    return text


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--size", type=int, default=1000, help="cells per side of the target grid")
    parser.add_argument("--grid", type=int, default=10, help="districts per side (grid x grid districts)")
    parser.add_argument("--repeat", type=int, default=1, help="runs of each kind, interleaved; the fastest is kept")
    parser.add_argument("--kinds", nargs="+", choices=list(KINDS), default=list(KINDS))
    parser.add_argument("--keep", action="store_true", help="keep the region and the outputs in results/tmp/briefs")
    parser.add_argument("--name", default="briefs", help="results/<name>.json and .md")
    args = parser.parse_args()
    shutil.rmtree(SCRATCH, ignore_errors=True)
    SCRATCH.mkdir(parents=True)
    region_config = write_region(SCRATCH, args.size, scenarios=3, workers=os.cpu_count())
    districts = write_districts(SCRATCH / "data" / "districts.gpkg", args.grid)
    configs = {kind: write_config(region_config, districts, kind) for kind in args.kinds}
    load = os.getloadavg()
    runs, every = {}, {}
    for _ in range(args.repeat):  # interleaved, so that other load on the machine falls on every kind alike
        for kind, config in configs.items():
            result = run_apart(config)
            every.setdefault(kind, []).append({k: result[k] for k in ("wall_s", "briefs_s", "total_s")})
            if kind not in runs or result["wall_s"] < runs[kind]["wall_s"]:
                runs[kind] = result
            print(kind, json.dumps(result), flush=True)
    commit = subprocess.run(["git", "-C", str(REPO), "rev-parse", "--short", "HEAD"], capture_output=True,
                            text=True).stdout.strip()
    report = {"date": datetime.now(timezone.utc).isoformat(timespec="seconds"), "commit": commit,
              "size": args.size, "cells": args.size ** 2, "districts": args.grid ** 2, "scenarios": 3,
              "cpus": os.cpu_count(), "load_average_at_start": load, "repeat": args.repeat, "runs": runs,
              "every_run": every, "note": NOTE}
    print(write_report(report, args.name))
    if not args.keep:
        shutil.rmtree(SCRATCH, ignore_errors=True)


if __name__ == "__main__":
    main()
