"""Compiling the kernel in a child process (suitability.kernel.ahead).

The memory figures are this project's own measurements (2026-12-04, 2-core benchmark machine: compiling
the entry point peaked at 2.36 GB, loading it from the cache at 250 MB); the bounds below sit far from both.
"""

from __future__ import annotations

import dataclasses
import importlib.util
import json
import os
import subprocess
import sys
import textwrap
from pathlib import Path

import numba
import pytest

from suitability.kernel import ahead, pathway_tables
from suitability.physiology.models import LEAF_MODELS

#: The leaf models of the default parameter sets (the registry's own objects).
C3_MODEL, C4_MODEL = pathway_tables("C3").model, pathway_tables("C4").model

REPO = Path(__file__).resolve().parents[1]


def _tiny_cached_function(folder: Path):
    """A small numba function with an on-disk cache in ``folder`` (a module file of its own)."""
    path = folder / "tiny_kernel_module.py"
    path.write_text("import numba\n\n@numba.njit(cache=True)\ndef twice(x):\n    return 2.0 * x\n")
    spec = importlib.util.spec_from_file_location("tiny_kernel_module", path)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module.twice


def test_is_cached_tells_an_empty_cache_from_a_filled_one(tmp_path, monkeypatch):
    monkeypatch.setattr(numba.config, "CACHE_DIR", str(tmp_path / "cache"))
    twice = _tiny_cached_function(tmp_path)
    assert ahead.is_cached(twice) is False
    assert twice(2.0) == 4.0  # compiles and writes the cache
    assert ahead.is_cached(twice) is True


def test_is_cached_is_unknown_without_a_cache():
    assert ahead.is_cached(numba.njit(lambda x: x)) is None  # no on-disk cache at all


def test_compile_ahead_starts_the_child_only_when_the_cache_lacks_the_entry(tmp_path, monkeypatch):
    calls = []

    def fake_run(command, **options):
        calls.append((command, options["env"]))
        return subprocess.CompletedProcess(command, 0)

    monkeypatch.setattr(ahead.subprocess, "run", fake_run)
    monkeypatch.delenv(ahead.IN_PROCESS_VARIABLE, raising=False)
    monkeypatch.setattr(numba.config, "CACHE_DIR", str(tmp_path / "cache"))
    twice = _tiny_cached_function(tmp_path)
    assert ahead.compile_ahead(twice, C3_MODEL, C4_MODEL) is False  # the fake child wrote nothing
    (command, env), = calls
    assert command[1:] == ["-m", "suitability.kernel.ahead", C3_MODEL.name, C4_MODEL.name]
    assert env[ahead.IN_PROCESS_VARIABLE] == "1"  # the child compiles in its own process, not in another child
    assert env["PYTHONPATH"].split(os.pathsep)[0] == str(REPO)  # this tree's package, whatever is installed
    twice(1.0)
    assert ahead.compile_ahead(twice, C3_MODEL, C4_MODEL) is True
    assert len(calls) == 1  # cached: no child


def test_a_failing_child_leaves_the_compiling_to_the_caller(tmp_path, monkeypatch):
    def failing_run(command, **options):
        raise subprocess.CalledProcessError(1, command)

    monkeypatch.setattr(ahead.subprocess, "run", failing_run)
    monkeypatch.delenv(ahead.IN_PROCESS_VARIABLE, raising=False)
    monkeypatch.setattr(numba.config, "CACHE_DIR", str(tmp_path / "cache"))
    twice = _tiny_cached_function(tmp_path)
    with pytest.warns(RuntimeWarning, match="compiling it in this process instead"):
        assert ahead.compile_ahead(twice, C3_MODEL, C4_MODEL) is False
    assert twice(3.0) == 6.0  # compiled here instead


def test_models_a_new_process_would_not_see_are_compiled_by_the_caller(tmp_path, monkeypatch):
    def no_child(command, **options):
        raise AssertionError("no child process expected")

    monkeypatch.setattr(ahead.subprocess, "run", no_child)
    monkeypatch.delenv(ahead.IN_PROCESS_VARIABLE, raising=False)
    monkeypatch.setattr(numba.config, "CACHE_DIR", str(tmp_path / "cache"))
    twice = _tiny_cached_function(tmp_path)
    replaced = dataclasses.replace(C4_MODEL)  # same name, not the registry's object
    assert LEAF_MODELS[C4_MODEL.name] is C4_MODEL and replaced is not C4_MODEL
    assert ahead.compile_ahead(twice, C3_MODEL, replaced) is False
    registered_now = dataclasses.replace(C4_MODEL, name="registered_at_run_time")
    monkeypatch.setitem(LEAF_MODELS, registered_now.name, registered_now)  # in the registry, but only here
    assert ahead.compile_ahead(twice, C3_MODEL, registered_now) is False


@pytest.mark.slow
def test_a_fresh_cache_is_filled_by_a_child_and_the_caller_stays_small(tmp_path):
    """A process whose kernel cache is empty: the first call compiles in a child (about 100 s), and the
    process itself stays at the size of a cached load; the child wrote the cache."""
    script = textwrap.dedent("""
        import json, resource, sys
        import numpy as np
        from suitability import kernel
        day = kernel.monthly_canopy_assimilation(
            tmin_c=np.full((3, 1), 15.0), tmax_c=np.full((3, 1), 28.0), shortwave_mj=np.full((3, 1), 22.0),
            water_availability=np.ones((3, 1)), latitude_deg=np.zeros(3), day_of_year=[196], co2_ppm=420.0)
        hwm = [int(l.split()[1]) // 1024 for l in open("/proc/self/status") if l.startswith("VmHWM")][0]
        child = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss // 1024
        print(json.dumps({"own_mib": hwm, "child_mib": child, "c4_net": float(day.c4_net[0, 0])}))
    """)
    cache = tmp_path / "numba_cache"
    env = {k: v for k, v in os.environ.items() if k != ahead.IN_PROCESS_VARIABLE}
    env.update(NUMBA_CACHE_DIR=str(cache), PYTHONPATH=str(REPO))
    done = subprocess.run([sys.executable, "-c", script], env=env, capture_output=True, text=True, timeout=1500)
    assert done.returncode == 0, done.stderr[-2000:]
    figures = json.loads(done.stdout.strip().splitlines()[-1])
    assert figures["c4_net"] > 0  # the kernel ran
    assert figures["child_mib"] > 1000  # the compiler ran in the child (2.3 GB measured)
    assert figures["own_mib"] < 700  # a cached load: 250 MB measured; compiling here: 2.36 GB
    assert list(cache.rglob("*.nbc")) and list(cache.rglob("*.nbi"))
