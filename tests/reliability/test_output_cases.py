"""Catalogue, outputs part: a folder that cannot be written, outputs that exist without --overwrite, and a
disk that fills up while writing. Each ends with exit code 4, a message naming the folder or file and
what to do, no traceback, and no file that looks finished but is not.

Checked against the project's contract for bad input (issue 6 catalogue; exit codes in suitability/cli.py).
The runs use the invented demo region (demo_region/README.md).
"""

from __future__ import annotations

import errno
import json
import os
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

from suitability.outputs import BlockWriter

from .conftest import (
    EXIT_OUTPUT,
    PYTHON,
    SUITABILITY,
    assert_clean_error,
    cli,
    demo_config,
    prepare_output_folder,
    snapshot,
    write_config,
)


def _config(tmp_path, folder, runs_per_pass=None) -> Path:
    config = demo_config(runs_per_pass=runs_per_pass)
    config["output"]["folder"] = str(folder)
    return write_config(tmp_path, config)


def test_output_folder_below_a_file_cannot_be_created(tmp_path):
    blocker = tmp_path / "results.zip"
    blocker.write_bytes(b"an archive, not a folder")
    folder = blocker / "out"
    assert_clean_error(cli("run", _config(tmp_path, folder), "--no-progress"), EXIT_OUTPUT,
                       f"output folder {folder} cannot be created or written")
    assert blocker.read_bytes() == b"an archive, not a folder"


@pytest.fixture
def read_only_folder(tmp_path):
    """A folder nobody may write into: mode 555, or for root (who ignores modes) the immutable attribute."""
    folder = tmp_path / "read_only"
    before = prepare_output_folder(folder)
    if os.geteuid() != 0:
        folder.chmod(0o555)
        yield folder, before
        folder.chmod(0o755)
        return
    if shutil.which("chattr") is None or subprocess.run(["chattr", "+i", str(folder)], capture_output=True).returncode:
        pytest.skip("running as root and the immutable attribute is not available here")
    try:
        yield folder, before
    finally:
        subprocess.run(["chattr", "-i", str(folder)], check=True)


def test_output_folder_not_writable(tmp_path, read_only_folder):
    folder, before = read_only_folder
    with pytest.raises(OSError):  # the folder really refuses new files
        (folder / "probe").write_text("x")
    assert_clean_error(cli("run", _config(tmp_path, folder), "--no-progress"), EXIT_OUTPUT,
                       f"output folder {folder} cannot be created or written")
    assert snapshot(folder) == before


def test_outputs_exist_and_overwrite_not_given(tmp_path, finished_run):
    shutil.copytree(finished_run / "out", tmp_path / "out")
    before = snapshot(tmp_path / "out")
    output = assert_clean_error(cli("run", _config(tmp_path, tmp_path / "out"), "--no-progress"), EXIT_OUTPUT,
                                "already exist and overwrite is off", str(tmp_path / "out" / "baseline" / "pathway_class.tif"),
                                "--overwrite")
    assert "co2_only" in output
    assert snapshot(tmp_path / "out") == before
    again = cli("run", _config(tmp_path, tmp_path / "out"), "--no-progress", "--overwrite")
    assert again.exit_code == 0, again.output


def _visible_files(folder: Path) -> list[Path]:
    """Files whose path has no hidden part: the ones a user takes as results."""
    return [p for p in folder.rglob("*") if p.is_file() and not any(part.startswith(".") for part in p.relative_to(folder).parts)]


@pytest.mark.parametrize("runs_per_pass", [1, None])
def test_disk_full_while_writing_a_scenario_simulated(tmp_path, monkeypatch, runs_per_pass):
    # The OS error a full disk gives (ENOSPC, POSIX) raised by every block write of the second scenario.
    # One scenario per pass keeps the finished baseline; by default both share a pass, and neither is kept.
    original = BlockWriter.__setitem__

    def full_disk(self, index, block):
        if f"{os.sep}co2_only{os.sep}" in self.path:
            raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC), self.path)
        return original(self, index, block)

    monkeypatch.setattr(BlockWriter, "__setitem__", full_disk)
    folder = tmp_path / "out"
    config = _config(tmp_path, folder, runs_per_pass)
    assert_clean_error(cli("run", config, "--no-progress"), EXIT_OUTPUT, "co2_only", "the disk is full",
                       "--resume")
    names = {str(p.relative_to(folder)) for p in _visible_files(folder)}
    assert not any(n.startswith("co2_only") for n in names)  # nothing of the failed scenario
    assert any(n.startswith("baseline/") for n in names) == (runs_per_pass == 1)  # nor of its pass
    assert "manifest.json" not in names and "class_summary.csv" not in names  # the run is not finished
    assert {p.name for p in (folder / "co2_only").iterdir()} == set()  # its staging folder was removed
    monkeypatch.setattr(BlockWriter, "__setitem__", original)  # space freed
    resumed = cli("run", config, "--no-progress", "--resume")
    assert resumed.exit_code == 0, resumed.output
    kept = ["baseline"] if runs_per_pass == 1 else []
    assert ("Kept from the earlier run (outputs up to date): baseline" in resumed.output) == bool(kept)
    assert json.loads((folder / "manifest.json").read_text())["resumed_scenarios"] == kept


_IN_SMALL_DISK = r"""
import ctypes, json, os, subprocess, sys
folder, size, command = sys.argv[1], sys.argv[2], sys.argv[3:]
libc = ctypes.CDLL(None, use_errno=True)
if libc.mount(b"tmpfs", folder.encode(), b"tmpfs", 0, f"size={size}".encode()) != 0:
    sys.exit(f"mount failed: {os.strerror(ctypes.get_errno())}")
run = subprocess.run(command, capture_output=True, text=True)
from rio_cogeo.cogeo import cog_validate
files = {}
for root, dirs, names in os.walk(folder):
    for name in names:
        path = os.path.join(root, name)
        files[os.path.relpath(path, folder)] = cog_validate(path, quiet=True)[0] if name.endswith(".tif") else None
print(json.dumps({"exit": run.returncode, "stderr": run.stderr, "files": files}))
"""


@pytest.mark.slow  # a run in a new process on a small file system
def test_disk_full_on_a_real_small_file_system(tmp_path):
    # A 1100 KiB tmpfs, private to a new mount namespace (unshare: util-linux), holds the first scenario
    # (about 350 KB) but not the second: GDAL's own writes fail with ENOSPC there.
    if shutil.which("unshare") is None or subprocess.run(["unshare", "-rm", "true"], capture_output=True).returncode:
        pytest.skip("user and mount namespaces are not available here")
    folder = tmp_path / "small_disk"
    folder.mkdir()
    config = _config(tmp_path, folder)
    probe = subprocess.run(
        ["unshare", "-rm", str(PYTHON), "-c", _IN_SMALL_DISK, str(folder), "1100k",
         str(SUITABILITY), "run", str(config), "--no-progress"],
        capture_output=True, text=True, timeout=300, env={**os.environ, "COLUMNS": "240"},
    )
    assert probe.returncode == 0, probe.stderr
    report = json.loads(probe.stdout)
    stderr = " ".join(report["stderr"].split())
    assert report["exit"] == EXIT_OUTPUT, stderr
    assert "the disk is full" in stderr and "Traceback" not in stderr
    visible = {name: valid for name, valid in report["files"].items()
               if not any(part.startswith(".") for part in Path(name).parts)}
    assert "manifest.json" not in visible
    for name, valid in visible.items():  # whatever has a final name is whole
        assert valid is not False, f"{name} looks finished but is not a valid COG"
    print(sys.version, sorted(report["files"]))  # shown with -s: what the full disk left behind
