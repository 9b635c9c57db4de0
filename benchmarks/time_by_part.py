"""Where the CPU time of one run goes: the kernel of the model pass, the kernel of the crossover solver,
the rest of the model, everything else of the dask pass, the COG conversions (issue 15).

Runs `suitability run` of the INVENTED synthetic region (benchmarks/synthetic.py) at ``--size`` cells per
side (12 months x 3 scenarios, every layer, COG, 2 dask threads) IN THIS PROCESS. A few functions are
wrapped for this process only, each measuring the CPU time of the thread that calls it
(``time.thread_time``; the compiled kernel runs in its caller's thread, without threads of its own):

- ``suitability.kernel.season_canopy_assimilation`` (the compiled kernel): its CPU seconds and the
  cell-months it computed, split by whether the call came from the crossover solver
  (``suitability.model.canopy_crossover``, wrapped to mark its thread);
- ``suitability.model.canopy_crossover`` and ``suitability.model._evaluate_block`` (the model of one block
  of one run: kernel, indicators, crossover), inclusive;
- the dask pass (``suitability.outputs.compute``) and the COG conversions (``outputs._convert_all``): wall
  seconds and the process's CPU seconds (``resource.getrusage``, all threads).

So: "the rest of the dask pass" = the pass's process CPU minus the model of the blocks (reading and
resampling the inputs, applying the scenarios, block writes, dask). Beside the run, in the same process
afterwards, the kernel alone on 1 thread on in-memory cells (``run.py``'s kernel measurement, 12 months
per call) and on the same cells one month per call (as the crossover solver calls it).

Results: ``results/time_by_part_<size>.{json,md}``. The wrappers add a few microseconds per call (a few
thousand calls per run). No test asserts a timing. Run: ``python benchmarks/time_by_part.py [--size 2000]``.
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
from collections import defaultdict
from datetime import datetime, timezone
from pathlib import Path

import numpy as np

REPO = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(REPO))  # this tree's package, also when run from another checkout to compare
from benchmarks.run import _run_kernel, best_time, machine  # noqa: E402
from benchmarks.synthetic import cell_inputs, write_region  # noqa: E402

RESULTS = REPO / "benchmarks" / "results"


def process_cpu_s() -> float:
    usage = resource.getrusage(resource.RUSAGE_SELF)
    return usage.ru_utime + usage.ru_stime


class Accounts:
    """Thread-CPU seconds, calls and cell-months per part; phases' wall and process CPU."""

    def __init__(self):
        self.cpu_s: dict[str, float] = defaultdict(float)
        self.calls: dict[str, int] = defaultdict(int)
        self.cell_months: dict[str, int] = defaultdict(int)
        self.phases: dict[str, dict] = {}
        self._lock = threading.Lock()
        self._local = threading.local()

    def add(self, part: str, cpu: float, cell_months: int = 0) -> None:
        with self._lock:
            self.cpu_s[part] += cpu
            self.calls[part] += 1
            self.cell_months[part] += cell_months

    def in_crossover(self) -> bool:
        return getattr(self._local, "crossover", False)

    def wrap_inclusive(self, module, name: str, part: str, marks_crossover: bool = False) -> None:
        function = getattr(module, name)

        def measured(*args, **kwargs):
            if marks_crossover:
                self._local.crossover = True
            started = time.thread_time()
            try:
                return function(*args, **kwargs)
            finally:
                self.add(part, time.thread_time() - started)
                if marks_crossover:
                    self._local.crossover = False

        setattr(module, name, measured)

    def wrap_kernel(self, module, name: str) -> None:
        function = getattr(module, name)

        def measured(*args, **kwargs):
            started = time.thread_time()
            result = function(*args, **kwargs)
            cpu = time.thread_time() - started
            months = int(np.asarray(kwargs["day_of_year"]).size)
            cells = int(np.asarray(kwargs["tmin_c"]).size) // max(months, 1)
            self.add("kernel, crossover solver" if self.in_crossover() else "kernel, model pass", cpu,
                     cells * months)
            return result

        setattr(module, name, measured)

    def wrap_phase(self, module, name: str) -> None:
        function = getattr(module, name)

        def measured(*args, **kwargs):
            wall, cpu = time.perf_counter(), process_cpu_s()
            try:
                return function(*args, **kwargs)
            finally:
                self.phases[name] = {"wall_s": round(time.perf_counter() - wall, 2),
                                     "process_cpu_s": round(process_cpu_s() - cpu, 2)}

        setattr(module, name, measured)


def kernel_alone(n_cells: int = 65536, repeats: int = 3) -> dict:
    """The kernel on 1 thread on in-memory cells: 12 months per call, and one month per call."""
    cells = cell_inputs(n_cells)
    _run_kernel({k: v[:64] for k, v in cells.items()})  # compiled or loaded from the cache already
    twelve = best_time(lambda: _run_kernel(cells), repeats)

    one = best_time(lambda: [_run_kernel(cells, slice(month, month + 1)) for month in range(12)], repeats)
    return {"cells": n_cells, "twelve_months_per_call_cell_steps_per_cpu_s": n_cells * 12 / twelve,
            "one_month_per_call_cell_steps_per_cpu_s": n_cells * 12 / one}


