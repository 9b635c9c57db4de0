"""An ensemble run on threads and on a local dask cluster of 1 and 2 worker processes (issue 15, "Cluster").

INVENTED DATA: the Kessarine Basin synthetic grid of ``synthetic.py`` (a made-up region, not a real place),
a strip of ``--size`` x ``--rows`` cells, with an invented ensemble scenario whose members are the region's
climate warmed by made-up amounts (``synthetic.write_members``), each member's layers written
(``output.member_outputs``) and ``--draws`` parameter draws (``uncertainty``).

Three kinds of run, each ``suitability run CONFIG`` in its own process, interleaved, ``--repeat`` times:

- ``threads``: ``--scheduler threads --workers 2`` (dask's threaded scheduler, 2 threads);
- ``cluster_1``: a ``dask scheduler`` and 1 ``dask worker --nthreads 1`` process on 127.0.0.1, started
  for the run and shut down after it, the run pointed at it with ``--scheduler tcp://127.0.0.1:PORT``;
- ``cluster_2``: the same with 2 worker processes of 1 thread each.

Reported per run: wall seconds of the ``suitability run`` process (the cluster is started before the clock
starts; its start-up is reported apart), the manifest's per-step timings, CPU seconds of the run process
and of the cluster's processes (os.wait4 of each, which includes the children they waited for, e.g. the
worker a ``dask worker`` nanny starts), on a cluster the tasks each worker ran (the scheduler's task
stream: how many model blocks, how many seconds), and a sha256 of the pixel values of every written layer. The check:
every run of every kind wrote the same layers with identical pixels. Speed-up 1 -> 2 workers: the fastest
``cluster_1`` run over the fastest ``cluster_2`` run, and each repeat's pair (run back to back).

The machine has 2 cores shared with other work: the ratios are indicative, not a property of the code;
the load average at the start and the end is recorded. Nothing here asserts a timing.

Usage: python benchmarks/cluster.py [--size 1024] [--rows 256] [--members 3] [--draws 4] [--repeat 2]
Results: benchmarks/results/cluster.json and cluster.md.
"""

from __future__ import annotations

import argparse
import datetime
import hashlib
import json
import os
import shutil
import socket
import statistics
import subprocess
import sys
import time
from contextlib import contextmanager
from pathlib import Path
from types import SimpleNamespace

import numpy as np
import rasterio
import yaml

REPO = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(REPO))
from benchmarks.child_usage import MeasuredChild  # noqa: E402
from benchmarks.synthetic import NOTE, write_members, write_region  # noqa: E402

RESULTS = REPO / "benchmarks" / "results"
SCRATCH = RESULTS / "tmp" / "cluster"
BIN = Path(sys.executable).parent
ENV = {**os.environ, "PYTHONPATH": str(REPO)}  # the run and the workers import this tree's suitability
KINDS = {"threads": 0, "cluster_1": 1, "cluster_2": 2}  # worker processes (0: no cluster)


def pixel_hashes(folder: Path) -> dict[str, str]:
    """sha256 of the pixel values (not the file bytes) of every GeoTIFF under ``folder``."""
    hashes = {}
    for path in sorted(folder.rglob("*.tif")):
        with rasterio.open(path) as src:
            hashes[str(path.relative_to(folder))] = hashlib.sha256(np.ascontiguousarray(src.read()).tobytes()).hexdigest()
    return hashes


def free_port() -> int:
    with socket.socket() as sock:
        sock.bind(("127.0.0.1", 0))
        return sock.getsockname()[1]


