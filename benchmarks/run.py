"""`make bench`: the compiled kernel against the numpy engine, and end-to-end runs on a size series.

1. Kernel: the compiled engine (suitability.kernel, the production path) against the numpy engine, the
   package's vectorised numpy evaluation of the same equation functions (suitability.physiology; the
   yardstick, target >= 8x per core), side by side in this process on the same invented cells
   (benchmarks/synthetic.py). For reference also the independent hand-written numpy test oracle
   (tests/oracle_canopy.py). Results are compared (1e-4 target) and the daily integral is checked
   against the 96-step reference (0.5 % target). The SIMD width the compiler had is reported.
2. End to end: `suitability run` on the invented synthetic region for each size (size² cells x 12 months
   x 3 scenarios, every layer, COG outputs), each in its own process; wall time, cell-steps/s and the
   peak resident memory the operating system reports for that process (ru_maxrss, through benchmarks/child_usage.py).
3. Parameter draws (config ``uncertainty``): the model on one in-memory block without draws and with N
   draws, and the kernel alone on the same cells; the cost of one more draw is (with - without) / N, given
   as a ratio to the kernel alone (1.0 = a draw costs exactly one kernel call), also with paired draws.
4. Results: benchmarks/results/latest.json and latest.md (a markdown table).

Timings are measurements of this machine at this moment (other work on it shows up in them); ratios
are measured side by side in one run. Nothing here asserts a timing.

Usage: python benchmarks/run.py [--sizes 500 1000 2000 4000] [--kernel-cells 131072] [--draws 16] [--quick]
                                [--no-simd-check]
       python benchmarks/run.py --draws-only      # only part 3
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import re
import shutil
import subprocess
import sys
import time
from concurrent.futures import ThreadPoolExecutor
from datetime import datetime, timezone
from importlib import metadata
from pathlib import Path

import numpy as np
import yaml

REPO = Path(__file__).resolve().parents[1]
if str(REPO) not in sys.path:
    sys.path.insert(0, str(REPO))

from benchmarks.child_usage import MeasuredChild  # noqa: E402
from benchmarks.synthetic import cell_inputs, write_region  # noqa: E402
from tests.oracle_canopy import monthly_canopy  # noqa: E402

RESULTS = REPO / "benchmarks" / "results"
SCRATCH = RESULTS / "tmp"
#: Leaf evaluations per cell-step and pathway: sunlit + shaded at 14 daylight moments, one dark leaf at 3.
LEAF_EVALUATIONS_PER_CELL_STEP = 2 * 14 + 3
SCENARIOS = 3


def machine() -> dict:
    cpu = "unknown"
    try:
        for line in Path("/proc/cpuinfo").read_text().splitlines():
            if line.startswith("model name"):
                cpu = line.split(":", 1)[1].strip()
                break
    except OSError:
        pass
    memory_gib = None
    try:
        memory_gib = round(os.sysconf("SC_PAGE_SIZE") * os.sysconf("SC_PHYS_PAGES") / 2**30, 1)
    except (ValueError, OSError):
        pass
    versions = {}
    for package in ("numpy", "numba", "llvmlite", "dask", "distributed", "rasterio", "xarray"):
        try:
            versions[package] = metadata.version(package)
        except metadata.PackageNotFoundError:
            versions[package] = None
    return {"platform": platform.platform(), "python": platform.python_version(), "cpu": cpu,
            "cores": os.cpu_count(), "memory_gib": memory_gib, "load_average_at_start": os.getloadavg(),
            "simd": simd_width(), "packages": versions}


def simd_width() -> str:
    """The widest double-precision SIMD the compiler (LLVM, as numba sees this CPU) may use."""
    from llvmlite import binding

    features = binding.get_host_cpu_features()
    for name, width in (("avx512f", "AVX-512 (8 doubles)"), ("avx2", "AVX2 (4 doubles)"), ("sse2", "SSE2 (2 doubles)")):
        if features.get(name):
            return f"{width}, LLVM CPU {binding.get_host_cpu_name()}"
    return f"no x86 SIMD found, LLVM CPU {binding.get_host_cpu_name()}"


#: An AVX2-only x86 target (Haswell: AVX2 and FMA, no AVX-512) for numba's code generation. The CPU name
#: alone is not enough: numba then still passes the host's feature flags (+avx512f ... on this machine) to
#: LLVM (numba/core/codegen.py, ``_get_host_cpu_features``), so the features are given explicitly.
AVX2_TARGET = {
    "NUMBA_CPU_NAME": "haswell",
    "NUMBA_CPU_FEATURES": "+64bit,+avx,+avx2,+bmi,+bmi2,+cmov,+cx16,+cx8,+f16c,+fma,+fsgsbase,+fxsr,+invpcid,"
                          "+lzcnt,+mmx,+movbe,+pclmul,+popcnt,+rdrnd,+sahf,+sse,+sse2,+sse3,+sse4.1,+sse4.2,"
                          "+ssse3,+xsave,+xsaveopt,-avx512f,-avx512bw,-avx512cd,-avx512dq,-avx512vl",
}
_LANES = {"zmm": 8, "ymm": 4, "xmm": 2}


def packed_arithmetic_by_register(asm: str, suffix: str = "pd") -> dict:
    """Packed arithmetic instructions (``v...pd`` for doubles, ``v...ps`` for singles; not moves, gathers,
    shuffles or blends) of an assembly listing, counted by register: zmm, ymm or xmm."""
    widths = {"zmm": 0, "ymm": 0, "xmm": 0}
    for line in asm.splitlines():
        parts = line.split()
        if parts and re.fullmatch(rf"v\w+{suffix}", parts[0]):
            if parts[0].startswith(("vmov", "vbroadcast", "vgather", "vperm", "vshuf", "vunpck", "vblend")):
                continue
            widths["zmm" if "zmm" in line else "ymm" if "ymm" in line else "xmm"] += 1
    return widths


def width_summary(counts: dict) -> dict:
    total = sum(counts.values()) or 1
    widest = next((name for name in ("zmm", "ymm", "xmm") if counts.get(name)), None)
    return {"packed_double_instructions": counts, "widest_register": widest,
            "doubles_per_instruction": _LANES.get(widest), "share_on_widest": counts.get(widest, 0) / total}


def fresh_build_child(time_cells: int, repeats: int) -> None:
    """Run in a child process (``kernel_build``): compile the kernel's default entry point afresh under this
    process's numba settings, print its packed-double instructions by register and, if ``time_cells``, its
    one-thread throughput and that of the numpy engine measured alternately in this process (JSON)."""
    from llvmlite import binding

    from suitability.kernel import compiled_entry, pathway_tables

    cells = cell_inputs(max(time_cells, 64))
    start = time.perf_counter()
    _run_kernel({k: v[:64] for k, v in cells.items()})
    report = {"compile_s": round(time.perf_counter() - start, 1)}
    entry = compiled_entry(pathway_tables("C3", None).model, pathway_tables("C4", None).model)
    codegen = entry.targetctx.codegen()
    report["llvm_cpu"] = codegen._get_host_cpu_name()
    report["host_cpu"] = binding.get_host_cpu_name()
    asm = entry.inspect_asm(entry.signatures[0])
    report.update(width_summary(packed_arithmetic_by_register(asm)))
    # Table lookups vectorise as gathers where LLVM's cost model for the target finds them worth it.
    report["gathers"] = sum(1 for line in asm.splitlines() if line.split()[:1] and line.split()[0].startswith("vgather"))
    if time_cells:
        package_cells = {k: v[:max(1024, time_cells // 32)] for k, v in cells.items()}
        kernel_s = package_s = float("inf")
        for _ in range(repeats):  # alternately, so that both see the same load
            kernel_s = min(kernel_s, best_time(lambda: _run_kernel(cells), 1))
            package_s = min(package_s, best_time(lambda: _package_numpy(package_cells), 1))
        report["kernel_1_thread_cell_steps_per_s"] = time_cells * 12 / kernel_s
        report["package_numpy_engine_1_thread_cell_steps_per_s"] = len(package_cells["latitude"]) * 12 / package_s
        report["accuracy"] = kernel_accuracy(_run_kernel, {k: v[:2048] for k, v in cells.items()})
    print(json.dumps(report))


def kernel_build(target: dict | None = None, time_cells: int = 0, repeats: int = 3, timeout_s: float = 1800.0) -> dict:
    """The kernel compiled afresh in a child process, for this CPU (``target`` None) or with the numba
    settings in ``target`` (e.g. :data:`AVX2_TARGET`), in a throw-away numba cache (the production cache is
    neither used nor written, and its assembly can be read; about a minute on a quiet 2-core machine, up to
    13 minutes measured on a busy one): its packed-double arithmetic
    instructions counted by register (zmm = 8 doubles, ymm = 4, xmm = 2) and, with ``time_cells``, its
    one-thread throughput beside the numpy engine's in the same child."""
    import tempfile

    with tempfile.TemporaryDirectory() as cache:
        # Compiled in that child itself (not in a child of its own, suitability/kernel/ahead.py): the
        # assembly of a kernel loaded from the cache cannot be read.
        environment = dict(os.environ, NUMBA_CACHE_DIR=cache, PYTHONPATH=str(REPO), SUITABILITY_COMPILE_IN_PROCESS="1",
                           **(target or {}))
        code = f"from benchmarks.run import fresh_build_child; fresh_build_child({int(time_cells)}, {int(repeats)})"
        try:
            result = subprocess.run([sys.executable, "-c", code], env=environment, capture_output=True,
                                    text=True, timeout=timeout_s, check=False, cwd=str(REPO))
        except subprocess.TimeoutExpired:
            return {"error": f"no answer within {timeout_s:.0f} s"}
    if result.returncode != 0:
        return {"error": result.stderr[-500:]}
    return json.loads(result.stdout.strip().splitlines()[-1])


