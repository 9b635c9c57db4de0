"""End to end on the invented demo region: config -> COGs, manifest, summary.

The demo data are fictional (demo_region/README.md). What is checked here is the pipeline's contract
(valid COGs per the rio-cogeo validator, the target grid, nodata propagation, class codes) and the two
published directions of the physiology at regional scale: raising CO2 at fixed climate favours C3
(Ehleringer et al. 1997, crossover temperature rises with CO2) and warming at fixed CO2 favours C4
(Collatz et al. 1998, C4 favoured in months warmer than the crossover).
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
import rasterio
import yaml
from rio_cogeo.cogeo import cog_validate

import suitability
from suitability.config import load_config
from suitability.grid import TargetGrid

from conftest import write_demo_config

REPO = Path(__file__).resolve().parents[1]
DEMO = REPO / "configs" / "demo.yaml"


@pytest.fixture(scope="module")
def demo_run(tmp_path_factory):
    folder = tmp_path_factory.mktemp("demo_run")
    output = dict(yaml.safe_load(DEMO.read_text())["output"], datacube=True)
    return suitability.run(write_demo_config(folder, output=output | {"folder": str(folder / "out")}))


def test_every_layer_is_a_valid_cog_on_the_target_grid(demo_run):
    cfg = load_config(DEMO)
    grid = TargetGrid.from_region(cfg.region, cfg.config_dir)
    baseline_layers = set(demo_run.layers["baseline"])
    assert {"c3_assimilation", "c4_assimilation", "pathway_advantage", "pathway_class", "c4_favoured_months",
            "photorespiration_share", "crossover_temperature"} <= baseline_layers
    assert {"advantage_change", "class_transition"} <= set(demo_run.layers["co2_only"])
    for scenario, layers in demo_run.layers.items():
        for name, path in layers.items():
            if path.suffix != ".tif":
                continue
            valid, errors, _ = cog_validate(str(path), strict=True)  # COG rules as rio-cogeo checks them
            assert valid, (path, errors)
            with rasterio.open(path) as src:
                assert src.crs == rasterio.crs.CRS.from_user_input(grid.crs.to_wkt())
                assert src.transform.almost_equals(grid.transform)
                assert (src.height, src.width) == (grid.height, grid.width)
                assert src.tags()["scenario"] == scenario


def test_classes_are_only_the_documented_codes(demo_run):
    for layers in demo_run.layers.values():
        with rasterio.open(layers["pathway_class"]) as src:
            values = set(np.unique(src.read(1)).tolist())
            assert values <= {1, 2, 3, 255}
            assert src.colormap(1)  # a colour table is embedded


def test_nodata_follows_input_nodata(demo_run):
    # The demo's lake is nodata in the temperature and water inputs; it must be nodata in every map.
    with rasterio.open(demo_run.layers["baseline"]["pathway_class"]) as src:
        classes = src.read(1)
    with rasterio.open(demo_run.layers["baseline"]["pathway_advantage"]) as src:
        advantage = src.read(1)
    assert (classes == 255).any() and (classes != 255).any()
    np.testing.assert_array_equal(classes == 255, np.isnan(advantage))


def _c4_share(result, scenario: str) -> float:
    row = result.summary.set_index("scenario").loc[scenario]
    return row["C4 favoured %"]


def test_co2_and_warming_pull_in_opposite_directions(demo_run):
    baseline = _c4_share(demo_run, "baseline")
    assert _c4_share(demo_run, "co2_only") < baseline  # Ehleringer et al. 1997: higher CO2 favours C3
    assert _c4_share(demo_run, "warming_only") > baseline  # Collatz et al. 1998: warmer favours C4


def test_crossover_temperature_rises_with_co2_in_the_maps(demo_run):
    # Ehleringer et al. 1997: the crossover temperature rises with CO2.
    def mean_crossover(scenario):
        with rasterio.open(demo_run.layers[scenario]["crossover_temperature"]) as src:
            return np.nanmean(src.read(1))

    assert mean_crossover("co2_only") > mean_crossover("baseline")


def test_manifest_records_config_inputs_and_outputs(demo_run):
    manifest = json.loads(demo_run.manifest_path.read_text())
    assert len(manifest["config_hash"]) == 64 and int(manifest["config_hash"], 16) >= 0  # sha256 hex
    with rasterio.open(demo_run.layers["baseline"]["pathway_class"]) as src:
        assert src.tags()["config_hash"] == manifest["config_hash"]
    assert any(entry["path"].endswith("temperature.nc") for entry in manifest["inputs"])
    assert all(len(entry["sha256"]) == 64 for entry in manifest["inputs"])
    assert set(manifest["outputs"]) == {"baseline", "co2_only", "warming_only", "co2_and_warming"}
    assert "not yield forecasts" in manifest["caution"]


def test_datacube_has_monthly_values(demo_run):
    import xarray as xr

    with xr.open_dataset(demo_run.layers["baseline"]["datacube"]) as cube:
        assert cube["c3_monthly_assimilation"].sizes["month"] == 12
        assert np.isfinite(cube["c4_monthly_assimilation"].values).any()
