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
import xarray as xr
import yaml
from rio_cogeo.cogeo import cog_validate

import suitability
from suitability import indicators
from suitability.config import load_config
from suitability.grid import TargetGrid
from suitability.inputs.climate import load_climate

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
    return row["share_c4"]


def test_co2_and_warming_pull_in_opposite_directions(demo_run):
    baseline = _c4_share(demo_run, "baseline")
    assert _c4_share(demo_run, "co2_only") < baseline  # Ehleringer et al. 1997: higher CO2 favours C3
    assert _c4_share(demo_run, "warming_only") > baseline  # Collatz et al. 1998: warmer favours C4


def test_crossover_temperature_rises_with_co2_in_the_maps(demo_run):
    # Ehleringer et al. 1997: the crossover temperature rises with CO2 (cell by cell, where both are a number).
    def crossover(scenario):
        with rasterio.open(demo_run.layers[scenario]["crossover_temperature"]) as src:
            return src.read(1).astype(float)

    now, raised = crossover("baseline"), crossover("co2_only")
    both = np.isfinite(now) & np.isfinite(raised)
    assert both.sum() > 1000 and (raised[both] > now[both]).all()


def test_the_crossover_layers_agree_with_the_months_c4_is_favoured_in_every_cell_and_month(demo_run):
    # Derived here from the definitions (suitability.model.canopy_crossover, indicators.c4_favoured_months):
    # in every cell and season month of every scenario, the month's mean temperature (Tmin + Tmax)/2 is above
    # its crossover exactly when the month's own advantage index exceeds the class margin (0.05); ±inf
    # (no tie between 0 and 45 °C) count as numbers; the seasonal layer is the warmest season month's.
    cfg = load_config(DEMO)
    grid = TargetGrid.from_region(cfg.region, cfg.config_dir)
    climate = load_climate(cfg.climate, grid, cfg.config_dir)
    checked = 0
    for scenario in cfg.scenarios:
        offset = np.float32(scenario.temperature_offset_c)
        tmin, tmax = ((climate[name] + offset).astype(np.float32).values.astype(float) for name in ("tmin", "tmax"))
        mean = 0.5 * (tmin + tmax)
        with xr.open_dataset(demo_run.scenario_folders[scenario.name] / "monthly_assimilation.nc") as cube:
            c3 = cube["c3_monthly_assimilation"].values.astype(float)
            c4 = cube["c4_monthly_assimilation"].values.astype(float)
            crossover = cube["monthly_crossover_temperature"].values.astype(float)
        in_season = np.isfinite(c3) & np.isfinite(c4)
        favoured = indicators.advantage_index(c3, c4) > cfg.classes.contested_margin
        assert np.array_equal(np.isnan(crossover), ~in_season)
        assert np.array_equal((mean > crossover)[in_season], favoured[in_season])
        with rasterio.open(demo_run.layers[scenario.name]["c4_favoured_months"]) as src:
            months = src.read(1, masked=True).astype(float).filled(np.nan)  # uint8, nodata 255
        has = np.isfinite(months)
        np.testing.assert_array_equal(((mean > crossover) & in_season).sum(axis=0)[has], months[has])
        with rasterio.open(demo_run.layers[scenario.name]["crossover_temperature"]) as src:
            seasonal = src.read(1).astype(float)
        warmest = np.argmax(np.where(in_season, mean, -np.inf), axis=0)
        expected = np.take_along_axis(crossover, warmest[None], axis=0)[0]
        some = in_season.any(axis=0)
        np.testing.assert_array_equal(seasonal[some], expected[some])
        checked += int(in_season.sum())
    assert checked > 100_000  # 4 scenarios x ~32 000 cells x their season months


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
    # Derived here (model.py): months outside a cell's growing season are NaN in the datacube, so each
    # seasonal map is the sum of the datacube's finite monthly values, cell by cell, and nodata where no
    # month is in season (float32 rounding).
    gains = {}
    for scenario in ("baseline", "co2_only"):
        with xr.open_dataset(demo_run.layers[scenario]["datacube"]) as cube:
            for pathway in ("c3", "c4"):
                monthly = cube[f"{pathway}_monthly_assimilation"].transpose("month", "y", "x").values.astype(float)
                with rasterio.open(demo_run.layers[scenario][f"{pathway}_assimilation"]) as src:
                    season = src.read(1).astype(float)
                assert monthly.shape == (12,) + season.shape
                np.testing.assert_array_equal(np.isnan(season), np.isnan(monthly).all(axis=0))
                has = ~np.isnan(season)
                np.testing.assert_allclose(np.nansum(monthly, axis=0)[has], season[has], rtol=1e-5, atol=1e-3)
                gains[scenario, pathway] = np.nansum(season)
    # CO2 enrichment at fixed climate raises C3 assimilation relatively more than C4 (Ainsworth & Long 2005,
    # New Phytol 165:351; Leakey et al. 2009, J Exp Bot 60:2859; direction only, from memory).
    c3_gain = gains["co2_only", "c3"] / gains["baseline", "c3"]
    c4_gain = gains["co2_only", "c4"] / gains["baseline", "c4"]
    assert c3_gain > 1.0 and c3_gain > c4_gain, (c3_gain, c4_gain)


