"""Page faults of re-allocated arrays: a run with and without ``runtime.reuse_freed_memory``, alternately.

``suitability run`` of the INVENTED synthetic region (benchmarks/synthetic.py) at ``--size`` cells per side,
12 months x 3 scenarios, every layer, COG. The run without the setting exports ``MALLOC_TRIM_THRESHOLD_`` at
glibc's default (131072 bytes), which makes ``reuse_freed_memory`` leave glibc as it is. Reports wall, user
and system CPU seconds and the peak resident memory of each run (ru_maxrss, through benchmarks/child_usage.py), and the medians.
Run: ``python benchmarks/freed_memory.py [--size 1000] [--rounds 3] [--crossover]``. No test asserts timings.
"""

from __future__ import annotations

import argparse
import json
import os
import statistics
import subprocess
import sys
import tempfile
import time
from datetime import datetime, timezone
from pathlib import Path

import yaml

REPO = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(REPO))
from benchmarks.child_usage import MeasuredChild  # noqa: E402
from benchmarks.synthetic import write_region  # noqa: E402


def measure(config: Path, env: dict) -> dict:
    command = [sys.executable, "-c", "from suitability.cli import app; app()", "run", str(config), "--no-progress"]
    start = time.perf_counter()
    usage = MeasuredChild(command, env=env, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL).wait()
    if usage.returncode != 0:
        raise RuntimeError(f"run failed: {command}")
    return {"wall_s": round(time.perf_counter() - start, 2), "user_s": round(usage.ru_utime, 2),
            "sys_s": round(usage.ru_stime, 2), "peak_rss_mib": round(usage.ru_maxrss / 1024, 1)}


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--size", type=int, default=1000)
    parser.add_argument("--rounds", type=int, default=3)
    parser.add_argument("--crossover", action="store_true", help="with the crossover layer (default: off)")
    parser.add_argument("--out", type=Path, default=REPO / "benchmarks" / "results" / "freed_memory.json")
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as scratch:
        config = write_region(Path(scratch), args.size)
        data = yaml.safe_load(Path(config).read_text())
        data.setdefault("physiology", {})["crossover_temperature"] = args.crossover
        Path(config).write_text(yaml.safe_dump(data, sort_keys=False))
        base = {k: v for k, v in os.environ.items() if not k.startswith("MALLOC_")}
        cases = {"glibc default": {**base, "MALLOC_TRIM_THRESHOLD_": "131072"}, "reuse_freed_memory": base}
        measure(Path(config), base)  # warm-up: numba cache, file cache
        runs = {name: [] for name in cases}
        for round_ in range(args.rounds):
            for name in (list(cases) if round_ % 2 == 0 else list(cases)[::-1]):
                runs[name].append(measure(Path(config), cases[name]))
                print(name, runs[name][-1], flush=True)
    result = {"created": datetime.now(timezone.utc).isoformat(timespec="seconds"), "size": args.size,
              "crossover": args.crossover, "runs": runs,
              "medians": {name: {key: statistics.median(r[key] for r in rows) for key in rows[0]}
                          for name, rows in runs.items()}}
    args.out.parent.mkdir(parents=True, exist_ok=True)
    args.out.write_text(json.dumps(result, indent=2) + "\n")
    print(json.dumps(result["medians"], indent=1))


if __name__ == "__main__":
    main()
