"""Long and wide runs keep memory bounded; YAML is loaded safely; config paths resolve against the config
file's folder; the package never starts a shell.

Checked against the project's contract (issue 6, "Robustness properties"), the PyYAML documentation
(safe_load builds only plain YAML types; python/* tags are refused) and the POSIX getrusage/wait4
definition of ru_maxrss (peak resident set size of the waited-for child, in KiB on Linux). The runs use
the invented demo region.
"""

from __future__ import annotations

import ast
import os
import shutil
import subprocess
import sys
from pathlib import Path

import pytest
import yaml

import suitability

from .conftest import DEMO_DATA, EXIT_CONFIG, SUITABILITY, assert_clean_error, cli, demo_config, write_config

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))
from benchmarks.child_usage import MeasuredChild  # noqa: E402  (the repository root holds benchmarks/)

PACKAGE = Path(suitability.__file__).parent


def _peak_rss_mib(config: Path) -> float:
    # Started through the launcher: a child started by this test process would report at least this
    # process's own peak (on Linux ru_maxrss starts from the memory held at exec), the same for both runs.
    child = MeasuredChild([SUITABILITY, "run", config, "--no-progress"], stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    stderr = child.process.communicate()[1].decode()
    usage = child.wait()
    assert usage.returncode == 0, stderr
    return usage.ru_maxrss / 1024.0


def _scenarios(count: int) -> list[dict]:
    return [{"name": "baseline", "co2_ppm": 420}] + [
        {"name": f"scenario_{i:02d}", "co2_ppm": 300 + 20 * i, "temperature_offset_c": 0.2 * i} for i in range(1, count)
    ]


@pytest.mark.slow  # two runs in new processes, one of twenty scenarios
def test_twenty_scenarios_need_about_the_memory_of_one(tmp_path, finished_run):
    # finished_run has already run the model once in this session (and compiled what is compiled on first
    # use), so neither measured run pays for that.
    peaks = {}
    for count in (1, 20):
        folder = tmp_path / f"scenarios_{count}"
        folder.mkdir()
        config = demo_config(scenarios=1)
        config["scenarios"] = _scenarios(count)
        peaks[count] = _peak_rss_mib(write_config(folder, config))
        assert len(list((folder / "out").glob("*/pathway_class.tif"))) == count
    # Bounded like a single scenario: a generous 50 % margin; growth with the number of scenarios (results
    # kept in memory, graphs that grow) would exceed it by far at 20 scenarios.
    assert peaks[20] <= 1.5 * peaks[1], peaks


def test_yaml_is_loaded_safely(tmp_path):
    marker = tmp_path / "created_by_yaml"
    text = yaml.safe_dump(demo_config(), sort_keys=False)
    text = text.replace("region:", f"exploit: !!python/object/apply:os.system ['touch {marker}']\nregion:", 1)
    path = tmp_path / "config.yaml"
    path.write_text(text)
    assert_clean_error(cli("check", path), EXIT_CONFIG, str(path), "line 1", "YAML error",
                       "could not determine a constructor for the tag 'tag:yaml.org,2002:python/object/apply:os.system'")
    assert not marker.exists()


def test_config_paths_resolve_relative_to_the_config_file_not_the_working_folder(tmp_path, monkeypatch):
    project = tmp_path / "project"
    (project / "configs").mkdir(parents=True)
    shutil.copytree(DEMO_DATA, project / "data")
    config = demo_config(scenarios=1)
    for layer in config["climate"].values():
        layer["path"] = "../data/" + Path(layer["path"]).name
    config["output"]["folder"] = "../results"
    path = write_config(project / "configs", config)
    elsewhere = tmp_path / "elsewhere"
    elsewhere.mkdir()
    monkeypatch.chdir(elsewhere)
    result = cli("run", Path("..") / "project" / "configs" / "config.yaml", "--no-progress")
    assert result.exit_code == 0, result.output
    assert (project / "results" / "baseline" / "pathway_class.tif").exists()
    assert list(elsewhere.iterdir()) == []
    assert path.exists()


_SHELL_CALLS = {("os", "system"), ("os", "popen"), ("os", "execv"), ("os", "execvp"), ("os", "execl"),
                ("os", "spawnv"), ("os", "spawnl"), ("pty", "spawn"), ("subprocess", "run"), ("subprocess", "Popen"),
                ("subprocess", "call"), ("subprocess", "check_call"), ("subprocess", "check_output"),
                ("subprocess", "getoutput"), ("subprocess", "getstatusoutput")}


#: The modules allowed to start a program, each with its one call: the brief workers, and the kernel compiled
#: in a child process (kernel/ahead.py), start this same Python interpreter directly, with an argument list
#: (never a shell); checked below, and at run time by test_a_run_invokes_no_shell.
_STARTS_PYTHON_ITSELF = {"reports/workers.py": "Popen", "kernel/ahead.py": "run"}


def test_no_shell_is_ever_invoked_by_the_package():
    offences = []
    for source in sorted(PACKAGE.rglob("*.py")):
        text = source.read_text(encoding="utf-8")
        tree = ast.parse(text, filename=str(source))
        allowed = _STARTS_PYTHON_ITSELF.get(source.relative_to(PACKAGE).as_posix())
        if allowed:
            assert "shell" not in text and "[sys.executable, " in text, source
            starts = [n for n in ast.walk(tree) if isinstance(n, ast.Call) and isinstance(n.func, ast.Attribute)
                      and (getattr(n.func.value, "id", None), n.func.attr) in _SHELL_CALLS]
            assert len(starts) == 1 and starts[0].func.attr == allowed, source  # one call, of an argument list
            continue
        for node in ast.walk(tree):
            if isinstance(node, (ast.Import, ast.ImportFrom)):
                modules = [a.name for a in node.names] if isinstance(node, ast.Import) else [node.module or ""]
                offences += [f"{source}:{node.lineno}: imports {m}" for m in modules if m in ("subprocess", "pty")]
            if isinstance(node, ast.Attribute) and isinstance(node.value, ast.Name):
                if (node.value.id, node.attr) in _SHELL_CALLS:
                    offences.append(f"{source}:{node.lineno}: {node.value.id}.{node.attr}")
            if isinstance(node, ast.keyword) and node.arg == "shell":
                offences.append(f"{source}:{node.lineno}: shell=")
        offences += [f"{source}: shell=True" for _ in range(text.count("shell=True"))]
    assert offences == []
    assert len(list(PACKAGE.rglob("*.py"))) > 20  # the scan did look at the package


_SHELLS = {"sh", "bash", "dash", "zsh", "ksh", "csh", "tcsh", "fish", "cmd", "cmd.exe", "powershell"}


@pytest.mark.slow  # a whole run with PDF briefs
def test_a_run_invokes_no_shell(tmp_path, monkeypatch):
    # A run with briefs (HTML and PDF) on the threads scheduler, watching every way of starting a program.
    # Libraries may start helper programs directly (ctypes.util runs "ldconfig -p" to find the PDF
    # renderer's C libraries), but nothing may go through a shell.
    started = []

    class WatchedPopen(subprocess.Popen):
        def __init__(self, args, *more, **options):
            started.append((args, options.get("shell", False)))
            super().__init__(args, *more, **options)

    def refuse(*args, **kwargs):
        raise AssertionError(f"a shell command was run: {args}")

    monkeypatch.setattr(subprocess, "Popen", WatchedPopen)
    monkeypatch.setattr(os, "system", refuse)
    monkeypatch.setattr(os, "popen", refuse)
    config = demo_config(scenarios=2, brief=True)
    result = cli("run", write_config(tmp_path, config), "--no-progress")
    assert result.exit_code == 0, result.output
    assert (tmp_path / "out" / "brief" / "kessarine_basin_co2_only.pdf").exists()
    for args, shell in started:
        program = args if isinstance(args, (str, bytes)) else args[0]
        assert not shell and Path(os.fsdecode(program)).name not in _SHELLS, args
    assert sys.modules["suitability"] is suitability
