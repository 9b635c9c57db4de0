"""Concurrency and resume: one run per output folder (lock file with the owner's PID; stale locks of dead
processes taken over), and `run --resume` keeping exactly the scenarios whose outputs and hashes match.

Checked against the project's contract (issue 6, "Interruption, concurrency, resume") and, for the lock,
the Linux flock(2) semantics it relies on (a lock is released when its holder's process ends). The runs
use the invented demo region.
"""

from __future__ import annotations

import json
import os
import shutil
import socket
import subprocess
import sys
import time
from pathlib import Path

import pytest
import rasterio
import yaml

from suitability.errors import OutputError
from suitability.runlock import LOCK_NAME, RunLock, read_lock_owner

from .conftest import DEMO_DATA, EXIT_OUTPUT, SUITABILITY, assert_clean_error, cli, demo_config, write_config


def _dead_pid() -> int:
    child = subprocess.Popen([sys.executable, "-c", "pass"])
    child.wait()  # reaped: the id now names no process (until the kernel reuses it, long after this test)
    return child.pid


# ------------------------------------------------------------------------------------------- the lock itself


def test_a_held_lock_refuses_a_second_holder_with_the_owner_pid(tmp_path):
    with RunLock(tmp_path) as first:
        owner = read_lock_owner(tmp_path)
        assert owner.pid == os.getpid() and owner.host == socket.gethostname()
        with pytest.raises(OutputError) as refused:
            RunLock(tmp_path).acquire()
        assert f"process {os.getpid()} on {socket.gethostname()}" in str(refused.value)
        assert str(first.path) in str(refused.value)
    assert not (tmp_path / LOCK_NAME).exists()  # released and removed
    with RunLock(tmp_path) as again:  # and free for the next run
        assert again.taken_over_from is None


def test_a_lock_held_by_another_live_process_is_respected(tmp_path):
    holder = subprocess.Popen(
        [sys.executable, "-c", "import sys, time; from suitability.runlock import RunLock\n"
         "with RunLock(sys.argv[1]):\n    print('held', flush=True); time.sleep(60)", str(tmp_path)],
        stdout=subprocess.PIPE, text=True,
    )
    try:
        assert holder.stdout.readline().strip() == "held"
        with pytest.raises(OutputError, match=f"process {holder.pid} on"):
            RunLock(tmp_path).acquire()
    finally:
        holder.kill()
        holder.wait()
    # SIGKILL gives the holder no chance to clean up; the kernel still drops its flock (flock(2)).
    assert read_lock_owner(tmp_path).pid == holder.pid
    with RunLock(tmp_path) as taken:
        assert taken.taken_over_from.pid == holder.pid


def test_stale_lock_of_a_dead_process_is_taken_over_by_a_run(tmp_path):
    folder = tmp_path / "out"
    folder.mkdir()
    dead = _dead_pid()
    record = {"pid": dead, "host": socket.gethostname(), "started": "2001-01-01T00:00:00+00:00", "command": "x"}
    (folder / LOCK_NAME).write_text(json.dumps(record))
    result = cli("run", write_config(tmp_path, demo_config(scenarios=1)), "--no-progress")
    assert result.exit_code == 0, result.output
    assert f"taken over from process {dead} on {socket.gethostname()}" in " ".join(result.output.split())
    assert not (folder / LOCK_NAME).exists() and (folder / "manifest.json").exists()


@pytest.mark.slow  # a run in a new process
def test_second_run_into_the_same_folder_refuses_naming_the_lock_and_the_pid(tmp_path):
    config = write_config(tmp_path, demo_config(months=range(1, 5), scenarios=2))
    folder = tmp_path / "out"
    first = subprocess.Popen([str(SUITABILITY), "run", str(config), "--no-progress"], stdout=subprocess.PIPE,
                             stderr=subprocess.PIPE, text=True)
    try:
        deadline = time.monotonic() + 120
        while not (folder / LOCK_NAME).exists() or read_lock_owner(folder) is None:
            assert first.poll() is None, first.communicate()
            assert time.monotonic() < deadline
            time.sleep(0.01)
        second = cli("run", config, "--no-progress", "--overwrite")
        assert_clean_error(second, EXIT_OUTPUT, f"output folder {folder} is in use by another run",
                           f"process {first.pid} on {socket.gethostname()}", f"lock file {folder / LOCK_NAME}")
    finally:
        _, stderr = first.communicate(timeout=300)
    assert first.returncode == 0, stderr  # the first run was not disturbed
    assert (folder / "manifest.json").exists()


# ------------------------------------------------------------------------------------------- resume


def _finished_copy(tmp_path, finished_run, **scenario_changes) -> tuple[Path, Path]:
    """A copy of the finished run, and its config with output there (scenario fields changed if given)."""
    shutil.copytree(finished_run / "out", tmp_path / "out")
    config = yaml.safe_load((finished_run / "config.yaml").read_text())
    config["output"]["folder"] = str(tmp_path / "out")
    for index, changes in scenario_changes.items():
        config["scenarios"][int(index[1:])].update(changes)
    return write_config(tmp_path, config), tmp_path / "out"


