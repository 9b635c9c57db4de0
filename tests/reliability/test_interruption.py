"""Interruption: SIGINT, SIGTERM and SIGKILL during a real `suitability run` leave no file that looks
finished but is not (every file with a final name is a whole, valid COG; no manifest, no class summary;
partial work only under hidden temporary names), and a rerun with --resume completes.

Checked against the project's contract (issue 6, "Interruption, concurrency, resume"; exit codes 130 for
SIGINT and 143 for SIGTERM, documented in suitability/cli.py; 128 + signal number is the POSIX shell
convention for a process ended by a signal). The runs use the invented demo region.
"""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import time
import xml.etree.ElementTree as ET
from pathlib import Path

import pytest
from rio_cogeo.cogeo import cog_validate

from suitability.outputs import STAGING_PREFIX, pam_sidecar_path
from suitability.runlock import LOCK_NAME
from suitability.variables import OUTPUT_LAYERS

from .conftest import SUITABILITY, cli, demo_config, write_config

pytestmark = pytest.mark.slow  # real runs in a new process, interrupted, then resumed


def _long_config(tmp_path, runs_per_pass=1) -> Path:
    # Four scenarios over twelve months on one thread: a few seconds per scenario, so that the signal
    # arrives while the run is still busy even when the machine's other work delays this test process
    # (with six months on two threads a pass took under a second, and a loaded CI machine let the run
    # finish before the signal was sent). One scenario per pass (compute.runs_per_pass) so that the
    # baseline is finished, and kept, before the second is written; with the default all three share
    # one pass and an interruption keeps none of them.
    config = demo_config(months=range(1, 13), scenarios=4, runs_per_pass=runs_per_pass)
    config["compute"]["workers"] = 1
    return write_config(tmp_path, config)


# The run starts as from a terminal: SIGINT at its default disposition and unblocked. A process inherits
# an ignored or blocked SIGINT from its parent (a shell's background job, a test runner's worker), and
# Python then leaves Ctrl-C ignored, as Unix programs should; that is not what these tests are about.
# The wrapper resets both and replaces itself with the run (os.execv keeps the process id).
_AS_FROM_A_TERMINAL = ("import os, signal, sys; signal.signal(signal.SIGINT, signal.SIG_DFL); "
                       "signal.pthread_sigmask(signal.SIG_UNBLOCK, {signal.SIGINT, signal.SIGTERM}); "
                       "os.execv(sys.argv[1], sys.argv[1:])")


def _start(config: Path) -> subprocess.Popen:
    env = {**os.environ, "COLUMNS": "240"}
    return subprocess.Popen([sys.executable, "-c", _AS_FROM_A_TERMINAL, str(SUITABILITY), "run", str(config),
                             "--no-progress"], stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, env=env)


def _signal_state() -> str:
    """This test process's SIGINT disposition and blocked signals, for the failure messages."""
    return (f"[test process: SIGINT handler {signal.getsignal(signal.SIGINT)!r}, blocked "
            f"{sorted(signal.pthread_sigmask(signal.SIG_BLOCK, []))}]")


def _wait_for(predicate, process: subprocess.Popen, timeout: float = 120.0) -> None:
    deadline = time.monotonic() + timeout
    while not predicate():
        if process.poll() is not None:
            raise AssertionError(f"the run ended before the moment to interrupt it: {process.communicate()}")
        if time.monotonic() > deadline:
            process.kill()
            raise AssertionError("timed out waiting for the run to reach the moment to interrupt it")
        time.sleep(0.01)


def _writing_second_scenario(folder: Path):
    return lambda: any((folder / "co2_only").glob(f"{STAGING_PREFIX}*"))


def _visible(folder: Path) -> list[Path]:
    return [p for p in folder.rglob("*") if p.is_file()
            and not any(part.startswith(".") for part in p.relative_to(folder).parts)]


def _assert_nothing_half_finished(folder: Path, baseline_kept: bool = True) -> None:
    names = {str(p.relative_to(folder)) for p in _visible(folder)}
    assert "manifest.json" not in names and "class_summary.csv" not in names, names
    visible = _visible(folder)
    for path in visible:
        if path.name.endswith(".tif.aux.xml"):
            # a class layer's category names (GDAL PAM sidecar), complete: it is written whole and renamed
            # before its raster, so a sidecar may stand alone but never a class raster without its names
            assert OUTPUT_LAYERS[path.name.removesuffix(".tif.aux.xml")].categorical, path
            assert ET.parse(path).getroot().find("PAMRasterBand/CategoryNames") is not None, path
            continue
        assert path.suffix == ".tif", path
        valid, errors, _ = cog_validate(str(path), quiet=True)  # rio-cogeo's COG validator
        assert valid, (path, errors)
        if OUTPUT_LAYERS[path.stem].categorical:
            assert pam_sidecar_path(path) in visible, path
    assert any(n.startswith("baseline/") for n in names) == baseline_kept  # a finished baseline is kept


def _rerun_completes(config: Path, folder: Path, baseline_kept: bool = True) -> None:
    result = cli("run", config, "--no-progress", "--resume")
    assert result.exit_code == 0, result.output
    assert ("Kept from the earlier run (outputs up to date): baseline" in result.output) == baseline_kept
    assert (folder / "manifest.json").exists()
    leftovers = [p for p in folder.rglob(".*")]
    assert leftovers == [], leftovers  # no lock, staging, progress record or temporary file remains


@pytest.mark.parametrize("signum, exit_code, word", [(signal.SIGINT, 130, "interrupted"),
                                                     (signal.SIGTERM, 143, "terminated (SIGTERM)")])
def test_sigint_and_sigterm_clean_up_and_a_rerun_completes(tmp_path, signum, exit_code, word):
    config = _long_config(tmp_path)
    folder = tmp_path / "out"
    process = _start(config)
    _wait_for(_writing_second_scenario(folder), process)
    process.send_signal(signum)
    _, stderr = process.communicate(timeout=120)
    assert process.returncode == exit_code, stderr + _signal_state()
    assert word in stderr and "Traceback" not in stderr
    _assert_nothing_half_finished(folder)
    assert not (folder / LOCK_NAME).exists()  # released on the way out
    assert not list(folder.rglob(f"{STAGING_PREFIX}*"))  # temporary files removed on the way out
    _rerun_completes(config, folder)


def test_sigkill_leaves_only_hidden_temporaries_and_a_rerun_completes(tmp_path):
    config = _long_config(tmp_path)
    folder = tmp_path / "out"
    process = _start(config)
    _wait_for(_writing_second_scenario(folder), process)
    process.kill()
    process.communicate(timeout=60)
    assert process.returncode == -signal.SIGKILL
    _assert_nothing_half_finished(folder)
    assert (folder / LOCK_NAME).exists()  # a killed run cannot clean up: its lock is left, with its dead PID
    _rerun_completes(config, folder)


def test_an_interrupted_shared_pass_keeps_nothing_half_done_and_a_rerun_redoes_it(tmp_path):
    # The default compute.runs_per_pass puts the three scenarios in one pass (they share reading and
    # resampling the climate): SIGINT while it writes leaves no finished-looking file of any of them, and
    # --resume computes the whole pass again.
    config = _long_config(tmp_path, runs_per_pass=None)
    folder = tmp_path / "out"
    process = _start(config)
    _wait_for(_writing_second_scenario(folder), process)
    process.send_signal(signal.SIGINT)
    _, stderr = process.communicate(timeout=120)
    assert process.returncode == 130, stderr + _signal_state()
    _assert_nothing_half_finished(folder, baseline_kept=False)
    _rerun_completes(config, folder, baseline_kept=False)
