"""Tests of suitability.runtime: scheduler contexts, write locks, GDAL cache setting, progress bars.

External references: dask's documented configuration and scheduler selection (``dask.config`` keys
"scheduler" and "num_workers", ``dask.base.get_scheduler``), distributed's scheduler information
(``Client.scheduler_info``: workers, nthreads, memory_limit), dask's own ``dask.diagnostics.Profiler``
(one record per executed task) as the independent count of tasks, ``dask.utils.parse_bytes`` for
memory sizes, GDAL's reading of its configuration (``rasterio.env.get_gdal_config``), the
``pickle`` round trip for what must travel to worker processes, and glibc's mallopt(3) behaviour (page
faults counted by ``resource.getrusage``).
"""

from __future__ import annotations

import io
import os
import pickle
import platform
import subprocess
import sys
from types import SimpleNamespace

import dask
import dask.array as da
import numpy as np
import pytest
from dask.diagnostics import Profiler
from dask.utils import SerializableLock, parse_bytes
from rich.console import Console

from suitability import runtime
from suitability.errors import ConfigError
from suitability.runtime import GDAL_CACHE_MB, compute, compute_context, progress, write_lock


def settings(**values):
    base = {"scheduler": "threads", "workers": 2, "threads_per_worker": None, "memory_limit": None, "chunk_size": 512}
    base.update(values)
    return SimpleNamespace(**base)


def test_threads_context_uses_dask_threads_with_the_worker_count(monkeypatch):
    import rasterio.env

    monkeypatch.delenv("GDAL_CACHEMAX", raising=False)
    before = rasterio.env.get_gdal_config("GDAL_CACHEMAX")
    with compute_context(settings(workers=2, chunk_size=1024)) as rt:
        # dask's scheduler selection: the threaded scheduler's get, with num_workers threads
        assert dask.base.get_scheduler() is dask.threaded.get
        assert dask.config.get("num_workers") == 2
        assert rt.client is None and rt.scheduler == "threads" and rt.chunk_size == 1024
        assert isinstance(rt.write_lock("baseline"), SerializableLock)
        # GDAL's own block cache limit (GDALGetCacheMax64, bytes, as rasterio reports it)
        assert rasterio.env.get_gdal_config("GDAL_CACHEMAX") == GDAL_CACHE_MB * 2**20
    assert rasterio.env.get_gdal_config("GDAL_CACHEMAX") == before  # restored on exit


def test_a_users_gdal_cachemax_is_respected(monkeypatch):
    import rasterio.env

    monkeypatch.setenv("GDAL_CACHEMAX", "64")
    before = rasterio.env.get_gdal_config("GDAL_CACHEMAX")
    with compute_context(settings()):
        assert rasterio.env.get_gdal_config("GDAL_CACHEMAX") == before
    assert os.environ["GDAL_CACHEMAX"] == "64"


def test_the_config_models_are_accepted():
    # the pydantic models of suitability.config carry the attributes this module reads
    from suitability.config import CogConfig, ComputeConfig
    from suitability.outputs import CogOptions

    with compute_context(ComputeConfig(scheduler="threads", workers=2, chunk_size=1024)) as rt:
        assert dask.config.get("num_workers") == 2 and rt.chunk_size == 1024
    options = CogOptions.from_any(CogConfig(compression="zstd", level=12, overviews=False))
    assert options.creation_options("float32")["zstd_level"] == 12 and options.overviews is False
    assert options.creation_options("uint8")["predictor"] == 2  # TIFF TN3: horizontal differencing for integers


def test_missing_attributes_take_defaults():
    with compute_context(object()) as rt:
        assert rt.scheduler == "threads" and rt.chunk_size == 512 and rt.workers == (os.cpu_count() or 1)
        assert dask.config.get("num_workers") == rt.workers


@pytest.mark.parametrize(
    "values, key",
    [
        ({"scheduler": "gpu"}, "compute.scheduler"),
        ({"chunk_size": 500}, "compute.chunk_size"),
        ({"workers": 0}, "compute.workers"),
        ({"memory_limit": "lots"}, "compute.memory_limit"),
    ],
)
def test_bad_settings_raise_config_errors_naming_the_key(values, key):
    with pytest.raises(ConfigError, match=key):
        with compute_context(settings(**values)):
            pass