def _mtimes(folder: Path, scenario: str) -> dict[str, int]:
    return {p.name: p.stat().st_mtime_ns for p in (folder / scenario).glob("*.tif")}


def _resume(config: Path) -> tuple[str, dict]:
    result = cli("run", config, "--no-progress", "--resume")
    assert result.exit_code == 0, result.output
    return result.output, json.loads((config.parent / "out" / "manifest.json").read_text())


def test_resume_skips_scenarios_whose_outputs_and_hashes_match(tmp_path, finished_run):
    config, folder = _finished_copy(tmp_path, finished_run)
    before = {name: _mtimes(folder, name) for name in ("baseline", "co2_only")}
    output, manifest = _resume(config)
    assert "Kept from the earlier run (outputs up to date): baseline, co2_only" in output
    assert manifest["resumed_scenarios"] == ["baseline", "co2_only"]
    assert {name: _mtimes(folder, name) for name in ("baseline", "co2_only")} == before  # not rewritten


def test_resume_recomputes_a_scenario_whose_config_changed(tmp_path, finished_run):
    config, folder = _finished_copy(tmp_path, finished_run, s1={"co2_ppm": 560})
    baseline_before, changed_before = _mtimes(folder, "baseline"), _mtimes(folder, "co2_only")
    _, manifest = _resume(config)
    assert manifest["resumed_scenarios"] == ["baseline"]
    assert _mtimes(folder, "baseline") == baseline_before
    assert all(_mtimes(folder, "co2_only")[n] > changed_before[n] for n in changed_before)
    with rasterio.open(folder / "co2_only" / "pathway_class.tif") as src:
        assert src.tags()["co2_ppm"] == "560"


def test_resume_recomputes_everything_when_a_baseline_input_changed(tmp_path, finished_run):
    config, folder = _finished_copy(tmp_path, finished_run)
    changed = tmp_path / "elevation.tif"
    shutil.copy(DEMO_DATA / "elevation.tif", changed)
    with rasterio.open(changed, "r+") as dst:  # a corrected DEM: 10 m higher everywhere
        dst.write(dst.read(1) + 10.0, 1)
    cfg = yaml.safe_load(config.read_text())
    cfg["climate"]["elevation"]["path"] = str(changed)
    config.write_text(yaml.safe_dump(cfg))
    _, manifest = _resume(config)
    assert manifest["resumed_scenarios"] == []
    # The same file name with other contents must also count as changed: edit it in place and resume.
    with rasterio.open(changed, "r+") as dst:
        dst.write(dst.read(1) + 10.0, 1)
    _, manifest = _resume(config)
    assert manifest["resumed_scenarios"] == []


def test_resume_recomputes_a_scenario_whose_output_was_damaged(tmp_path, finished_run):
    config, folder = _finished_copy(tmp_path, finished_run)
    damaged = folder / "co2_only" / "pathway_advantage.tif"
    damaged.write_bytes(damaged.read_bytes()[:1000])  # cut off, as by a failed copy
    _, manifest = _resume(config)
    assert manifest["resumed_scenarios"] == ["baseline"]
    with rasterio.open(damaged) as src:
        assert src.read(1).shape == (160, 200)  # whole again


def test_resume_recomputes_a_scenario_whose_category_sidecar_was_lost(tmp_path, finished_run):
    # The class layers' category names (PAM sidecar <name>.tif.aux.xml) are outputs like the rasters:
    # recorded with their checksum, so a lost one makes the scenario be computed again.
    config, folder = _finished_copy(tmp_path, finished_run)
    lost = folder / "co2_only" / "class_transition.tif.aux.xml"
    assert "class_transition.aux.xml" in json.loads((folder / "manifest.json").read_text())["outputs"]["co2_only"]
    lost.unlink()
    _, manifest = _resume(config)
    assert manifest["resumed_scenarios"] == ["baseline"]
    assert "<CategoryNames>" in lost.read_text()  # written again


def test_resume_keeps_old_scenarios_and_computes_a_new_one(tmp_path, finished_run):
    config, folder = _finished_copy(tmp_path, finished_run)
    cfg = yaml.safe_load(config.read_text())
    cfg["scenarios"].append({"name": "warming_only", "co2_ppm": 420, "temperature_offset_c": 3.0})
    config.write_text(yaml.safe_dump(cfg))
    output, manifest = _resume(config)
    assert manifest["resumed_scenarios"] == ["baseline", "co2_only"]
    assert (folder / "warming_only" / "class_transition.tif").exists()
    assert {row["scenario"] for row in manifest["summary"]} == {"baseline", "co2_only", "warming_only"}
