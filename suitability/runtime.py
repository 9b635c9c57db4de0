"""Where and how the dask graphs run: scheduler choice, write locks, GDAL cache, progress bars.

``compute_context(compute_config)`` opens the scheduler named in the config's ``compute`` section and
yields a :class:`Runtime`; everything computed inside the ``with`` block runs there:

- ``threads``: dask's threaded scheduler with ``workers`` threads, no client.
- ``processes`` / ``local-cluster``: a ``distributed.LocalCluster`` of ``workers`` worker processes
  (``threads_per_worker`` threads each, default 1; ``memory_limit`` per worker, default dask's "auto"),
  with a Client; both are closed on exit.
- ``tcp://host:port`` (or ``tls://``): a Client connected to an already running scheduler; only the
  client is closed on exit. Its workers must see the output folder under the same path (a shared filesystem).

GDAL's raster block cache defaults to 5 % of RAM *per process*; with several worker processes that adds
up, so every process gets a limit of :data:`GDAL_CACHE_MB` (256 MB: a few hundred 512 x 512 float32
tiles, small next to a 2 GiB worker): through ``GDAL_CACHEMAX`` in the environment of new worker
processes, and by setting GDAL's limit directly (``rasterio.env.set_gdal_config``, i.e.
``GDALSetCacheMax64``, which works even after the cache is in use) in this process for the threaded
scheduler and on the workers of an existing scheduler. A ``GDAL_CACHEMAX`` the user exported wins; the
limit of this process is restored on exit. Every process that computes blocks also has glibc's malloc
keep freed memory for reuse (:func:`reuse_freed_memory`), which saves the page faults of re-allocating
a block's large arrays.

The model engine (``compute.engine``: "compiled", the numba kernel, or "numpy") is carried by the
:class:`Runtime` (``runtime.engine``), and the pipeline passes it to :func:`suitability.model.evaluate` as
an argument. The compiled kernel runs without numba threads (``nogil``, one block per dask thread or
worker), so no numba threading layer is involved whatever the scheduler: numba's default layer is not safe
when several dask threads call a parallel kernel at once, and one thread per core avoids oversubscription.

Progress bars are ``rich`` bars on stderr, shown only when the caller asks for them. Locally a
``dask.callbacks.Callback`` counts finished tasks; on a distributed client the per-block futures are
polled as they complete (:func:`compute` does that), because local callbacks do not see remote tasks.
"""

from __future__ import annotations

import contextvars
import os
from collections.abc import Iterator, Sequence
from contextlib import contextmanager
from dataclasses import dataclass, field
from typing import Any

import dask
from dask.callbacks import Callback
from dask.utils import SerializableLock

from .config import ENGINES, LOCAL_SCHEDULERS, ComputeConfig, validate_section
from .errors import ConfigError

#: GDAL block cache per process [MB] (see the module docstring for the choice).
GDAL_CACHE_MB = 256
CONNECT_TIMEOUT_S = 10

_ACTIVE_BAR: contextvars.ContextVar[ProgressReport | None] = contextvars.ContextVar("suitability_bar", default=None)