def kernel_simd(time_cells: int = 0, timeout_s: float = 1800.0) -> dict:
    """The vector width the compiled kernel actually got on this CPU (:func:`kernel_build`; timed beside
    the numpy engine with ``time_cells``, as the AVX2 build is)."""
    return kernel_build(None, time_cells=time_cells, timeout_s=timeout_s)


def best_time(function, repeats: int) -> float:
    best = float("inf")
    for _ in range(repeats):
        start = time.perf_counter()
        function()
        best = min(best, time.perf_counter() - start)
    return best


def _run_kernel(part: dict, months: slice = slice(None), **options):
    """The compiled kernel on in-memory cells (benchmarks/synthetic.py cell_inputs), both pathways, on
    ``months`` of the 12 (all by default)."""
    from suitability import kernel, model

    return kernel.monthly_canopy_assimilation(
        tmin_c=part["tmin"][:, months], tmax_c=part["tmax"][:, months], shortwave_mj=part["shortwave"][:, months],
        water_availability=part["water_availability"][:, months], latitude_deg=part["latitude"],
        elevation_m=part["elevation"], day_of_year=model.REPRESENTATIVE_DAY[months], co2_ppm=420.0, **options)


def _package_numpy(part: dict) -> None:
    """The numpy engine (the yardstick) on the same cells: the physiology's equations, vectorised."""
    from suitability import model
    from suitability.physiology import canopy

    days = model.REPRESENTATIVE_DAY
    with np.errstate(all="ignore"):
        for month in range(12):
            for pathway in ("C3", "C4"):
                canopy.daily_canopy_assimilation(
                    pathway, tmin_c=part["tmin"][:, month], tmax_c=part["tmax"][:, month],
                    shortwave_mj=part["shortwave"][:, month], latitude_deg=part["latitude"],
                    day_of_year=int(days[month]), co2_ppm=420.0, elevation_m=part["elevation"],
                    water_availability=part["water_availability"][:, month], lai=3.0)


