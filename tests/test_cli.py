"""The command line: exit codes, the caution, check, init, curves and a short run.

Uses the invented demo region (demo_region/README.md). Exit codes are this project's documented
contract (suitability/cli.py): 2 config error, 3 input-data error, 4 output error.
"""

from __future__ import annotations

import csv
import math
from pathlib import Path

import pytest
import yaml
from typer.testing import CliRunner

from suitability.cli import app
from suitability.config import load_config
from suitability.physiology import quantum_yield_crossover

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
    result = runner.invoke(app, ["curves", "--co2", "280", "--co2", "350", "--co2", "700", "--out", str(tmp_path)])
    assert result.exit_code == 0, result.output
    with open(tmp_path / "crossover.csv") as handle:
        rows = list(csv.DictReader(handle))
    # An empty cell is NaN (the CSV writer's nodata): no crossing below 50 °C.
    crossover = {float(r["co2_ppm"]): float(r["quantum_yield_crossover_c"] or "nan") for r in rows}
    # The table is the physiology's leaf quantum-yield crossover of the default (grass) sets at the curves'
    # VPD; Ehleringer et al. 1997: it rises with CO2. With the Collatz et al. (1992) fitted C4 yield 0.04 it
    # lies far above the Collatz et al. (1998) 22 °C (37.9 °C at 350 ppm, no crossing below 50 °C at
    # 700 ppm, NaN); the 22 °C checks are on the grass yields (tests/physiology/test_crossover.py) and on
    # the canopy tie (tests/physiology/test_calibration.py).
    expected = quantum_yield_crossover([280.0, 350.0], vpd_kpa=1.0)
    assert [crossover[280.0], crossover[350.0]] == pytest.approx(list(expected), abs=1e-9)
    assert crossover[280.0] < crossover[350.0]
    assert math.isnan(crossover[700.0]) or crossover[700.0] > crossover[350.0]
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


@pytest.mark.parametrize("invented", [True, False])
def test_run_says_the_region_is_invented_only_when_the_config_says_so(tmp_path, invented):
    # Project rule: every output of the invented demo says so; the text is suitability.caution.invented_note,
    # the same line the briefs, GeoTIFF tags and manifest carry.
    from suitability.caution import invented_note

    path = _demo_copy(tmp_path, season={"months": [1]}, brief=None)
    config = yaml.safe_load(path.read_text())
    config["region"]["invented"] = invented
    config["region"]["grid"]["bounds"] = [300000, 7300000, 320000, 7320000]  # a 20 x 20 cell corner
    config["scenarios"] = config["scenarios"][:1]
    config["output"]["datacube"] = False
    path.write_text(yaml.safe_dump(config))
    result = runner.invoke(app, ["run", str(path), "--no-progress"])
    assert result.exit_code == 0, result.output
    note = invented_note(config["region"]["name"])
    assert (note in result.output) is invented
    assert ("Invented region" in result.output) is invented
    if invented:
        assert result.output.index(note) < result.output.index("Outputs:")


def _small_brief_run(tmp_path: Path) -> Path:
    """The invented demo with two scenarios, one month and a 60 x 60 cell corner, briefs on (region only)."""
    path = _demo_copy(tmp_path, season={"months": [1]})
    config = yaml.safe_load(path.read_text())
    config["region"]["grid"]["bounds"] = [300000, 7300000, 360000, 7360000]
    config["scenarios"] = config["scenarios"][:2]
    config["output"]["datacube"] = False
    path.write_text(yaml.safe_dump(config))
    return path


def test_run_shows_the_progress_of_the_briefs(tmp_path):
    # Two scenarios: the brief of co2_only and the brief of today (brief.brief_pages); one more step for
    # the district table.
    result = runner.invoke(app, ["run", str(_small_brief_run(tmp_path))])
    assert result.exit_code == 0, result.output
    bar = next(line for line in result.output.splitlines() if line.startswith("briefs ("))
    assert "2 pages, HTML and PDF" in bar and "3/3" in bar
    assert (tmp_path / "out" / "brief").is_dir()


def test_run_without_progress_prints_no_bar(tmp_path):
    result = runner.invoke(app, ["run", str(_small_brief_run(tmp_path)), "--no-progress"])
    assert result.exit_code == 0, result.output
    assert "briefs (" not in result.output
    assert "computing and writing" not in result.output  # nor the scenarios' bars
    assert any(p.suffix == ".pdf" for p in (tmp_path / "out" / "brief").iterdir())
