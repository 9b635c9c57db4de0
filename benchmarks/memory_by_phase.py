"""Resident memory of one run, phase by phase: where the peak is.

Runs `suitability run` of the INVENTED synthetic region (benchmarks/synthetic.py) at ``--size`` cells per
side (12 months x 3 scenarios, every layer, COG; ``--datacube`` adds the monthly datacube) IN THIS
PROCESS, with a thread that reads this process's resident memory (VmRSS in /proc/self/status) every
0.25 s, and marks the start and end of the run's phases: opening the inputs, the dask pass that computes
and writes the blocks, giving freed memory back, the COG conversions, the briefs. The marks come from
wrapping those functions of `suitability.pipeline` and `suitability.outputs` for this process only; the
run itself is unchanged. Linux only (/proc).

Results: ``results/memory_by_phase_<size>.{json,md}``: the largest sample between consecutive marks, and
VmHWM (the process's own peak) at the end, and the largest child process's peak (the kernel's compiler
runs in a child when numba's cache lacks the kernel: run with an empty ``NUMBA_CACHE_DIR`` to measure a
fresh install's first run). No test asserts a timing or a memory figure from here.
Run: ``python benchmarks/memory_by_phase.py [--size 2000] [--datacube]``.
"""

from __future__ import annotations

import argparse
import json
import resource
import shutil
import subprocess
import sys
import threading
import time
from datetime import datetime, timezone
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(REPO))  # this tree's package, also when run from another checkout to compare
from benchmarks.synthetic import write_region  # noqa: E402

RESULTS = REPO / "benchmarks" / "results"
#: (module, function) pairs whose calls mark the phases.
PHASES = [("pipeline", "load_climate"), ("pipeline", "_compute_scenarios"), ("outputs", "compute"),
          ("outputs", "give_back_freed_memory"), ("outputs", "_convert_all"), ("pipeline", "make_briefs")]


def status_mib(field: str) -> int:
    for line in open("/proc/self/status"):
        if line.startswith(field):
            return int(line.split()[1]) // 1024
    raise KeyError(field)


class Timeline:
    """Samples of (seconds, VmRSS MiB) and marks of (seconds, name, VmRSS MiB)."""

    def __init__(self):
        self.started = time.perf_counter()
        self.samples: list[tuple[float, int]] = []
        self.marks: list[tuple[float, str, int]] = []
        threading.Thread(target=self._sample, daemon=True).start()

    def now(self) -> float:
        return round(time.perf_counter() - self.started, 2)

    def _sample(self) -> None:
        while True:
            self.samples.append((self.now(), status_mib("VmRSS")))
            time.sleep(0.25)

    def mark(self, name: str) -> None:
        self.marks.append((self.now(), name, status_mib("VmRSS")))

    def wrap(self, module, name: str) -> None:
        function = getattr(module, name, None)
        if function is None:  # an older tree (to compare with) may not have every phase
            return

        def marked(*args, **kwargs):
            self.mark(f"{name} starts")
            try:
                return function(*args, **kwargs)
            finally:
                self.mark(f"{name} ends")

        setattr(module, name, marked)

    def between_marks(self) -> list[dict]:
        rows, previous = [], (0.0, "start")
        for at, name, _ in self.marks:
            inside = [rss for t, rss in self.samples if previous[0] <= t <= at]
            rows.append({"from": previous[1], "to": name, "seconds": round(at - previous[0], 2),
                         "largest_rss_mib": max(inside) if inside else None})
            previous = (at, name)
        return rows


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--size", type=int, default=2000)
    parser.add_argument("--datacube", action="store_true")
    args = parser.parse_args()
    commit = subprocess.run(["git", "rev-parse", "--short", "HEAD"], cwd=REPO, capture_output=True,
                            text=True).stdout.strip()  # the code that runs (the checkout may move meanwhile)
    folder = RESULTS / "tmp" / f"memory_by_phase_{args.size}"
    shutil.rmtree(folder, ignore_errors=True)
    config = write_region(folder, args.size, scenarios=3, workers=2, datacube=args.datacube)
    timeline = Timeline()
    import suitability.outputs as outputs
    import suitability.pipeline as pipeline
    from suitability.cli import app

    for module_name, function in PHASES:
        timeline.wrap({"pipeline": pipeline, "outputs": outputs}[module_name], function)
    timeline.mark("run starts")
    app(["run", str(config), "--no-progress"], standalone_mode=False)
    timeline.mark("run ends")
    children_peak = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss // 1024
    result = {"date": datetime.now(timezone.utc).isoformat(timespec="seconds"), "commit": commit,
              "size": args.size, "datacube": args.datacube, "own_peak_mib": status_mib("VmHWM"),
              "children_peak_mib": children_peak,
              "phases": timeline.between_marks(), "marks": timeline.marks, "samples": timeline.samples}
    name = f"memory_by_phase_{args.size}{'_datacube' if args.datacube else ''}"
    (RESULTS / f"{name}.json").write_text(json.dumps(result, indent=1) + "\n")
    lines = [f"# Resident memory by phase ({result['date']}, {commit})", "",
             f"`python benchmarks/memory_by_phase.py --size {args.size}{' --datacube' if args.datacube else ''}`:"
             f" invented synthetic region, {args.size}² cells, 12 months x 3 scenarios, every layer, COG"
             f"{', datacube' if args.datacube else ''}; 2 dask threads; in one process, VmRSS sampled every 0.25 s."
             f" Peak (VmHWM): **{result['own_peak_mib']} MiB**. Largest child process (the kernel compiled"
             f" ahead when numba's cache lacked it, suitability/kernel/ahead.py; 0 if none ran):"
             f" {children_peak} MiB.", "",
             "| from | to | seconds | largest VmRSS MiB |", "|---|---|---|---|"]
    lines += [f"| {r['from']} | {r['to']} | {r['seconds']} | {r['largest_rss_mib']} |" for r in result["phases"]]
    (RESULTS / f"{name}.md").write_text("\n".join(lines) + "\n")
    print("\n".join(lines))
    shutil.rmtree(folder, ignore_errors=True)


if __name__ == "__main__":
    main()