class Cluster:
    """A ``dask scheduler`` and ``workers`` single-threaded ``dask worker`` processes on 127.0.0.1."""

    def __init__(self, workers: int, folder: Path):
        self.workers, self.folder = workers, folder
        self.address = f"tcp://127.0.0.1:{free_port()}"
        self.processes: list[subprocess.Popen] = []
        self.cpu_s = 0.0

    def __enter__(self) -> "Cluster":
        from distributed import Client

        started = time.perf_counter()
        port = self.address.rsplit(":", 1)[1]
        self.processes.append(subprocess.Popen(
            [str(BIN / "dask"), "scheduler", "--host", "127.0.0.1", "--port", port, "--dashboard-address", ":0"],
            env=ENV, cwd=self.folder, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL))
        try:
            for i in range(self.workers):
                self.processes.append(subprocess.Popen(
                    [str(BIN / "dask"), "worker", self.address, "--nthreads", "1", "--dashboard-address", ":0",
                     "--local-directory", str(self.folder / f"worker_{i}"), "--name", f"worker_{i}"],
                    env=ENV, cwd=self.folder, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL))
            deadline = time.monotonic() + 120
            while True:  # the scheduler may need a moment before it accepts connections
                try:
                    with Client(self.address, timeout=5, set_as_default=False) as client:
                        client.wait_for_workers(self.workers, timeout=max(1.0, deadline - time.monotonic()))
                    break
                except OSError:
                    if time.monotonic() > deadline:
                        raise
                    time.sleep(0.5)
        except BaseException:
            self.__exit__()
            raise
        self.start_s = time.perf_counter() - started
        return self

    def __exit__(self, *_) -> None:
        from distributed import Client

        try:  # the scheduler tells its workers to close, then closes itself
            with Client(self.address, timeout=5, set_as_default=False) as client:
                client.shutdown()
        except Exception:  # noqa: BLE001 - fall back on signals below
            pass
        for process in self.processes:  # reaped with os.wait4 (not Popen.wait) to read their CPU time
            for signal_to_send in (None, process.terminate, process.kill):
                if signal_to_send is not None:
                    signal_to_send()
                deadline = time.monotonic() + 20
                while time.monotonic() < deadline:
                    pid, status, usage = os.wait4(process.pid, os.WNOHANG)
                    if pid:
                        process.returncode = os.waitstatus_to_exitcode(status)
                        self.cpu_s += usage.ru_utime + usage.ru_stime
                        break
                    time.sleep(0.2)
                if process.returncode is not None:
                    break


@contextmanager
def task_stream(cluster: Cluster | None):
    """The scheduler's record of the tasks run meanwhile (``.data``: one dict per task), or an empty one."""
    if cluster is None:
        yield SimpleNamespace(data=[])
        return
    from distributed import Client, get_task_stream

    with Client(cluster.address, timeout=10, set_as_default=False) as client, get_task_stream(client=client) as tasks:
        yield tasks


def per_worker(tasks: list[dict]) -> dict[str, dict]:
    """Per worker: tasks run, seconds spent computing them, and of those the model blocks (``evaluate``
    tasks, one per block of cells of the baseline or of a member): how evenly the work was shared."""
    shares: dict[str, dict] = {}
    for task in tasks:
        key = task["key"][0] if isinstance(task["key"], tuple) else task["key"]
        busy = sum(s["stop"] - s["start"] for s in task["startstops"] if s["action"] == "compute")
        share = shares.setdefault(task["worker"], {"tasks": 0, "compute_s": 0.0, "model_blocks": 0, "model_blocks_s": 0.0})
        share["tasks"] += 1
        share["compute_s"] += busy
        if str(key).startswith("evaluate-"):
            share["model_blocks"] += 1
            share["model_blocks_s"] += busy
    return {worker: {k: round(v, 2) for k, v in share.items()} for worker, share in sorted(shares.items())}