def _declared_output_layers() -> dict:
    """The declared GeoTIFF output layers: the seasonal and change entries of the registry
    (suitability.variables.OUTPUT_LAYERS; datacube layers go to the NetCDF datacube, tested elsewhere)."""
    from suitability import variables

    return {name: variables.OUTPUT_LAYERS[name] for name in variables.layer_names("seasonal", "change")}


def _is_change_layer(name: str, entry) -> bool:
    """A layer against the baseline, as the registry entry declares it."""
    return entry.kind == "change"


def _is_categorical(entry) -> bool:
    """Categorical as declared; without such a field, the glossary's rule (resampled by "mode")."""
    categorical = getattr(entry, "categorical", None)
    return bool(categorical) if categorical is not None else entry.resampling == "mode"


def test_every_declared_output_layer_is_produced(demo_run):
    # Project contract (DESIGN.md "Names we use"; the output glossary in suitability/variables.py): the demo
    # config asks for all layers, so every declared seasonal layer exists for every scenario and every
    # change layer for every scenario but the baseline, as a readable GeoTIFF with the declared units, the
    # nodata of its kind (uint8/255 for categorical layers, float32/NaN otherwise) and values inside the
    # declared valid range.
    declared = _declared_output_layers()
    assert len(declared) >= 9  # the nine layers of DESIGN.md, at least
    change = {name for name, entry in declared.items() if _is_change_layer(name, entry)}
    assert change and change != set(declared)
    baseline = load_config(DEMO).baseline
    assert set(demo_run.layers) == {"baseline", "co2_only", "warming_only", "co2_and_warming"}
    for scenario, layers in demo_run.layers.items():
        maps = {name for name, path in layers.items() if path.suffix == ".tif"}
        expected = set(declared) - change if scenario == baseline else set(declared)
        assert maps == expected, (scenario, sorted(maps ^ expected))
        on_disk = {p.stem for p in (demo_run.layers[scenario]["pathway_class"].parent).glob("*.tif")}
        assert on_disk == expected, scenario
        for name in expected:
            entry = declared[name]
            with rasterio.open(layers[name]) as src:
                values = src.read(1)
                units = getattr(entry, "readable_units", entry.units)  # "g C m-2" for carbon (README)
                assert src.count == 1 and src.units[0] == units, (scenario, name, src.units)
                if _is_categorical(entry) or getattr(entry, "integer", False):  # classes; whole month counts
                    assert src.dtypes[0] == "uint8" and src.nodata == 255, (scenario, name)
                    valid = values[values != 255]
                else:
                    assert src.dtypes[0] == "float32" and np.isnan(src.nodata), (scenario, name)
                    valid = values[~np.isnan(values)]
            assert valid.size > 0, (scenario, name)
            low, high = entry.valid_range
            assert low <= valid.min() and valid.max() <= high, (scenario, name, valid.min(), valid.max())


def test_change_layers_are_the_differences_against_the_baseline(demo_run):
    # Derived here from the definitions (DESIGN.md; indicators.py): advantage_change = scenario advantage
    # minus baseline advantage; class_transition = baseline class * 10 + scenario class, 255 where either
    # is nodata.
    def read(scenario, name):
        with rasterio.open(demo_run.layers[scenario][name]) as src:
            return src.read(1)

    base_advantage, base_class = read("baseline", "pathway_advantage"), read("baseline", "pathway_class")
    for scenario in ("co2_only", "warming_only", "co2_and_warming"):
        advantage, classes = read(scenario, "pathway_advantage"), read(scenario, "pathway_class")
        np.testing.assert_allclose(read(scenario, "advantage_change"), advantage - base_advantage, rtol=0, atol=1e-6)
        expected = np.where((base_class == 255) | (classes == 255), 255,
                            base_class.astype(int) * 10 + classes.astype(int))
        np.testing.assert_array_equal(read(scenario, "class_transition"), expected)


def test_the_demo_says_its_region_is_invented_everywhere(demo_run):
    # Project rule: demo outputs say the region is invented (configs/demo.yaml sets region.invented).
    for layers in demo_run.layers.values():
        with rasterio.open(layers["pathway_class"]) as src:
            assert src.tags()["region_note"].startswith("Invented region: Kessarine Basin does not exist")
    assert demo_run.manifest["region_note"].startswith("Invented region")
    pages = [p for p in demo_run.briefs.values() if p.suffix in (".html", ".pdf")]
    assert pages and {p.stem.rsplit("_", 1)[-1] for p in pages} >= {"today", "comparison"}
    import pypdf

    for path in pages:
        if path.suffix == ".html":
            text = " ".join(path.read_text(encoding="utf-8").split())
        else:
            text = " ".join(pypdf.PdfReader(path).pages[0].extract_text().split())
        assert "Invented region: Kessarine Basin does not exist" in text, path.name
        assert "not yield forecasts" in text, path.name
