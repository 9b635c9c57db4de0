"""Peak memory of a run on a moderately large region stays bounded (a bound, not a timing).

The region is the invented synthetic grid of benchmarks/synthetic.py at 2560 x 2560 cells (6.6 million)
with one scenario and one season month, so the compute is short but every input, block and output layer
is region-sized. Holding the region's resampled inputs alone would take 5 layers x 12 months x 6.6e6 cells
x 4 bytes = 1.57 GB (1.46 GiB, derived here), on top of the interpreter with the package's libraries
loaded, 243 MiB (measured on the 2-core CI machine), so about 1.70 GiB before any block is computed. The
run, block by block, must stay under 1.75 GiB of peak resident memory as the operating system reports it
for the run's process (ru_maxrss, read through benchmarks/child_usage.py so that this test process's own
memory is not counted in; it is small here, about 100 MiB, so earlier readings were the run's own). It
was 1.5 GiB until the allocator kept freed memory for reuse (suitability.runtime.reuse_freed_memory,
about 110 MiB more at the peak): the same tree then peaked at 1.51 and 1.55 GiB in two of three runs. The issue's target is 2 GiB whatever the region size;
benchmarks/ shows the series.
"""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import pytest

from suitability.variables import layer_names

REPO = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(REPO))
from benchmarks.child_usage import MeasuredChild  # noqa: E402  (the repository root holds benchmarks/)
from benchmarks.synthetic import write_region  # noqa: E402

PEAK_RSS_BOUND_BYTES = 1.75 * 2**30

# A new process runs the pipeline on 6.6 million cells; its peak memory depends on what else runs beside
# it, so `make test` runs it on its own after the parallel part (marker "alone").
pytestmark = [pytest.mark.slow, pytest.mark.alone]


def test_peak_memory_of_a_large_region_stays_under_the_bound(tmp_path):
    config = write_region(tmp_path, 2560, scenarios=1, months=[1], workers=2)
    child = MeasuredChild([Path(sys.executable).parent / "suitability", "run", config, "--no-progress"],
                          stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    stderr = child.process.communicate()[1].decode(errors="replace")
    usage = child.wait()
    assert usage.returncode == 0, stderr[-2000:]
    peak_bytes = usage.ru_maxrss * 1024  # Linux reports kilobytes
    written = sorted(p.name for p in (tmp_path / "out" / "baseline").glob("*.tif"))
    assert len(written) == len(layer_names("seasonal"))  # every seasonal layer of the registry
    assert peak_bytes < PEAK_RSS_BOUND_BYTES, f"peak RSS {peak_bytes / 2**30:.2f} GiB"