def test_unreachable_scheduler_address_is_a_config_error(monkeypatch):
    import socket

    with socket.socket() as probe:  # a port nobody listens on
        probe.bind(("127.0.0.1", 0))
        port = probe.getsockname()[1]
    monkeypatch.setattr(runtime, "CONNECT_TIMEOUT_S", 2)
    with pytest.raises(ConfigError, match=f"tcp://127.0.0.1:{port}"):
        with compute_context(settings(scheduler=f"tcp://127.0.0.1:{port}")):
            pass


def test_serializable_lock_survives_pickling_as_the_same_lock():
    lock = write_lock("baseline-pathway_class")
    # dask.utils.SerializableLock: unpickled copies with the same token share the underlying lock
    copy = pickle.loads(pickle.dumps(lock))
    assert copy.lock is lock.lock
    with lock:
        assert not copy.acquire(blocking=False)


@pytest.fixture(scope="module")
def cluster_runtime():
    with compute_context(settings(scheduler="processes", workers=2, threads_per_worker=1, memory_limit="1GiB")) as rt:
        yield rt


def test_local_cluster_has_the_requested_workers(cluster_runtime):
    rt = cluster_runtime
    assert rt.scheduler == "local-cluster" and rt.client is not None
    workers = rt.client.scheduler_info()["workers"].values()
    assert len(workers) == 2
    assert all(w["nthreads"] == 1 for w in workers)
    assert all(w["memory_limit"] == parse_bytes("1GiB") for w in workers)
    # worker processes start with the GDAL cache limit: GDAL's own value in each worker, in bytes
    def gdal_cache_limit():
        import rasterio.env

        return rasterio.env.get_gdal_config("GDAL_CACHEMAX")

    assert set(rt.client.run(gdal_cache_limit).values()) == {GDAL_CACHE_MB * 2**20}
    from distributed import Lock

    assert isinstance(rt.write_lock("co2_only"), Lock)
    assert runtime.active_client() is rt.client
    assert isinstance(write_lock("co2_only-pathway_class"), Lock)  # chosen from the active client


def test_local_cluster_compute_matches_numpy_and_drives_the_bar(cluster_runtime):
    values = np.arange(1100 * 700, dtype=np.float64).reshape(700, 1100)
    source = da.from_array(values, chunks=512)
    total = (source * 2).sum()
    doubled = source * 2
    console = Console(file=io.StringIO(), width=100)
    with progress("cluster compute", console=console) as bar:
        result_total, result_doubled = compute(total, doubled)
    assert result_total == (values * 2).sum()  # numpy, the reference
    np.testing.assert_array_equal(result_doubled, values * 2)
    # one step per output block: 1 for the sum, 6 for the 2 x 3 blocks (dask's own npartitions)
    assert bar.total == bar.completed == total.npartitions + doubled.npartitions == 7
    assert "cluster compute" in console.file.getvalue()


def test_local_cluster_compute_raises_the_task_error(cluster_runtime):
    def boom(block):
        raise ValueError("simulated failure on a worker")

    failing = da.ones((1024, 1024), chunks=512).map_blocks(boom, meta=np.array(()))
    with pytest.raises(ValueError, match="simulated failure on a worker"):
        compute(failing)
    # the cluster is still usable afterwards
    assert compute(da.ones(10, chunks=5).sum())[0] == 10


def test_cluster_is_closed_on_exit():
    small = settings(scheduler="local-cluster", workers=1, threads_per_worker=1, memory_limit="512MiB")
    with compute_context(small) as rt:
        client = rt.client
    assert client.status == "closed"
    assert runtime.active_client() is not client


def test_progress_counts_every_task_of_a_local_compute():
    array = da.random.default_rng(0).random((1100, 700), chunks=256)
    console = Console(file=io.StringIO(), width=100)
    with dask.config.set(scheduler="threads"), Profiler() as profiler:
        with progress("local compute", console=console) as bar:
            compute(array.mean(), array.std())
    # dask's Profiler records each executed task once: the bar saw the same number
    assert bar.total == bar.completed == len(profiler.results) > 0
    assert "local compute" in console.file.getvalue()


def test_progress_disabled_prints_nothing(capsys):
    with progress("silent", enabled=False) as bar:
        dask.compute(da.ones(100, chunks=10).sum(), scheduler="threads")
    assert bar is None
    captured = capsys.readouterr()
    assert captured.out == "" and captured.err == ""