def run_once(config: Path, kind: str, output: Path) -> dict:
    """One ``suitability run`` of ``kind`` writing to ``output``: wall and CPU seconds, timings, pixel hashes."""
    settings = yaml.safe_load(config.read_text())
    settings["output"]["folder"] = str(output)
    run_config = output.with_suffix(".yaml")
    run_config.write_text(f"# {NOTE}\n" + yaml.safe_dump(settings, sort_keys=False))
    workers = KINDS[kind]
    cluster = Cluster(workers, SCRATCH) if workers else None
    record: dict = {"kind": kind}
    try:
        if cluster is not None:
            cluster.__enter__()
            record["cluster_start_s"] = round(cluster.start_s, 2)
            scheduler = ["--scheduler", cluster.address]
        else:
            scheduler = ["--scheduler", "threads", "--workers", "2"]
        command = [str(BIN / "suitability"), "run", str(run_config), "--no-progress", *scheduler]
        errors = output.with_suffix(".stderr")
        with errors.open("w") as stderr, task_stream(cluster) as tasks:
            started = time.perf_counter()
            usage = MeasuredChild(command, cwd=SCRATCH, env=ENV, stdout=subprocess.DEVNULL, stderr=stderr).wait()
            record["wall_s"] = round(time.perf_counter() - started, 2)
        record["run_process_cpu_s"] = round(usage.ru_utime + usage.ru_stime, 2)
        record["run_process_peak_rss_mib"] = round(usage.ru_maxrss / 1024, 1)
        if usage.returncode != 0:
            raise RuntimeError(f"{kind} run failed (exit code {usage.returncode}): {errors.read_text()[-2000:]}")
    finally:
        if cluster is not None:
            cluster.__exit__()
            record["cluster_processes_cpu_s"] = round(cluster.cpu_s, 2)
    if cluster is not None:
        record["per_worker"] = per_worker(tasks.data)
    record["timings"] = json.loads((output / "manifest.json").read_text())["timings"]
    record["pixel_hashes"] = pixel_hashes(output)
    shutil.rmtree(output)
    return record


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--size", type=int, default=1024, help="cells across (west-east) of the strip")
    parser.add_argument("--rows", type=int, default=256, help="cells down (north-south) of the strip")
    parser.add_argument("--months", type=int, nargs="+", default=[1], help="season months")
    parser.add_argument("--members", type=int, default=3)
    parser.add_argument("--draws", type=int, default=4, help="parameter draws (config uncertainty.draws)")
    parser.add_argument("--repeat", type=int, default=2, help="runs of each kind, interleaved")
    args = parser.parse_args()
    members = [f"m{i + 1}" for i in range(args.members)]
    shutil.rmtree(SCRATCH, ignore_errors=True)
    SCRATCH.mkdir(parents=True)
    config = write_members(write_region(SCRATCH, args.size, rows=args.rows, scenarios=1, months=args.months), members)
    settings = yaml.safe_load(config.read_text())
    settings["uncertainty"] = {"draws": args.draws, "seed": 1}
    settings["output"]["member_outputs"] = True
    config.write_text(f"# {NOTE}\n" + yaml.safe_dump(settings, sort_keys=False))

    load_start = os.getloadavg()
    started_at = datetime.datetime.now(datetime.timezone.utc).isoformat(timespec="seconds")
    runs: list[dict] = []
    for repeat in range(args.repeat):  # interleaved, so that other load on the machine falls on every kind alike
        for kind in KINDS:
            record = run_once(config, kind, SCRATCH / f"out_{kind}_{repeat}")
            record["repeat"] = repeat
            runs.append(record)
            shown = {k: v for k, v in record.items() if k not in ("pixel_hashes", "timings")}
            print(json.dumps(shown), flush=True)
    load_end = os.getloadavg()

    reference = runs[0]["pixel_hashes"]
    identical = all(r["pixel_hashes"] == reference for r in runs)
    walls = {kind: [r["wall_s"] for r in runs if r["kind"] == kind] for kind in KINDS}
    fastest = {kind: min(values) for kind, values in walls.items()}
    paired = [round(a / b, 3) for a, b in zip(walls["cluster_1"], walls["cluster_2"])]
    commit = subprocess.run(["git", "rev-parse", "--short", "HEAD"], cwd=REPO, capture_output=True, text=True).stdout.strip()
    report = {
        "data": NOTE + " Members: the region's Tmin/Tmax warmed by made-up amounts (synthetic.write_members).",
        "started_at": started_at, "commit": commit, "cpu_count": os.cpu_count(),
        "load_average_start": [round(x, 2) for x in load_start], "load_average_end": [round(x, 2) for x in load_end],
        "grid": {"columns": args.size, "rows": args.rows, "cells": args.size * args.rows, "season_months": args.months},
        "members": members, "draws": args.draws, "member_outputs": True, "repeat": args.repeat,
        "layers_written": len(reference),
        "pixels_identical_across_all_runs": identical,
        "wall_s": walls, "fastest_wall_s": fastest,
        "speed_up_1_to_2_workers": {"fastest": round(fastest["cluster_1"] / fastest["cluster_2"], 3),
                                    "per_repeat": paired},
        "cluster_2_over_threads_fastest": round(fastest["cluster_2"] / fastest["threads"], 3),
        "runs": [{k: v for k, v in r.items() if k != "pixel_hashes"} for r in runs],
        "pixel_hashes": reference,
    }
    RESULTS.mkdir(exist_ok=True)
    (RESULTS / "cluster.json").write_text(json.dumps(report, indent=2) + "\n")

    def cpu(kind, field):
        return statistics.median(r.get(field, 0.0) for r in runs if r["kind"] == kind)

    lines = [f"# Ensemble run on threads and on a local dask cluster ({started_at}, commit {commit})", "",
             f"INVENTED data: {NOTE}", "",
             f"{args.size} x {args.rows} cells, season months {args.months}, {len(members)} invented members "
             f"(member outputs on), {args.draws} parameter draws; {len(reference)} layers written per run. "
             f"Each run in its own process, kinds interleaved, {args.repeat} repeats. {os.cpu_count()} cores "
             f"shared with other work: load average {load_start[0]:.2f} / {load_start[1]:.2f} / {load_start[2]:.2f} "
             f"at the start, {load_end[0]:.2f} / {load_end[1]:.2f} / {load_end[2]:.2f} at the end, so the ratios "
             "are indicative only.", "",
             "| run | wall [s], each repeat | fastest [s] | CPU [s] of the run process, median | CPU [s] of the "
             "cluster's processes, median | cluster start [s] |",
             "|---|---|---|---|---|---|"]
    names = {"threads": "threads (2)", "cluster_1": "cluster, 1 worker process x 1 thread",
             "cluster_2": "cluster, 2 worker processes x 1 thread"}
    for kind in KINDS:
        starts = [r["cluster_start_s"] for r in runs if r["kind"] == kind and "cluster_start_s" in r]
        lines.append(f"| {names[kind]} | {', '.join(str(w) for w in walls[kind])} | {fastest[kind]} | "
                     f"{cpu(kind, 'run_process_cpu_s'):.1f} | {cpu(kind, 'cluster_processes_cpu_s'):.1f} | "
                     f"{', '.join(str(s) for s in starts) or '-'} |")
    lines += ["", "Model blocks (the baseline's and each member's blocks of cells) per worker process, and the seconds "
              "spent computing them, each cluster run: " + "; ".join(
                  f"{r['kind']} repeat {r['repeat']}: " + ", ".join(
                      f"{w['model_blocks']} blocks {w['model_blocks_s']:.0f} s" for w in r["per_worker"].values())
                  for r in runs if "per_worker" in r) + "."]
    lines += ["", f"Speed-up 1 -> 2 worker processes: {report['speed_up_1_to_2_workers']['fastest']} (fastest runs); "
              f"per repeat {', '.join(str(p) for p in paired)}.",
              f"2-worker cluster against 2 threads (fastest runs): {report['cluster_2_over_threads_fastest']} x the wall time.",
              f"Pixels identical across all {len(runs)} runs (every layer, sha256 of the pixel values): "
              f"{'yes' if identical else 'NO'}.", "",
              "On a cluster the model runs in the workers, which write the computed tiles to staging files; the run "
              "process builds the graphs and then turns the staged files into COGs one after the other (serial, "
              "between the scenario's and each member's dask passes). CPU seconds "
              "are less disturbed by other work on the machine than wall seconds.", ""]
    (RESULTS / "cluster.md").write_text("\n".join(lines))
    print("\n".join(lines))
    shutil.rmtree(SCRATCH, ignore_errors=True)


if __name__ == "__main__":
    main()
