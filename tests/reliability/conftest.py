"""Shared helpers of the reliability tests: a short demo config, folder snapshots, CLI calls.

The demo region (the "Kessarine Basin", demo_region/README.md) is invented; every bad input here is a
modified copy of its files, made in the test's own temporary folder. What these tests check against is
the project's own contract for bad input (issue 6, "Reliability and bad input", and the exit codes
documented in suitability/cli.py and suitability/errors.py): the exit code, a message naming the file or
key and what was expected, no traceback without --debug, and an output folder left as it was.
"""

from __future__ import annotations

import hashlib
import os
import subprocess
import sys
from pathlib import Path

import pytest
import yaml
from typer.testing import CliRunner

from suitability.cli import app

REPO = Path(__file__).resolve().parents[2]
DEMO = REPO / "configs" / "demo.yaml"
DEMO_DATA = REPO / "demo_region" / "data"
PYTHON = Path(sys.executable)
SUITABILITY = PYTHON.parent / "suitability"

EXIT_CONFIG, EXIT_INPUT, EXIT_OUTPUT = 2, 3, 4
CAUTION_WORDS = "not yield forecasts"

_runner = CliRunner(env={"COLUMNS": "240"})


def demo_config(*, months=(1,), scenarios=2, brief=False, datacube=False, runs_per_pass=None) -> dict:
    """The demo config as a dict with absolute input paths, a short season and few scenarios
    (``runs_per_pass``: compute.runs_per_pass, 1 to compute and keep one scenario at a time)."""
    config = yaml.safe_load(DEMO.read_text(encoding="utf-8"))
    for layer in config["climate"].values():
        layer["path"] = str((DEMO.parent / layer["path"]).resolve())
    config["brief"]["zones"] = str((DEMO.parent / config["brief"]["zones"]).resolve())
    if not brief:
        config.pop("brief")
    config["season"] = {"months": list(months)}
    config["scenarios"] = config["scenarios"][:scenarios]
    config["output"]["datacube"] = datacube
    config["output"]["folder"] = "out"  # relative: next to the config file
    config["compute"]["workers"] = 2
    if runs_per_pass is not None:
        config["compute"]["runs_per_pass"] = runs_per_pass
    return config


def write_config(folder: Path, config: dict, name: str = "config.yaml") -> Path:
    """Write ``config`` as YAML into ``folder`` (a relative output folder is then ``folder/out``)."""
    path = folder / name
    path.write_text(yaml.safe_dump(config, sort_keys=False), encoding="utf-8")
    return path


def snapshot(folder: Path) -> dict[str, str]:
    """Every file and folder below ``folder`` (hidden ones too) -> sha256 of a file, "<dir>" for a folder.

    A missing folder gives {"<missing>": ""}, so that creating it is a change too.
    """
    if not folder.exists():
        return {"<missing>": ""}
    listing = {}
    for path in sorted(folder.rglob("*")):
        relative = str(path.relative_to(folder))
        listing[relative] = "<dir>" if path.is_dir() else hashlib.sha256(path.read_bytes()).hexdigest()
    return listing


def prepare_output_folder(folder: Path) -> dict[str, str]:
    """An output folder holding a user's own file (so that 'unchanged' is a real comparison)."""
    folder.mkdir(parents=True, exist_ok=True)
    (folder / "notes_of_the_planner.txt").write_text("kept as it is\n", encoding="utf-8")
    return snapshot(folder)


def cli(*args: str):
    """Run the CLI in this process (typer's CliRunner); stdout and stderr together in ``.output``."""
    return _runner.invoke(app, [str(a) for a in args])


def assert_clean_error(result, exit_code: int, *needles: str) -> str:
    """The documented exit code, every needle in the message, and no traceback."""
    output = result.output
    assert result.exit_code == exit_code, output
    assert "Traceback" not in output, output
    assert result.exception is None or isinstance(result.exception, SystemExit), repr(result.exception)
    flat = " ".join(output.split())
    for needle in needles:
        assert " ".join(str(needle).split()) in flat, f"{needle!r} not in:\n{output}"
    return output


def run_subprocess(*args: str, timeout: float = 300, **kwargs) -> subprocess.CompletedProcess:
    """Run the installed ``suitability`` command in a child process (text output captured)."""
    env = {**os.environ, "COLUMNS": "240", "PYTHONWARNINGS": "ignore::DeprecationWarning"}
    return subprocess.run([str(SUITABILITY), *map(str, args)], capture_output=True, text=True, timeout=timeout,
                          env=env, **kwargs)


@pytest.fixture
def output_folder(tmp_path) -> tuple[Path, dict[str, str]]:
    folder = tmp_path / "out"
    return folder, prepare_output_folder(folder)


@pytest.fixture(scope="session")
def finished_run(tmp_path_factory) -> Path:
    """A finished short demo run (January, two scenarios, no briefs): the folder holding config and outputs."""
    folder = tmp_path_factory.mktemp("finished")
    config = demo_config()
    config["output"]["folder"] = str(folder / "out")
    path = write_config(folder, config)
    result = cli("run", path, "--no-progress")
    assert result.exit_code == 0, result.output
    return folder