def kernel_accuracy(run_kernel, cells: dict, reference_cells: int = 2000) -> dict:
    """``run_kernel(cells)`` against the independent numpy oracle (tests/oracle_canopy.py; largest difference
    relative to gross assimilation, 1e-4 target) and its daily gross against the 96-step reference
    integration of the same model on the first ``reference_cells`` cells and 4 months (0.5 % target)."""
    from suitability import model
    from suitability.physiology import canopy

    days = model.REPRESENTATIVE_DAY
    result = run_kernel(cells)
    baseline = monthly_canopy(cells, days, 420.0)
    fields = ("c3_net", "c3_gross", "c3_photorespiration", "c4_net", "c4_gross")
    differences = {}
    for i, field in enumerate(fields):
        gross = baseline[1] if field.startswith("c3") else baseline[4]
        got = getattr(result, field)
        differences[field] = float(np.nanmax(np.abs(got - baseline[i]) / np.maximum(np.abs(gross), 1e-12)))
        differences[field + "_nan_pattern_equal"] = bool(np.array_equal(np.isnan(got), np.isnan(baseline[i])))
    reference_errors = {}
    sample = {k: v[:reference_cells] for k, v in cells.items()}
    sample_result = run_kernel(sample)
    with np.errstate(all="ignore"):
        for pathway in ("C3", "C4"):
            worst = 0.0
            for month in (0, 3, 6, 9):
                reference = canopy.daily_canopy_assimilation_reference(
                    pathway, tmin_c=sample["tmin"][:, month].astype(float), tmax_c=sample["tmax"][:, month].astype(float),
                    shortwave_mj=sample["shortwave"][:, month].astype(float), latitude_deg=sample["latitude"].astype(float),
                    day_of_year=int(days[month]), co2_ppm=420.0, elevation_m=sample["elevation"].astype(float),
                    water_availability=sample["water_availability"][:, month].astype(float), lai=3.0, steps=96)
                got = getattr(sample_result, f"{pathway.lower()}_gross")[:, month]
                worst = max(worst, float(np.nanmax(np.abs(got - reference.gross) / np.abs(reference.gross))))
            reference_errors[pathway] = worst
    return {"max_difference_kernel_vs_oracle_relative_to_gross": differences,
            "max_relative_error_of_gross_vs_96_step_reference": reference_errors}


