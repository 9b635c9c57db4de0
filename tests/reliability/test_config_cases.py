"""Catalogue, config part: each bad config is refused by `suitability run` with exit code 2, a message
naming the file, the line or key and what was expected, no traceback, and the output folder untouched.

Checked against the project's contract for bad input (issue 6 catalogue; exit codes in suitability/cli.py).
The configs are edits of the invented demo config.
"""

from __future__ import annotations

import pytest
import yaml

from .conftest import EXIT_CONFIG, assert_clean_error, cli, demo_config, run_subprocess, snapshot, write_config


def _refused(tmp_path, output_folder, config_or_text, *needles):
    folder, before = output_folder
    if isinstance(config_or_text, str):
        path = tmp_path / "config.yaml"
        path.write_text(config_or_text, encoding="utf-8")
    else:
        path = write_config(tmp_path, config_or_text)
    output = assert_clean_error(cli("run", path, "--no-progress"), EXIT_CONFIG, str(path), *needles)
    assert snapshot(folder) == before
    return output


def test_yaml_syntax_error_reports_the_line(tmp_path, output_folder):
    lines = yaml.safe_dump(demo_config(), sort_keys=False).splitlines()
    index = next(i for i, line in enumerate(lines) if line.strip().startswith("co2_ppm"))
    lines[index] = lines[index] + ": 700"  # "co2_ppm: 420: 700": a mapping value where none is allowed
    _refused(tmp_path, output_folder, "\n".join(lines) + "\n", f"line {index + 1}", "YAML error")


def test_unclosed_quote_reports_the_line_where_it_starts(tmp_path, output_folder):
    lines = yaml.safe_dump(demo_config(), sort_keys=False).splitlines()
    index = next(i for i, line in enumerate(lines) if line.strip().startswith("name: Kessarine"))
    lines[index] = '  name: "Kessarine Basin'
    _refused(tmp_path, output_folder, "\n".join(lines) + "\n", f"line {index + 1}", "YAML error")


def test_unknown_key_suggests_the_closest_valid_key(tmp_path, output_folder):
    config = demo_config()
    config["scenarios"][1]["co2_pmm"] = config["scenarios"][1].pop("co2_ppm")
    output = _refused(tmp_path, output_folder, config, "scenarios[1].co2_pmm", "unknown key", "did you mean 'co2_ppm'?")
    assert "line " in output


def test_wrong_type_names_the_key_and_the_expected_type(tmp_path, output_folder):
    config = demo_config()
    config["scenarios"][0]["co2_ppm"] = "four hundred"
    _refused(tmp_path, output_folder, config, "scenarios[0].co2_ppm", "valid number", "'four hundred'")


@pytest.mark.parametrize("resolution", [0, -1000, [1000, 0]])
def test_negative_or_zero_resolution(tmp_path, output_folder, resolution):
    config = demo_config()
    config["region"]["grid"]["resolution"] = resolution
    _refused(tmp_path, output_folder, config, "region.grid.resolution", "greater than 0")


def test_unknown_crs(tmp_path, output_folder):
    config = demo_config()
    config["region"]["grid"]["crs"] = "EPSG:999999"
    _refused(tmp_path, output_folder, config, "region.grid.crs", "unknown CRS 'EPSG:999999'", "EPSG code")


def test_bounds_inverted(tmp_path, output_folder):
    config = demo_config()
    config["region"]["grid"]["bounds"] = [500000, 7300000, 300000, 7460000]
    # The message quotes [xmin, ymin, xmax, ymax] literally: square brackets must survive the terminal
    # renderer (rich reads [word] as markup).
    _refused(tmp_path, output_folder, config, "region.grid", "[xmin, ymin, xmax, ymax]", "xmin < xmax",
             "[500000.0, 7300000.0, 300000.0, 7460000.0]")


def test_duplicate_scenario_names(tmp_path, output_folder):
    config = demo_config()
    config["scenarios"][1]["name"] = "Baseline"  # also one folder on a case-insensitive file system
    _refused(tmp_path, output_folder, config, "scenarios[1].name", "unique", "'baseline' is given twice")


@pytest.mark.parametrize("name", ["../escaped", "/tmp/absolute", "sub/folder", "back\\slash", "..", ".hidden", ""])
def test_scenario_names_that_would_escape_the_output_folder(tmp_path, output_folder, name):
    config = demo_config()
    config["scenarios"][1]["name"] = name
    _refused(tmp_path, output_folder, config, "scenarios[1].name", "output folder name", "letters, digits")


@pytest.mark.parametrize("name", ["../pathway_class", "/tmp/pathway_class", "brief/pathway_class"])
def test_output_layer_names_that_would_escape_the_output_folder(tmp_path, output_folder, name):
    config = demo_config()
    config["output"]["layers"] = ["pathway_class", name]
    _refused(tmp_path, output_folder, config, "output.layers", f"unknown output layer {name!r}")


@pytest.mark.parametrize("name", ["../tmin", "tmin/../../x"])
def test_climate_layer_names_that_would_escape_are_unknown_layers(tmp_path, output_folder, name):
    config = demo_config()
    config["climate"][name] = config["climate"].pop("elevation")
    _refused(tmp_path, output_folder, config, f"climate.{name}", f"unknown layer '{name}'", "valid layers")


@pytest.mark.slow  # the CLI in two new processes
def test_debug_shows_the_traceback_and_plain_runs_do_not(tmp_path):
    config = demo_config()
    config["clases"] = config.pop("classes")
    path = write_config(tmp_path, config)
    plain = run_subprocess("check", path)
    assert plain.returncode == EXIT_CONFIG and "Traceback" not in plain.stderr, plain.stderr
    assert "did you mean 'classes'?" in plain.stderr
    debug = run_subprocess("check", path, "--debug")
    assert debug.returncode != 0
    assert "Traceback (most recent call last)" in debug.stderr and "ConfigError" in debug.stderr, debug.stderr