@dataclass
class Runtime:
    """The compute environment of one run.

    scheduler: "threads", "local-cluster" (also used for the "processes" setting) or "distributed"
        (a client to an existing scheduler). client: the distributed Client, None for threads.
    workers: worker threads (threads) or worker processes. chunk_size: cells per chunk side, a multiple of
    512. show_progress: default of :meth:`progress` (the library default is silent). engine: the model
    engine of ``compute.engine``, for :func:`suitability.model.evaluate`.
    """

    scheduler: str
    client: Any | None
    workers: int
    chunk_size: int
    show_progress: bool = False
    address: str | None = field(default=None)
    engine: str = "compiled"

    def threads_per_block(self, shape: tuple[int, int]) -> int:
        """Threads each model block may use on a grid of ``shape``: with the threaded scheduler, the threads
        its blocks leave idle shared out (a 500 x 500 region is one 512 block: measured, one 25.8 s task
        kept one of two threads waiting through a 4-member run); 1 otherwise. Blocks stay ``chunk_size``
        (the output tiles are whole multiples of them, and resampling is done per block)."""
        if self.scheduler != "threads":
            return 1
        blocks = -(-shape[0] // self.chunk_size) * -(-shape[1] // self.chunk_size)
        return max(1, self.workers // blocks)

    def write_lock(self, name: str):
        """A lock shared by every writer of the named output, valid on this runtime's workers."""
        return write_lock(name, client=self.client)

    def progress(self, description: str, enabled: bool | None = None, *, steps: int | None = None):
        """A progress bar around the computes inside the ``with`` block, or of ``steps`` steps the caller
        advances (see :func:`progress`)."""
        return progress(description, enabled=self.show_progress if enabled is None else enabled, steps=steps)

    def compute(self, *collections):
        """Compute dask collections here, driving the active progress bar (see :func:`compute`)."""
        return compute(*collections)


@contextmanager
def compute_context(compute_config: Any = None, *, progress: bool = False) -> Iterator[Runtime]:
    """Open the scheduler named by ``compute_config`` and yield the :class:`Runtime`; close it on exit.

    compute_config: the config's ``compute`` section (:class:`~suitability.config.ComputeConfig`, used as
        validated), or any object or mapping with some of its keys (``scheduler``, ``workers``,
        ``threads_per_worker``, ``memory_limit``, ``chunk_size``, ``engine``), checked by the same schema;
        missing keys take the defaults (threads, all cores, 1 thread per worker, "auto", 512, "compiled").
    progress: whether :meth:`Runtime.progress` shows bars by default.
    Raises ConfigError naming the ``compute.*`` key when a value cannot be used.
    """
    settings = validate_section(ComputeConfig, compute_config if compute_config is not None else {}, "compute")
    yield from _open_scheduler(settings, progress)


def _open_scheduler(settings: ComputeConfig, progress: bool):
    scheduler, chunk_size, engine = settings.scheduler, settings.chunk_size, settings.engine
    workers = settings.workers or os.cpu_count() or 1
    threads_per_worker = settings.threads_per_worker or 1
    memory_limit = settings.memory_limit
    if scheduler == "threads":
        reuse_freed_memory()
        with _gdal_cache_in_this_process(), dask.config.set(scheduler="threads", num_workers=workers):
            yield Runtime("threads", None, workers, chunk_size, progress, engine=engine)
    elif scheduler in ("processes", "local-cluster"):
        from distributed import Client, LocalCluster

        with LocalCluster(
            n_workers=workers,
            threads_per_worker=threads_per_worker,
            processes=True,
            memory_limit=memory_limit or "auto",
            dashboard_address=":0",  # any free port: several runs (or users) may share the machine
            env={} if "GDAL_CACHEMAX" in os.environ else {"GDAL_CACHEMAX": str(GDAL_CACHE_MB)},
        ) as cluster, Client(cluster, set_as_default=True) as client:
            client.run(reuse_freed_memory)
            yield Runtime("local-cluster", client, workers, chunk_size, progress, cluster.scheduler_address, engine)
    else:  # the schema allows only a tcp:// or tls:// scheduler address besides the local schedulers
        from distributed import Client

        try:
            # A server that accepts the connection but never answers would keep Client() waiting for ever
            # (its timeout covers only the connection): ask the scheduler who it is, with a deadline, first.
            _probe_scheduler(scheduler, CONNECT_TIMEOUT_S)
            client = Client(scheduler, timeout=CONNECT_TIMEOUT_S, set_as_default=True)
        except (OSError, TimeoutError) as error:
            raise ConfigError(
                f"compute.scheduler: cannot reach the dask scheduler at {scheduler} within {CONNECT_TIMEOUT_S} s "
                f"({error}); start it first or choose one of {list(LOCAL_SCHEDULERS)}"
            ) from error
        try:
            client.run(_limit_gdal_cache, GDAL_CACHE_MB)
            client.run(reuse_freed_memory)
            n_workers = len(client.scheduler_info().get("workers", {}))
            yield Runtime("distributed", client, n_workers, chunk_size, progress, scheduler, engine)
        finally:
            client.close()


def _probe_scheduler(address: str, timeout: float) -> None:
    """Connect to ``address`` and ask for its identity, all within ``timeout`` seconds (plus one for the
    thread); raises TimeoutError when it does not answer, OSError when it cannot be reached."""
    import asyncio
    import concurrent.futures

    async def identity():
        from distributed.comm import connect
        from distributed.security import Security

        comm = await asyncio.wait_for(
            connect(address, timeout=timeout, **Security().get_connection_args("client")), timeout)
        try:
            await asyncio.wait_for(comm.write({"op": "identity", "reply": True}), timeout)
            reply = await asyncio.wait_for(comm.read(), timeout)
        finally:
            comm.abort()
        if not isinstance(reply, dict) or reply.get("type") != "Scheduler":
            raise OSError(f"{address} answered, but not as a dask scheduler")

    # In a thread of its own: the caller may already run an event loop (a notebook).
    pool = concurrent.futures.ThreadPoolExecutor(max_workers=1)
    try:
        pool.submit(asyncio.run, identity()).result(timeout=2 * timeout + 1)
    except (asyncio.TimeoutError, concurrent.futures.TimeoutError):
        raise TimeoutError(f"no answer within {timeout} s") from None
    finally:
        pool.shutdown(wait=False)


def active_client():
    """The distributed Client that dask would use for a compute now, or None for a local scheduler."""
    try:
        from distributed import default_client
    except ImportError:  # pragma: no cover - distributed is a dependency
        return None
    try:
        client = default_client()
    except ValueError:
        return None
    # dask.config.set(scheduler="threads") inside a client's lifetime wins over the client.
    return client if dask.base.get_scheduler() == client.get else None


def write_lock(name: str, client: Any | None = None):
    """A lock named ``name`` that serialises writes to one file, for the scheduler that will run them.

    With a distributed client: ``distributed.Lock(name)`` (held on the scheduler, so it works across
    worker processes and machines). Otherwise a ``dask.utils.SerializableLock(name)``: a threading lock
    that survives pickling (same name, same lock within a process), unlike ``threading.Lock``.
    """
    client = client if client is not None else active_client()
    if client is not None:
        from distributed import Lock

        return Lock(name)
    return SerializableLock(name)


def compute(*collections):
    """Compute dask collections in one pass on the active scheduler and return their results.

    Locally this is ``dask.compute`` (a :func:`progress` bar counts tasks through a dask callback). With a
    distributed client the collections are persisted together (so a graph they share runs once), each
    output block's future (one per chunk of an array, one per Delayed) is awaited as it completes to
    advance the active bar, the first failure cancels the rest and is raised, and the results are gathered.
    """
    client = active_client()
    if client is None:
        return dask.compute(*collections)
    from distributed import as_completed, futures_of

    persisted = client.persist(list(collections))
    futures = futures_of(persisted)
    bar = _ACTIVE_BAR.get()
    if bar is not None:
        bar.add_total(len(futures))
    try:
        for future in as_completed(futures):
            if future.status == "error":
                future.result()  # raises the task's exception here
            if bar is not None:
                bar.advance(1)
        return tuple(client.compute(persisted, sync=True))
    except BaseException:
        client.cancel(futures)
        raise


@dataclass
class ProgressReport:
    """Handle of one progress bar: how many steps are done out of how many (tasks or blocks)."""

    _progress: Any
    _task: Any

    @property
    def completed(self) -> float:
        return self._progress.tasks[0].completed

    @property
    def total(self) -> float | None:
        return self._progress.tasks[0].total

    def add_total(self, steps: int) -> None:
        self._progress.update(self._task, total=(self.total or 0) + steps)

    def advance(self, steps: int = 1) -> None:
        self._progress.advance(self._task, steps)


class _TaskCounter(Callback):
    """Advances a bar by one for every task finished by dask's local schedulers."""

    def __init__(self, report: ProgressReport):
        super().__init__()
        self._report = report

    def _start_state(self, dsk, state):
        self._report.add_total(sum(len(state[k]) for k in ("ready", "waiting", "running", "finished")))

    def _posttask(self, key, result, dsk, state, worker_id):
        self._report.advance(1)


@contextmanager
def progress(description: str, enabled: bool = True, *, console=None,
             steps: int | None = None) -> Iterator[ProgressReport | None]:
    """Show a ``rich`` progress bar on stderr for the dask computes inside the ``with`` block.

    description: text before the bar. enabled: False yields None and shows nothing (the library never
    writes to the terminal unless asked). console: a ``rich.console.Console`` to draw on (default: stderr).
    steps: a bar of this many steps that the caller advances (:meth:`ProgressReport.advance`) instead of
    one that counts dask tasks (work that is not a dask graph, such as the briefs' pages).
    Yields a :class:`ProgressReport`. Local schedulers are followed task by task through a dask callback;
    with a distributed client, computes made through :func:`compute` advance it block by block.
    """
    if not enabled:
        yield None
        return
    from rich.console import Console
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeElapsedColumn

    bar = Progress(
        TextColumn("{task.description}"),
        BarColumn(),
        MofNCompleteColumn(),
        TimeElapsedColumn(),
        console=console if console is not None else Console(stderr=True),
    )
    report = ProgressReport(bar, bar.add_task(description, total=steps))
    if steps is not None:  # the caller's steps: dask computes inside neither count nor advance this bar
        with bar:
            yield report
        return
    token = _ACTIVE_BAR.set(report)
    try:
        with bar:
            if active_client() is None:
                with _TaskCounter(report):
                    yield report
            else:
                yield report
    finally:
        _ACTIVE_BAR.reset(token)


#: glibc's malloc maps a block above this size [bytes] from the system for each allocation and unmaps it
#: when freed; smaller ones come from the heap and are reused. 32 MiB, the upper bound of glibc's own
#: sliding threshold on 64-bit systems (mallopt(3), DEFAULT_MMAP_THRESHOLD_MAX; from memory): a block's
#: monthly float64 array of 512 x 512 x 12 cells (24 MiB) then stays in the heap.
MMAP_THRESHOLD_BYTES = 32 * 2**20
#: Freed memory at the top of glibc's heap kept for reuse before it is given back to the system [bytes].
TRIM_THRESHOLD_BYTES = 256 * 2**20


def reuse_freed_memory() -> bool:
    """Have glibc's malloc keep freed memory for reuse in this process (mallopt(3): M_MMAP_THRESHOLD fixed
    at :data:`MMAP_THRESHOLD_BYTES`, M_TRIM_THRESHOLD at :data:`TRIM_THRESHOLD_BYTES`); True if set.

    Why: a model block allocates and frees dozens of arrays of tens of MiB. By default glibc returns them
    to the system and the next allocation faults every page in again: on the 2-core virtual machine of the
    benchmarks one 0.04 s array operation took 0.6 s of page faults, and a 1000² run spent 19-20 system
    CPU seconds against 10-12 with this (`benchmarks/results/freed_memory.md`; its peak memory is about
    110 MiB higher, as the heap fragments). Not done where the C library is not glibc, nor where
    the user set ``MALLOC_MMAP_THRESHOLD_`` or ``MALLOC_TRIM_THRESHOLD_`` (theirs win). The setting stays
    for the life of the process: glibc has no call that reads the previous one back.
    """
    import platform

    if platform.system() != "Linux" or platform.libc_ver()[0] != "glibc":
        return False
    if any(name in os.environ for name in ("MALLOC_MMAP_THRESHOLD_", "MALLOC_TRIM_THRESHOLD_")):
        return False
    import ctypes

    try:
        mallopt = ctypes.CDLL("libc.so.6").mallopt
    except (OSError, AttributeError):
        return False
    m_trim_threshold, m_mmap_threshold = -1, -3  # <malloc.h>
    return bool(mallopt(m_mmap_threshold, MMAP_THRESHOLD_BYTES)) and bool(mallopt(m_trim_threshold,
                                                                                TRIM_THRESHOLD_BYTES))


def give_back_freed_memory() -> bool:
    """Return the freed memory glibc's malloc keeps for reuse to the system (malloc_trim(3) with no pad:
    every arena, and whole free pages inside the heap too); True if called.

    Called between the phases of a run that allocate differently, after a dask pass and before the COG
    conversions: what the pass's blocks freed stays resident under :func:`reuse_freed_memory`, and GDAL's
    allocations do not fit the holes the blocks left. Synthetic region at 4000² cells, 3 scenarios: 1361 MiB
    resident after the pass, and the conversions peaked at 1785 MiB, above the pass's own 1386; given
    back, 470 MiB after the pass and 972 MiB in the conversions. Does nothing where the C library is not glibc.
    """
    import platform

    if platform.system() != "Linux" or platform.libc_ver()[0] != "glibc":
        return False
    import ctypes

    try:
        malloc_trim = ctypes.CDLL("libc.so.6").malloc_trim
    except (OSError, AttributeError):
        return False
    malloc_trim(0)
    return True


def _limit_gdal_cache(megabytes: int) -> int | None:
    """Set GDAL's block cache limit in this process unless GDAL_CACHEMAX is exported; return the old limit [bytes]."""
    if "GDAL_CACHEMAX" in os.environ:
        return None
    from rasterio.env import get_gdal_config, set_gdal_config

    previous = get_gdal_config("GDAL_CACHEMAX")  # rasterio reports GDALGetCacheMax64(), in bytes
    set_gdal_config("GDAL_CACHEMAX", megabytes * 2**20)  # an int goes to GDALSetCacheMax64(), in bytes
    return previous


@contextmanager
def _gdal_cache_in_this_process() -> Iterator[None]:
    previous = _limit_gdal_cache(GDAL_CACHE_MB)
    try:
        yield
    finally:
        if isinstance(previous, int):
            from rasterio.env import set_gdal_config

            set_gdal_config("GDAL_CACHEMAX", previous)


__all__: Sequence[str] = (
    "Runtime",
    "compute_context",
    "compute",
    "progress",
    "write_lock",
    "active_client",
    "ProgressReport",
    "GDAL_CACHE_MB",
    "ENGINES",
)