def test_runtime_progress_follows_its_default(capsys):
    with compute_context(settings(), progress=False) as rt:
        with rt.progress("quiet by default") as bar:
            rt.compute(da.ones(100, chunks=10).sum())
    assert bar is None
    assert capsys.readouterr().err == ""


def test_progress_of_steps_counts_the_callers_steps_not_dask_tasks():
    # A bar of known steps (the briefs' pages): dask computes inside neither add to it nor advance it.
    console = Console(file=io.StringIO(), width=100)
    with dask.config.set(scheduler="threads"):
        with progress("pages", console=console, steps=3) as bar:
            for _ in range(3):
                compute(da.ones(100, chunks=10).sum())
                bar.advance()
    assert bar.total == 3 and bar.completed == 3
    assert "pages" in console.file.getvalue() and "3/3" in console.file.getvalue()


_FAULTS_OF_A_SECOND_ARRAY = r"""
import resource, sys
import numpy as np
from suitability import runtime
if sys.argv[1] == "reuse":
    assert runtime.reuse_freed_memory()
first = np.ones(3 * 2**20)  # 24 MiB, a block's monthly float64 array (512 x 512 x 12)
del first
before = resource.getrusage(resource.RUSAGE_SELF).ru_minflt
second = np.ones(3 * 2**20)
print(resource.getrusage(resource.RUSAGE_SELF).ru_minflt - before)
"""


@pytest.mark.skipif(sys.platform != "linux" or platform.libc_ver()[0] != "glibc", reason="glibc's malloc only")
def test_freed_block_arrays_are_reused_without_faulting_their_pages_in_again():
    # glibc mallopt(3): a block above M_MMAP_THRESHOLD is unmapped when freed, so the next array of the same
    # size faults its pages in again; with runtime.reuse_freed_memory the
    # freed block stays in the heap and is reused. Each case in a fresh interpreter, so that no earlier
    # allocation of this test process has moved glibc's sliding threshold.
    def faults(mode):
        env = {k: v for k, v in os.environ.items() if not k.startswith("MALLOC_")}
        done = subprocess.run([sys.executable, "-c", _FAULTS_OF_A_SECOND_ARRAY, mode], capture_output=True,
                              text=True, check=True, env=env)
        return int(done.stdout.split()[-1])

    # Counted in faults, not pages: a kernel that maps larger folios per fault needs fewer (463 seen for
    # 24 MiB on the benchmark machine), so compare the two cases in the same kernel.
    default, reused = faults("default"), faults("reuse")
    assert default >= 50 and reused <= default / 10


_RESIDENT_AFTER_FREEING = r"""
import sys
import numpy as np
from suitability import runtime
assert runtime.reuse_freed_memory()
def resident_mib():
    return int([line for line in open("/proc/self/status") if line.startswith("VmRSS")][0].split()[1]) // 1024
kept = [np.ones(2**17) for _ in range(200)]  # 200 arrays of 1 MiB from the heap, every page touched
tail = np.ones(2**10)  # allocated after them, so the freed ones are not at the heap's top
before = resident_mib()
del kept
freed = resident_mib()
if sys.argv[1] == "give_back":
    assert runtime.give_back_freed_memory()
print(before, freed, resident_mib())
"""


@pytest.mark.skipif(sys.platform != "linux" or platform.libc_ver()[0] != "glibc", reason="glibc's malloc only")
def test_freed_memory_kept_for_reuse_is_given_back_between_phases():
    # malloc_trim(3): releases free memory of every arena, also whole free pages inside the heap (glibc
    # 2.8 and later). 200 MiB freed below a live allocation stay resident under reuse_freed_memory (they
    # are under its 256 MiB trim threshold and not at the heap's top) until given back.
    def resident(mode):
        env = {k: v for k, v in os.environ.items() if not k.startswith("MALLOC_")}
        done = subprocess.run([sys.executable, "-c", _RESIDENT_AFTER_FREEING, mode], capture_output=True,
                              text=True, check=True, env=env)
        return [int(value) for value in done.stdout.split()[-3:]]

    before, freed, kept = resident("keep")
    assert freed > before - 20 and kept > before - 20  # freed, but still resident
    before, freed, given_back = resident("give_back")
    assert given_back < before - 180