def kernel_benchmark(n_cells: int, n_baseline: int, n_package: int, repeats: int) -> dict:
    from suitability import model

    days = model.REPRESENTATIVE_DAY
    cells = cell_inputs(n_cells)

    start = time.perf_counter()
    _run_kernel({k: v[:64] for k, v in cells.items()})  # compile, or load from numba's cache
    first_call_s = time.perf_counter() - start
    one_thread_s = best_time(lambda: _run_kernel(cells), repeats)
    halves = [{k: v[: n_cells // 2] for k, v in cells.items()}, {k: v[n_cells // 2:] for k, v in cells.items()}]

    def two_threads():
        with ThreadPoolExecutor(2) as pool:
            list(pool.map(_run_kernel, halves))

    two_threads_s = best_time(two_threads, repeats)

    base_cells = {k: v[:n_baseline] for k, v in cells.items()}
    oracle_s = best_time(lambda: monthly_canopy(base_cells, days, 420.0), max(1, repeats - 1))

    package_cells = {k: v[:n_package] for k, v in cells.items()}
    package_s = best_time(lambda: _package_numpy(package_cells), max(1, repeats - 1))

    steps = lambda n: n * 12  # noqa: E731
    kernel_rate = steps(n_cells) / one_thread_s
    oracle_rate = steps(n_baseline) / oracle_s
    package_rate = steps(n_package) / package_s
    return {
        "cells": n_cells, "oracle_cells": n_baseline, "package_numpy_cells": n_package,
        "first_call_s": round(first_call_s, 2),
        "kernel_1_thread_cell_steps_per_s": kernel_rate,
        "kernel_2_threads_cell_steps_per_s": steps(n_cells) / two_threads_s,
        "package_numpy_engine_1_thread_cell_steps_per_s": package_rate,
        "oracle_numpy_1_thread_cell_steps_per_s": oracle_rate,
        "kernel_over_package_numpy_per_core": kernel_rate / package_rate,
        "kernel_over_oracle_numpy_per_core": kernel_rate / oracle_rate,
        "leaf_evaluations_both_pathways_per_s_2_threads": steps(n_cells) / two_threads_s * LEAF_EVALUATIONS_PER_CELL_STEP,
        # Accuracy, on the oracle's cells: kernel vs the independent oracle, and vs the 96-step reference.
        **kernel_accuracy(_run_kernel, base_cells),
    }


def draw_cost_benchmark(n_cells: int, draws: int, repeats: int) -> dict:
    """Seconds of the model on one in-memory block of ``n_cells`` cells without and with ``draws`` parameter
    draws (and paired with a baseline), and of the kernel alone on the same cells; one thread."""
    import xarray as xr

    from suitability import kernel, model

    cells = cell_inputs(n_cells)
    keep = np.isfinite(cells["tmin"]).all(axis=1)  # land cells only, so every cell runs the full model
    cells = {k: v[keep] for k, v in cells.items()}
    n = len(cells["latitude"])
    monthly = {k: (("month", "y", "x"), cells[k].T[:, None, :]) for k in ("tmin", "tmax", "shortwave", "water_availability")}
    static = {k: (("y", "x"), cells[k][None, :]) for k in ("latitude", "elevation")}
    climate = xr.Dataset({**monthly, **static}, coords={"month": np.arange(1, 13)})
    scenario, baseline = {"co2_ppm": 560.0, "temperature_offset_c": 2.0}, {"co2_ppm": 420.0}
    uncertainty = {"draws": draws, "seed": 1}
    model.evaluate(climate.isel(x=slice(0, 64)), scenario, uncertainty={"draws": 2, "seed": 1})  # compile / load
    # the model's default growing season (SeasonConfig), so that the kernel alone computes the same months
    season = (0.5 * (cells["tmin"] + cells["tmax"]) >= 5.0) & (cells["tmin"] >= 0.0)

    def kernel_alone():
        kernel.season_canopy_assimilation(
            tmin_c=cells["tmin"], tmax_c=cells["tmax"], shortwave_mj=cells["shortwave"],
            water_availability=cells["water_availability"], latitude_deg=cells["latitude"],
            elevation_m=cells["elevation"], day_of_year=model.REPRESENTATIVE_DAY, co2_ppm=560.0, in_season=season,
            days_in_month=model.DAYS_IN_MONTH)

    kernel_s = best_time(kernel_alone, repeats)
    without_s = best_time(lambda: model.evaluate(climate, scenario), repeats)
    with_s = best_time(lambda: model.evaluate(climate, scenario, uncertainty=uncertainty), repeats)
    paired_s = best_time(lambda: model.evaluate(climate, scenario, uncertainty=uncertainty, baseline=baseline), repeats)
    per_draw = (with_s - without_s) / draws
    per_paired_draw = (paired_s - without_s) / draws
    return {"cells": n, "draws": draws, "kernel_alone_s": round(kernel_s, 4), "model_without_draws_s": round(without_s, 4),
            "model_with_draws_s": round(with_s, 4), "model_with_paired_draws_s": round(paired_s, 4),
            "one_more_draw_s": round(per_draw, 4), "one_more_paired_draw_s": round(per_paired_draw, 4),
            "draw_over_kernel": round(per_draw / kernel_s, 3), "paired_draw_over_kernel": round(per_paired_draw / kernel_s, 3),
            "model_over_kernel": round(without_s / kernel_s, 3)}


def draws_markdown(d: dict) -> list[str]:
    return [
        "## Parameter draws (one in-memory block, one thread)",
        "",
        f"{d['cells']} land cells x 12 months, {d['draws']} draws; a ratio of 1.0 means one more draw costs "
        "exactly one call of the kernel alone.",
        "",
        "| what | seconds | ratio to the kernel alone |",
        "|---|---|---|",
        f"| kernel alone (season_canopy_assimilation, both pathways) | {d['kernel_alone_s']:.3f} | 1.00 |",
        f"| model, no draws (inputs, kernel, indicators, crossover) | {d['model_without_draws_s']:.3f} | {d['model_over_kernel']:.2f} |",
        f"| model with {d['draws']} draws | {d['model_with_draws_s']:.3f} | |",
        f"| one more draw | {d['one_more_draw_s']:.3f} | {d['draw_over_kernel']:.2f} |",
        f"| one more paired draw (scenario and baseline) | {d['one_more_paired_draw_s']:.3f} | {d['paired_draw_over_kernel']:.2f} |",
        "",
    ]


def end_to_end(size: int, engine: str = "compiled", scenarios: int = SCENARIOS, keep: bool = False,
               crossover: bool = True) -> dict:
    folder = SCRATCH / f"region_{size}_{engine}"
    shutil.rmtree(folder, ignore_errors=True)
    config = write_region(folder, size, scenarios=scenarios, engine=engine, workers=os.cpu_count())
    if not crossover:  # the same run without the canopy crossover layer (physiology.crossover_temperature)
        text = config.read_text()
        settings = yaml.safe_load(text)
        settings["physiology"] = {"crossover_temperature": False}
        config.write_text(text.splitlines()[0] + "\n" + yaml.safe_dump(settings, sort_keys=False))
    command = [str(Path(sys.executable).parent / "suitability"), "run", str(config), "--no-progress"]
    # This tree's package, not whichever one the environment's console script was installed from (an
    # editable install of another checkout would otherwise be measured, and compile its kernel there).
    environment = dict(os.environ, PYTHONPATH=os.pathsep.join(filter(None, [str(REPO), os.environ.get("PYTHONPATH")])))
    start = time.perf_counter()
    child = MeasuredChild(command, stdout=subprocess.PIPE, stderr=subprocess.PIPE, env=environment)
    stdout, stderr = child.process.communicate()
    usage = child.wait()
    wall = time.perf_counter() - start
    code = usage.returncode
    row = {"size": size, "cells": size * size, "engine": engine, "scenarios": scenarios, "crossover": crossover,
           "exit_code": code,
           "wall_s": round(wall, 2), "cpu_s": round(usage.ru_utime + usage.ru_stime, 2),
           "peak_rss_mib": round(usage.ru_maxrss / 1024, 1)}
    row["cell_steps"] = size * size * 12 * scenarios
    row["cell_steps_per_s"] = row["cell_steps"] / wall
    manifest = folder / "out" / "manifest.json"
    if code == 0 and manifest.exists():
        data = json.loads(manifest.read_text())
        row["timings"] = data["timings"]
        row["output_mib"] = round(sum(f.stat().st_size for f in (folder / "out").rglob("*.tif")) / 2**20, 1)
    else:
        row["error"] = (stderr.decode(errors="replace") + stdout.decode(errors="replace"))[-2000:]
    if not keep:
        shutil.rmtree(folder, ignore_errors=True)
    return row


def _simd_line(simd: dict | None) -> str:
    if not simd:
        return "the kernel's vector width was not checked (--no-simd-check)"
    if "error" in simd:
        return f"the kernel's vector width could not be read ({simd['error'][:200]})"
    counts = ", ".join(f"{n} {r}" for r, n in simd["packed_double_instructions"].items())
    return (f"the compiled kernel's packed-double arithmetic is {simd['share_on_widest']:.0%} on {simd['widest_register']} "
            f"({simd['doubles_per_instruction']} doubles per instruction; {counts})")


def _width_cell(build: dict | None) -> str:
    if not build or "error" in build:
        return "not read"
    return f"{build['widest_register']} ({build['share_on_widest']:.0%} of {sum(build['packed_double_instructions'].values())})"


def avx2_markdown(results: dict) -> list[str]:
    """The "AVX2 build" section: the kernel built for an AVX2-only CPU beside the build for this CPU."""
    build = results.get("avx2_build")
    if not build:
        return []
    k = results["kernel"]
    lines = ["## AVX2 build (the kernel compiled for an AVX2-only CPU, side by side with this CPU's build)", ""]
    if "error" in build:
        return lines + [f"The AVX2 build failed: {build['error'][:300]}", ""]
    numpy_main = k["package_numpy_engine_1_thread_cell_steps_per_s"]
    host = results["machine"].get("kernel_simd")
    target = ", ".join(f"{name}={value if len(value) < 40 else value[:37] + '...'}" for name, value in AVX2_TARGET.items())
    lines += [
        f"The AVX2 build is compiled in a child process with {target} (full list in benchmarks/run.py "
        f"AVX2_TARGET; LLVM CPU {build['llvm_cpu']}) and a throw-away numba cache, and timed there on the same "
        f"{k['cells']} cells, alternately with the numpy engine; so is this CPU's build (the fresh compile that "
        "reads its vector width). Packed-double arithmetic instructions of the entry point by register: zmm = 8 "
        "doubles, ymm = 4; gathers: vectorised table lookups.",
        "",
        "| build | widest register (share of packed-double arithmetic) | gathers | kernel, 1 thread, cell-steps/s | "
        "numpy engine, same process | ratio (per core) | ratio to the numpy engine of the main process |",
        "|---|---|---|---|---|---|---|",
    ]
    for name, row in ((f"this CPU ({host.get('llvm_cpu', '')})" if host else "this CPU", host), (f"AVX2 only ({build['llvm_cpu']})", build)):
        if not row or "error" in row or "kernel_1_thread_cell_steps_per_s" not in row:
            lines.append(f"| {name} | {_width_cell(row)} | | not timed | | | |")
            continue
        kernel_rate, numpy_rate = row["kernel_1_thread_cell_steps_per_s"], row["package_numpy_engine_1_thread_cell_steps_per_s"]
        lines.append(f"| {name} | {_width_cell(row)} | {row.get('gathers', '')} | {kernel_rate / 1e6:.2f} M | "
                     f"{numpy_rate / 1e6:.3f} M | {kernel_rate / numpy_rate:.1f} | {kernel_rate / numpy_main:.1f} |")
    if build["packed_double_instructions"].get("zmm"):
        lines += ["", "**The AVX2 build has zmm instructions: the target settings did not take, so its row is not "
                  "an AVX2 build's.**"]
    lines += [
        "",
        f"AVX2 build compile time {build['compile_s']} s. Its accuracy: against the oracle (relative to gross) "
        + ", ".join(f"{f} {v:.1e}" for f, v in build["accuracy"]["max_difference_kernel_vs_oracle_relative_to_gross"].items()
                    if not f.endswith("equal"))
        + "; daily gross vs the 96-step reference "
        + ", ".join(f"{p} {v * 100:.2f} %" for p, v in build["accuracy"]["max_relative_error_of_gross_vs_96_step_reference"].items())
        + ".",
        "",
    ]
    return lines


def markdown(results: dict) -> str:
    if "kernel" not in results:  # --draws-only
        return "\n".join([f"# Benchmark run {results['created']}", ""] + draws_markdown(results["draws"]))
    k = results["kernel"]
    lines = [
        f"# Benchmark run {results['created']}",
        "",
        f"Machine: {results['machine']['cpu']}, {results['machine']['cores']} cores, "
        f"{results['machine']['memory_gib']} GiB; load average at start {results['machine']['load_average_at_start']}; "
        f"SIMD: {results['machine'].get('simd')}; {_simd_line(results['machine'].get('kernel_simd'))}.",
        "Invented inputs (benchmarks/synthetic.py). One cell-step = one cell x one month, both pathways, "
        f"the full daily canopy model ({LEAF_EVALUATIONS_PER_CELL_STEP} leaf evaluations per pathway).",
        "",
        "## Kernel (in memory, side by side)",
        "",
        "| path | threads | cell-steps/s | kernel's ratio to it (per core) |",
        "|---|---|---|---|",
        f"| compiled kernel | 1 | {k['kernel_1_thread_cell_steps_per_s'] / 1e6:.2f} M | |",
        f"| compiled kernel | 2 | {k['kernel_2_threads_cell_steps_per_s'] / 1e6:.2f} M | |",
        f"| numpy engine, the same equation functions (yardstick) | 1 | "
        f"{k['package_numpy_engine_1_thread_cell_steps_per_s'] / 1e6:.3f} M | {k['kernel_over_package_numpy_per_core']:.1f} |",
        f"| independent numpy oracle (tests/oracle_canopy.py) | 1 | "
        f"{k['oracle_numpy_1_thread_cell_steps_per_s'] / 1e6:.3f} M | {k['kernel_over_oracle_numpy_per_core']:.1f} |",
        "",
        f"Leaf evaluations (both pathways) with 2 threads: {k['leaf_evaluations_both_pathways_per_s_2_threads'] / 1e6:.0f} M/s. "
        f"First call (compile or cache load): {k['first_call_s']} s.",
        "",
        "Accuracy: kernel vs the independent oracle, largest difference relative to gross assimilation: "
        + ", ".join(f"{f} {v:.1e}" for f, v in k["max_difference_kernel_vs_oracle_relative_to_gross"].items()
                    if not f.endswith("equal"))
        + "; daily gross vs the 96-step reference: "
        + ", ".join(f"{p} {v * 100:.2f} %" for p, v in k["max_relative_error_of_gross_vs_96_step_reference"].items()) + ".",
        "",
    ]
    lines += avx2_markdown(results)
    lines += [
        "## End to end (`suitability run`, 12 months x N scenarios, all layers, COG)",
        "",
        "Share of kernel: the run's cell-steps/s over the kernel's own 2-thread rate above (same run). The "
        "2-thread rate is a few seconds' measurement: where the machine's other guests took a core then, it is "
        "low and the share high, so the share of twice the 1-thread rate (perfect scaling) is given too.",
        "",
        "| cells | engine | scenarios | crossover layer | wall s | cell-steps/s | share of kernel | share of 2 x 1-thread "
        "kernel | peak RSS MiB | CPU s | outputs MiB |",
        "|---|---|---|---|---|---|---|---|---|---|---|",
    ]
    kernel_rate = k["kernel_2_threads_cell_steps_per_s"]
    ideal_rate = 2 * k["kernel_1_thread_cell_steps_per_s"]
    for row in results.get("end_to_end", []):
        head = f"| {row['size']}² | {row['engine']} | {row['scenarios']} | {'yes' if row.get('crossover', True) else 'no'} |"
        if row.get("exit_code") != 0:
            lines.append(f"{head} failed | | | | | | |")
            continue
        lines.append(f"{head} {row['wall_s']:.1f} | {row['cell_steps_per_s'] / 1e6:.2f} M | "
                     f"{row['cell_steps_per_s'] / kernel_rate:.0%} | {row['cell_steps_per_s'] / ideal_rate:.0%} | "
                     f"{row['peak_rss_mib']:.0f} | {row['cpu_s']:.0f} | {row.get('output_mib', '')} |")
    if "marginal_scenario" in results:
        m = results["marginal_scenario"]
        lines += ["", "## Cost of one more scenario", "",
                  f"At {m['size']}²: ({m['wall_3_s']:.1f} s for 3 scenarios − {m['wall_1_s']:.1f} s for 1) / 2 = "
                  f"{m['per_scenario_s']:.1f} s per additional scenario, against {m['kernel_s']:.1f} s of the kernel "
                  f"alone (2 threads) for its {m['size']}² x 12 cell-steps: **{m['ratio']:.2f}x** the kernel time "
                  "of its own work (the scenario's model pass, canopy crossover of its warmest month, indicators "
                  "and COG writing included)."]
        ideal_s = m["size"] ** 2 * 12 / ideal_rate
        lines += ["", f"Against twice the 1-thread kernel rate ({ideal_s:.1f} s for those cell-steps): "
                  f"{m['per_scenario_s'] / ideal_s:.2f}x."]
        off = m.get("without_crossover")
        if off:
            lines += ["", f"Without the crossover layer: ({off['wall_3_s']:.1f} s − {off['wall_1_s']:.1f} s) / 2 = "
                      f"{off['per_scenario_s']:.1f} s per additional scenario, **{off['ratio']:.2f}x** the kernel time "
                      f"of its own work ({off['per_scenario_s'] / ideal_s:.2f}x against twice the 1-thread rate)."]
    if "draws" in results:
        lines += [""] + draws_markdown(results["draws"])
    return "\n".join(lines) + "\n"


def main() -> None:
    parser = argparse.ArgumentParser(description="suitability benchmarks")
    parser.add_argument("--sizes", type=int, nargs="*", default=[500, 1000, 2000, 4000])
    parser.add_argument("--numpy-engine-size", type=int, default=500,
                        help="also run the numpy engine end to end at this size (0 = skip)")
    parser.add_argument("--kernel-cells", type=int, default=131072)
    parser.add_argument("--quick", action="store_true", help="small sizes, for a smoke test")
    parser.add_argument("--out", type=Path, default=RESULTS)
    parser.add_argument("--no-simd-check", action="store_true",
                        help="skip compiling the kernel afresh to read the vector width it got (about a minute)")
    parser.add_argument("--no-avx2-build", action="store_true",
                        help="skip compiling and timing the kernel for an AVX2-only CPU (about a minute)")
    parser.add_argument("--draws", type=int, default=16, help="parameter draws for the cost of one draw")
    parser.add_argument("--draw-cells", type=int, default=16384, help="cells of the block for the draws' cost")
    parser.add_argument("--draws-only", action="store_true", help="only the cost of parameter draws")
    parser.add_argument("--marginal-size", type=int, default=2000,
                        help="size of the runs with 1 and 3 scenarios for the cost of one more scenario (0 = skip)")
    args = parser.parse_args()
    if args.quick:
        args.sizes, args.kernel_cells, args.numpy_engine_size, args.marginal_size = [256, 512], 16384, 0, 512
    SCRATCH.mkdir(parents=True, exist_ok=True)
    results = {"created": datetime.now(timezone.utc).isoformat(timespec="seconds"), "machine": machine()}
    if args.draws_only:
        print("parameter draws ...", flush=True)
        results["draws"] = draw_cost_benchmark(args.draw_cells, args.draws, repeats=3)
        args.out.mkdir(parents=True, exist_ok=True)
        (args.out / "draws.json").write_text(json.dumps(results, indent=2) + "\n")
        (args.out / "draws.md").write_text(markdown(results))
        print(markdown(results))
        return
    if not args.no_simd_check:
        print("kernel vector width (fresh compile) ...", flush=True)
        results["machine"]["kernel_simd"] = kernel_simd(0 if args.no_avx2_build else args.kernel_cells)
    if not args.no_avx2_build:
        print("kernel built for an AVX2-only CPU (fresh compile, timed) ...", flush=True)
        results["avx2_build"] = kernel_build(AVX2_TARGET, time_cells=args.kernel_cells)
    print("kernel ...", flush=True)
    results["kernel"] = kernel_benchmark(args.kernel_cells, max(2048, args.kernel_cells // 8),
                                         max(1024, args.kernel_cells // 32), repeats=3)
    rows = []
    if args.numpy_engine_size:
        print(f"end to end {args.numpy_engine_size}² numpy engine ...", flush=True)
        rows.append(end_to_end(args.numpy_engine_size, engine="numpy"))
    for size in args.sizes:
        print(f"end to end {size}² ...", flush=True)
        rows.append(end_to_end(size))
        print(f"  {rows[-1].get('wall_s')} s, peak {rows[-1].get('peak_rss_mib')} MiB", flush=True)
    if args.marginal_size:
        size = args.marginal_size
        three = next((r for r in rows if r["size"] == size and r["engine"] == "compiled"), None) or end_to_end(size)
        print(f"end to end {size}², 1 scenario, and 3 and 1 without the crossover layer ...", flush=True)
        one = end_to_end(size, scenarios=1)
        three_off, one_off = end_to_end(size, crossover=False), end_to_end(size, scenarios=1, crossover=False)
        rows += [one, three_off, one_off] + ([three] if three not in rows else [])
        kernel_s = size * size * 12 / results["kernel"]["kernel_2_threads_cell_steps_per_s"]
        per_scenario = (three["wall_s"] - one["wall_s"]) / (SCENARIOS - 1)
        per_scenario_off = (three_off["wall_s"] - one_off["wall_s"]) / (SCENARIOS - 1)
        results["marginal_scenario"] = {"size": size, "wall_3_s": three["wall_s"], "wall_1_s": one["wall_s"],
                                        "per_scenario_s": per_scenario, "kernel_s": kernel_s,
                                        "ratio": per_scenario / kernel_s,
                                        "without_crossover": {"wall_3_s": three_off["wall_s"],
                                                              "wall_1_s": one_off["wall_s"],
                                                              "per_scenario_s": per_scenario_off,
                                                              "ratio": per_scenario_off / kernel_s}}
    results["end_to_end"] = rows
    print("parameter draws ...", flush=True)
    results["draws"] = draw_cost_benchmark(args.draw_cells if not args.quick else 4096, args.draws, repeats=3)
    args.out.mkdir(parents=True, exist_ok=True)
    (args.out / "latest.json").write_text(json.dumps(results, indent=2) + "\n")
    (args.out / "latest.md").write_text(markdown(results))
    print(markdown(results))


if __name__ == "__main__":
    main()