def markdown(result: dict) -> str:
    cpu, calls, cell_months = result["cpu_s"], result["calls"], result["cell_months"]
    passing, converting = result["phases"]["compute"], result["phases"].get("_convert_all", {})
    run_cpu = result["run_process_cpu_s"]
    kernel_pass, kernel_cross = cpu["kernel, model pass"], cpu.get("kernel, crossover solver", 0.0)
    crossover_rest = cpu.get("crossover solver, inclusive", 0.0) - kernel_cross
    model_rest = cpu["model of a block, inclusive"] - kernel_pass - cpu.get("crossover solver, inclusive", 0.0)
    pass_rest = passing["process_cpu_s"] - cpu["model of a block, inclusive"]
    conversion = converting.get("process_cpu_s", 0.0)
    outside = run_cpu - passing["process_cpu_s"] - conversion
    alone = result["kernel_alone"]
    rows = [
        ("kernel, model pass (12 months per call)", kernel_pass,
         f"{cell_months['kernel, model pass'] / 1e6:.1f} M cell-months in {calls['kernel, model pass']} calls: "
         f"{cell_months['kernel, model pass'] / kernel_pass / 1e6:.2f} M per CPU-s"),
        ("kernel, crossover solver (one month per call)", kernel_cross,
         f"{cell_months.get('kernel, crossover solver', 0) / 1e6:.1f} M cell-months in "
         f"{calls.get('kernel, crossover solver', 0)} calls: "
         f"{cell_months.get('kernel, crossover solver', 0) / max(kernel_cross, 1e-9) / 1e6:.2f} M per CPU-s"),
        ("crossover solver outside the kernel", crossover_rest, "the solver's arithmetic, one-month inputs, indicators"),
        ("rest of the model of a block", model_rest, "kernel arguments, indicators, class layers"),
        ("rest of the dask pass", pass_rest, "reading and resampling the inputs, scenarios, block writes, dask"),
        ("COG conversions", conversion, f"{converting.get('wall_s', 0)} s wall"),
        ("outside the pass and the conversions", outside, "imports, opening and checking the inputs, manifest"),
    ]
    lines = [f"# Where the CPU time of one run goes ({result['date']}, {result['commit']})", "",
             f"`python benchmarks/time_by_part.py --size {result['size']}`: invented synthetic region, "
             f"{result['size']}² cells, 12 months x 3 scenarios, every layer, COG, 2 dask threads, in one process; "
             f"{result['machine']['cpu']}, {result['machine']['cores']} cores, load average at start "
             f"{result['load_average_at_start'][0]:.2f}. Run: {result['run_wall_s']} s wall, {run_cpu} s process CPU; "
             f"the dask pass {passing['wall_s']} s wall, {passing['process_cpu_s']} s CPU.", "",
             "| part | CPU s | share of the run's CPU | note |", "|---|---|---|---|"]
    lines += [f"| {name} | {value:.1f} | {100 * value / run_cpu:.1f} % | {note} |" for name, value, note in rows]
    lines += ["", f"The kernel alone, 1 thread, in memory ({alone['cells']} cells, same process after the run): "
              f"{alone['twelve_months_per_call_cell_steps_per_cpu_s'] / 1e6:.2f} M cell-steps/s with 12 months per "
              f"call, {alone['one_month_per_call_cell_steps_per_cpu_s'] / 1e6:.2f} M with one month per call.", ""]
    return "\n".join(lines)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--size", type=int, default=2000)
    args = parser.parse_args()
    folder = RESULTS / "tmp" / f"time_by_part_{args.size}"
    shutil.rmtree(folder, ignore_errors=True)
    config = write_region(folder, args.size, scenarios=3, workers=2)
    import os

    load = os.getloadavg()
    import suitability.kernel as kernel
    import suitability.model as model
    import suitability.outputs as outputs
    from suitability.cli import app

    accounts = Accounts()
    accounts.wrap_kernel(kernel, "season_canopy_assimilation")
    accounts.wrap_inclusive(model, "canopy_crossover", "crossover solver, inclusive", marks_crossover=True)
    accounts.wrap_inclusive(model, "_evaluate_block", "model of a block, inclusive")
    accounts.wrap_phase(outputs, "compute")
    accounts.wrap_phase(outputs, "_convert_all")
    wall, cpu = time.perf_counter(), process_cpu_s()
    app(["run", str(config), "--no-progress"], standalone_mode=False)
    run_wall, run_cpu = round(time.perf_counter() - wall, 2), round(process_cpu_s() - cpu, 2)
    commit = subprocess.run(["git", "rev-parse", "--short", "HEAD"], cwd=REPO, capture_output=True,
                            text=True).stdout.strip()
    result = {"date": datetime.now(timezone.utc).isoformat(timespec="seconds"), "commit": commit,
              "size": args.size, "machine": machine(), "load_average_at_start": load,
              "run_wall_s": run_wall, "run_process_cpu_s": run_cpu,
              "cpu_s": {k: round(v, 2) for k, v in accounts.cpu_s.items()}, "calls": dict(accounts.calls),
              "cell_months": dict(accounts.cell_months), "phases": accounts.phases, "kernel_alone": kernel_alone()}
    (RESULTS / f"time_by_part_{args.size}.json").write_text(json.dumps(result, indent=1) + "\n")
    text = markdown(result)
    (RESULTS / f"time_by_part_{args.size}.md").write_text(text)
    print(text)
    shutil.rmtree(folder, ignore_errors=True)


if __name__ == "__main__":
    main()
