"""Catalogue, districts part: unusable district polygons are refused before anything is computed (exit
code 3, message naming the file and the field, no traceback, output folder untouched); districts outside
the grid do not stop the briefs but get a flagged row in the district table.

Checked against the project's contract for bad input (issue 6 catalogue; exit codes in suitability/cli.py).
The districts are modified copies of the invented demo districts (demo_region/README.md).
"""

from __future__ import annotations

import shutil

import geopandas as gpd
import pandas as pd
import shapely

from .conftest import (
    DEMO_DATA,
    EXIT_INPUT,
    assert_clean_error,
    cli,
    demo_config,
    snapshot,
    write_config,
)

DISTRICTS = DEMO_DATA / "districts.gpkg"


def _districts() -> gpd.GeoDataFrame:
    return gpd.read_file(DISTRICTS, engine="pyogrio")


def _config_with_zones(zones, name_field="district") -> dict:
    config = demo_config(brief=True)
    config["brief"]["zones"] = str(zones)
    config["brief"]["name_field"] = name_field
    return config


def _refused(tmp_path, output_folder, config, *needles):
    folder, before = output_folder
    path = write_config(tmp_path, config)
    assert_clean_error(cli("run", path, "--no-progress"), EXIT_INPUT, *needles)
    assert snapshot(folder) == before


def test_districts_without_crs(tmp_path, output_folder):
    zones = tmp_path / "districts_no_crs.gpkg"
    districts = _districts()
    gpd.GeoDataFrame(districts.drop(columns="geometry"), geometry=districts.geometry.to_numpy(), crs=None).to_file(
        zones, engine="pyogrio"
    )
    assert gpd.read_file(zones, engine="pyogrio").crs is None  # the test file really has no CRS
    _refused(tmp_path, output_folder, _config_with_zones(zones), str(zones), "the districts have no CRS",
             "expected a layer with a defined CRS")


def test_name_field_missing(tmp_path, output_folder):
    _refused(tmp_path, output_folder, _config_with_zones(DISTRICTS, name_field="district_name"), str(DISTRICTS),
             "no field 'district_name'", "the layer has the fields: district, code")


def test_duplicate_district_names(tmp_path, output_folder):
    zones = tmp_path / "districts_twice.gpkg"
    districts = _districts()
    first, second = districts["district"].iloc[0], districts["district"].iloc[1]
    districts.loc[1, "district"] = first
    districts.to_file(zones, engine="pyogrio")
    assert second not in set(districts["district"])
    _refused(tmp_path, output_folder, _config_with_zones(zones), str(zones), "duplicate district names",
             first, "expected one polygon (or multipolygon) per name")


def test_polygons_outside_the_grid_get_flagged_rows(tmp_path, finished_run):
    # The briefs of a finished run (two scenarios), with one invented district added 500 km away from the
    # grid and one that straddles its western edge (x 290-310 km against the grid's 300 km edge: half on it).
    shutil.copytree(finished_run / "out", tmp_path / "out")
    districts = _districts()
    extra = gpd.GeoDataFrame(
        {"district": ["Far Away (invented)", "Edge Straddling (invented)"], "code": [98, 99]},
        geometry=[shapely.box(900_000, 7_300_000, 920_000, 7_320_000), shapely.box(290_000, 7_400_000, 310_000, 7_420_000)],
        crs=districts.crs,
    )
    zones = tmp_path / "districts_plus.gpkg"
    pd.concat([districts, extra], ignore_index=True).to_file(zones, engine="pyogrio")
    config = _config_with_zones(zones)
    config["output"]["folder"] = str(tmp_path / "out")
    result = cli("brief", write_config(tmp_path, config))
    assert result.exit_code == 0, result.output
    table = pd.read_csv(tmp_path / "out" / "brief" / "kessarine_basin_districts.csv")
    far = table[table["district"] == "Far Away (invented)"]
    edge = table[table["district"] == "Edge Straddling (invented)"]
    assert len(far) == 2 and len(edge) == 2  # one row per scenario
    assert (far["flag"] == "no overlap with the output grid").all()
    assert (far["coverage_share"] == 0).all() and far["share_c4"].isna().all()
    # Half of the box lies west of x = 300 km, outside the grid (derived here from the coordinates).
    assert edge["coverage_share"].between(0.499, 0.501).all()
    assert edge["flag"].str.contains("partly outside the output grid").all()
    # The demo districts: coverage as shapely measures it (planar areas in the grid's CRS, EPSG:32740).
    grid_box = shapely.box(300_000, 7_300_000, 500_000, 7_460_000)
    for name, geometry in zip(districts["district"], districts.geometry):
        expected = geometry.intersection(grid_box).area / geometry.area
        rows = table[table["district"] == name]
        # The district CSV rounds shares to 4 decimals (reports.brief), so within half of that step.
        assert rows["coverage_share"].sub(expected).abs().max() <= 5e-5 + 1e-12, name
        assert rows["flag"].fillna("").str.contains("partly outside").all() == (expected < 0.999), name
