"""Compiling the kernel in a child process, so that a run never holds the compiler's memory.

Compiling an entry point (:func:`suitability.kernel.compiled_entry`) is a one-off per installation and
per change of an equation, but a heavy one: measured 2026-12-04 on the 2-core benchmark machine, 103 s
and a peak of 2.36 GB resident in the compiling process, of which about 1 GB stays resident afterwards
(numba keeps the compiled library; glibc keeps much of the rest), against 0.8 s and 250 MB when the
entry point is loaded from numba's on-disk cache. Compiled inside a run, that memory came on top of the
run's own for the whole run: a first run of the synthetic region at 8000² cells peaked at 3479 MiB
(benchmarks/results/memory_by_phase_8000_cold_cache.md) against about 1.5 GB with the cache filled.

So when the cache holds no compiled form of an entry point for this machine, :func:`compile_ahead` runs
``python -m suitability.kernel.ahead`` (this module) with the leaf models' names, which compiles the
entry point on one cell and writes the cache, and exits; the run then loads the cached form. Processes
that need the same entry point at once (dask worker processes, pytest-xdist workers) take a lock file
beside the cache first, so one of them compiles and the others load. If the child fails, the caller
compiles in its own process as before (:func:`suitability.kernel.compiled_entry`).
"""

from __future__ import annotations

import contextlib
import os
import subprocess
import sys
import warnings
from pathlib import Path

from ..physiology import c3 as _c3, c4 as _c4  # noqa: F401  (they register the built-in leaf models)
from ..physiology.models import LEAF_MODELS, LeafModel

#: The leaf models a new process registers by importing the package (those registered later, e.g. by a
#: test or a plugin at run time, are compiled by the caller: the child would not know them).
_BUILT_IN = dict(LEAF_MODELS)

#: Environment variable that turns the child process off (compile in the calling process), e.g. where
#: starting processes is not allowed.
IN_PROCESS_VARIABLE = "SUITABILITY_COMPILE_IN_PROCESS"


def is_cached(dispatcher) -> bool | None:
    """Whether numba's on-disk cache holds a compiled form of ``dispatcher`` for this machine and these
    sources (any signature: every call is normalised to one, :func:`suitability.kernel._kernel_array`);
    None where that cannot be told (no cache, or numba's internals differ from 0.5x-0.6x)."""
    cache = getattr(dispatcher, "_cache", None)
    try:
        index = cache._cache_file._load_index()
        codegen = dispatcher.targetctx.codegen()
        return any(cache._index_key(key[0], codegen) == key for key in index)
    except Exception:  # noqa: BLE001 - numba internals: say "unknown" rather than fail a run
        return None


def compile_ahead(dispatcher, c3_model: LeafModel, c4_model: LeafModel, timeout_s: float = 3600.0) -> bool:
    """Compile the entry point of the leaf models ``c3_model`` and ``c4_model`` into the on-disk cache in a
    child process, unless it is cached already; True if the cache then holds it.

    ``dispatcher``: this process's (not yet compiled) entry point, to read and check the cache. Models
    other than the built-in ones (registered or replaced at run time, which a new process would not
    see) are left to the caller, as is everything when :data:`IN_PROCESS_VARIABLE` is set. A
    child that fails is said in a RuntimeWarning, and the caller compiles."""
    known = all(_BUILT_IN.get(model.name) is model for model in (c3_model, c4_model))
    cached = is_cached(dispatcher)
    if not known or os.environ.get(IN_PROCESS_VARIABLE) or cached is not False:
        return bool(cached)
    with _compile_lock(Path(dispatcher._cache._cache_path) / f"{dispatcher.py_func.__name__}.compiling"):
        if is_cached(dispatcher):  # another process compiled it while this one waited
            return True
        package_root = str(Path(__file__).resolve().parents[2])  # this tree, not another installed copy
        env = dict(os.environ, PYTHONPATH=os.pathsep.join(filter(None, [package_root, os.environ.get("PYTHONPATH")])),
                   **{IN_PROCESS_VARIABLE: "1"})
        command = [sys.executable, "-m", "suitability.kernel.ahead", c3_model.name, c4_model.name]
        try:
            subprocess.run(command, env=env, check=True, timeout=timeout_s, stdout=subprocess.DEVNULL,
                           stderr=subprocess.PIPE)
        except (OSError, subprocess.SubprocessError) as error:
            said = (getattr(error, "stderr", None) or b"").decode(errors="replace").strip().splitlines()
            warnings.warn(f"compiling the model kernel in a child process failed ({said[-1] if said else error}); "
                          "compiling it in this process instead (about 100 s and 2.4 GB once)", RuntimeWarning,
                          stacklevel=3)
            return False
    return bool(is_cached(dispatcher))


@contextlib.contextmanager
def _compile_lock(path: Path):
    """An exclusive lock file (POSIX ``flock``; no lock where that is missing or the folder is read-only)."""
    try:
        import fcntl

        handle = open(path, "a")
    except (ImportError, OSError):
        yield
        return
    with handle:
        fcntl.flock(handle, fcntl.LOCK_EX)
        try:
            yield
        finally:
            fcntl.flock(handle, fcntl.LOCK_UN)


def _compile(c3_model: str, c4_model: str) -> None:
    """Compile the entry point of two built-in leaf models by running it on one cell (with a parameter set
    of each; the set's values do not change the compiled code)."""
    import numpy as np

    from . import _run

    _run(2, np.ones(1), tmin_c=np.full((1, 1), 15.0), tmax_c=np.full((1, 1), 25.0), shortwave_mj=np.full((1, 1), 20.0),
         water_availability=np.ones((1, 1)), latitude_deg=np.zeros(1), day_of_year=[196], co2_ppm=420.0,
         c3_params=_params_of(c3_model, "C3"), c4_params=_params_of(c4_model, "C4"))


def _params_of(model: str, pathway: str):
    """A registered parameter set of ``pathway`` whose leaf model is ``model``."""
    from ..physiology.params import PARAMETER_SETS
    from . import pathway_tables

    for name in PARAMETER_SETS[pathway]:
        if pathway_tables(pathway, name).model.name == model:
            return name
    raise SystemExit(f"no registered {pathway} parameter set uses the leaf model {model!r}")


if __name__ == "__main__":
    _compile(*sys.argv[1:3])
