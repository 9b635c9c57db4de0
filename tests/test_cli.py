"""The command line: exit codes, the caution, check, init, curves and a short run.

Uses the invented demo region (demo_region/README.md). Exit codes are this project's documented
contract (suitability/cli.py): 2 config error, 3 input-data error, 4 output error.
"""

from __future__ import annotations

import csv
from pathlib import Path

import yaml
from typer.testing import CliRunner

from suitability.cli import app
from suitability.config import load_config

from conftest import write_demo_config

REPO = Path(__file__).resolve().parents[1]
DEMO = REPO / "configs" / "demo.yaml"
runner = CliRunner(env={"COLUMNS": "200"})


def _demo_copy(tmp_path: Path, **changes) -> Path:
    return write_demo_config(tmp_path, **changes)


def test_check_on_the_demo_reports_every_layer(tmp_path):
    result = runner.invoke(app, ["check", str(_demo_copy(tmp_path))])
    assert result.exit_code == 0, result.output
    for layer in ("tmin", "tmax", "shortwave", "water_availability", "elevation"):
        assert layer in result.output
    assert "look usable" in result.output


def test_unknown_key_is_a_config_error_with_exit_code_2(tmp_path):
    path = _demo_copy(tmp_path)
    text = path.read_text().replace("classes:", "clases:")
    path.write_text(text)
    result = runner.invoke(app, ["check", str(path)])
    assert result.exit_code == 2
    assert "clases" in result.output and "classes" in result.output  # names the key and suggests the valid one


def test_missing_input_file_is_exit_code_3(tmp_path):
    path = _demo_copy(tmp_path)
    config = yaml.safe_load(path.read_text())
    config["climate"]["elevation"]["path"] = str(tmp_path / "nowhere.tif")
    path.write_text(yaml.safe_dump(config))
    result = runner.invoke(app, ["run", str(path), "--no-progress"])
    assert result.exit_code in (2, 3), result.output
    assert "nowhere.tif" in result.output
    assert not (tmp_path / "out" / "baseline" / "pathway_class.tif").exists()


def test_init_writes_a_starter_that_documents_every_section(tmp_path):
    target = tmp_path / "starter.yaml"
    result = runner.invoke(app, ["init", str(target)])
    assert result.exit_code == 0, result.output
    text = target.read_text()
    for section in ("region:", "climate:", "season:", "physiology:", "scenarios:", "classes:", "output:", "compute:"):
        assert section in text
    again = runner.invoke(app, ["init", str(target)])
    assert again.exit_code == 4  # refuses to overwrite without --force


def test_curves_writes_table_and_figure(tmp_path):
    result = runner.invoke(app, ["curves", "--co2", "350", "--co2", "700", "--out", str(tmp_path)])
    assert result.exit_code == 0, result.output
    with open(tmp_path / "crossover.csv") as handle:
        rows = list(csv.DictReader(handle))
    crossover = {float(r["co2_ppm"]): float(r["crossover_temperature_c"]) for r in rows}
    # Collatz et al. 1998: about 22 °C at 350 ppm; Ehleringer et al. 1997: rises with CO2.
    assert 20.0 <= crossover[350.0] <= 24.0
    assert crossover[700.0] > crossover[350.0]
    assert (tmp_path / "leaf_curves.png").stat().st_size > 10_000


def test_run_prints_the_caution_and_the_class_table(tmp_path):
    path = _demo_copy(tmp_path, season={"months": [1]})
    config = yaml.safe_load(path.read_text())
    config["scenarios"] = config["scenarios"][:2]
    config.pop("brief")
    config["output"]["datacube"] = False
    path.write_text(yaml.safe_dump(config))
    result = runner.invoke(app, ["run", str(path), "--no-progress"])
    assert result.exit_code == 0, result.output
    assert "not yield forecasts" in result.output
    assert "baseline" in result.output and "co2_only" in result.output
    out = Path(load_config(path).output.folder)
    assert (out / "co2_only" / "class_transition.tif").exists()
    rerun = runner.invoke(app, ["run", str(path), "--no-progress"])
    assert rerun.exit_code == 4  # outputs exist and --overwrite was not given
