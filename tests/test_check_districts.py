"""``check`` opens the district file of the brief (issue 14): CRS, name field, count, duplicate names;
a wrong name_field fails ``check`` as it would fail ``run``.

Uses the invented demo region (demo_region/README.md) and SYNTHETIC district files made up here; the
names are invented. Exit code 3 is this project's input-data error (suitability/cli.py).
"""

from __future__ import annotations

from pathlib import Path

import geopandas as gpd
import yaml
from shapely.geometry import box
from typer.testing import CliRunner

from suitability.cli import app

from conftest import write_demo_config

runner = CliRunner(env={"COLUMNS": "200"})
DEMO_DISTRICTS = Path(__file__).resolve().parents[1] / "demo_region" / "data" / "districts.gpkg"


def _config(tmp_path: Path, **brief) -> Path:
    path = write_demo_config(tmp_path)
    config = yaml.safe_load(path.read_text())
    config["brief"].update(brief)
    path.write_text(yaml.safe_dump(config, sort_keys=False))
    return path


def test_check_reports_the_district_file(tmp_path):
    result = runner.invoke(app, ["check", str(_config(tmp_path))])
    assert result.exit_code == 0, result.output
    flat = " ".join(result.output.split())
    count = len(gpd.read_file(DEMO_DISTRICTS))  # the file itself, read by geopandas
    assert "districts.gpkg" in flat and "EPSG:32740" in flat
    assert f"{count} districts, names from field 'district'" in flat


def test_a_wrong_name_field_fails_check(tmp_path):
    result = runner.invoke(app, ["check", str(_config(tmp_path, name_field="distrct"))])
    assert result.exit_code == 3, result.output
    flat = " ".join(result.output.split())
    assert "no field 'distrct'" in flat and "the layer has the fields: district" in flat
    assert "look usable" not in flat


def test_duplicate_names_fail_check(tmp_path):
    zones = tmp_path / "twice.gpkg"
    gpd.GeoDataFrame({"name": ["Orvanne", "Orvanne", "Telmira"]},
                     geometry=[box(310000, 7310000, 320000, 7320000), box(320000, 7310000, 330000, 7320000),
                               box(330000, 7310000, 340000, 7320000)], crs="EPSG:32740").to_file(zones)
    result = runner.invoke(app, ["check", str(_config(tmp_path, zones=str(zones), name_field="name"))])
    assert result.exit_code == 3, result.output
    assert "duplicate district names: Orvanne" in " ".join(result.output.split())


def test_districts_off_the_grid_are_noted(tmp_path):
    zones = tmp_path / "far.gpkg"
    gpd.GeoDataFrame({"name": ["Orvanne", "Far Reach"]},
                     geometry=[box(310000, 7310000, 320000, 7320000), box(100000, 7000000, 110000, 7010000)],
                     crs="EPSG:32740").to_file(zones)
    result = runner.invoke(app, ["check", str(_config(tmp_path, zones=str(zones), name_field="name"))])
    assert result.exit_code == 0, result.output
    assert "1 district(s) lie off the grid and will have no results: Far Reach" in " ".join(result.output.split())
