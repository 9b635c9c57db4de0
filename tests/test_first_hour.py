"""The first hour with the tool: version, help, check output off a terminal, the caution's place, unit
hints, the grid's extent, the starter template, stated assumptions, the parameter sets, brief and curves
options. Uses the invented demo region (demo_region/README.md).

The CLI runs through typer's CliRunner, whose output is not a terminal, at 80 columns (COLUMNS=80), the
way a pipe or a log sees it.
"""

from __future__ import annotations

import json
import re
import tomllib
from pathlib import Path

import numpy as np
import pytest
import yaml
from typer.testing import CliRunner

from suitability import __version__
from suitability.caution import CAUTION
from suitability.cli import CONFIG_OPTIONS, app
from suitability.config import load_config
from suitability.config.schema import RunConfig
from suitability.errors import ConfigError, InputDataError
from suitability.grid import TargetGrid
from suitability.physiology import DEFAULT_SETS

from conftest import write_demo_config

REPO = Path(__file__).resolve().parents[1]
STARTER = REPO / "suitability" / "templates" / "starter.yaml"
DEMO_DATA = REPO / "demo_region" / "data"
runner = CliRunner(env={"COLUMNS": "80"})
CAUTION_WORDS = "not yield forecasts"


def filled_starter(folder: Path) -> Path:
    """The starter template with every EDIT-ME replaced by values for the invented demo region."""
    values = {
        "name": "Kessarine Basin (invented)",
        "crs": "EPSG:32740",
        "resolution": "4000",
        "bounds": "[300000, 7300000, 500000, 7460000]",
    }
    paths = {
        "tmin": (f"{DEMO_DATA / 'temperature.nc'}", "K", "tmin"),
        "tmax": (f"{DEMO_DATA / 'temperature.nc'}", "K", "tmax"),
        "shortwave": (f"{DEMO_DATA / 'shortwave_{month:02d}.tif'}", "W m-2", None),
        "water_availability": (f"{DEMO_DATA / 'water_availability.tif'}", "percent", None),
    }
    lines, layer = [], None
    for line in STARTER.read_text(encoding="utf-8").splitlines():
        match = re.match(r"^  (\w+):\s*$", line)
        if match:
            layer = match.group(1)
        key = re.match(r"^\s*(\w+):\s*EDIT-ME", line)
        if key:
            name = key.group(1)
            if name == "path":
                path, _, variable = paths[layer]
                indent = line[: len(line) - len(line.lstrip())]
                line = f"{indent}path: '{path}'" + (f"\n{indent}variable: {variable}" if variable else "")
            elif name == "units":
                line = line.split("EDIT-ME")[0] + f"'{paths[layer][1]}'"
            else:
                line = line.split("EDIT-ME")[0] + values[name]
        lines.append(line)
    text = "\n".join(lines).replace("folder: out ", f"folder: '{folder / 'out'}' ")
    target = folder / "starter.yaml"
    target.write_text(text, encoding="utf-8")
    return target


# ------------------------------------------------------------------------------------------------ 1. CLI


def test_version_is_printed_and_matches_the_package_metadata():
    result = runner.invoke(app, ["--version"])
    assert result.exit_code == 0, result.output
    assert result.output.strip() == f"suitability {__version__}"
    # Source: pyproject.toml, the version the package is built with.
    project = tomllib.loads((REPO / "pyproject.toml").read_text(encoding="utf-8"))["project"]
    if "version" in project:
        assert project["version"] == __version__


def test_flags_are_shown_and_parsed_as_flags(tmp_path):
    for command in ("init", "run", "brief", "check", "curves", "parameters"):
        text = runner.invoke(app, [command, "--help"]).output
        assert "<bool>" not in text, (command, text)
    help_text = runner.invoke(app, ["init", "--help"]).output
    assert re.search(r"^\s+--force\s+Replace an existing file", help_text, re.M), help_text
    target = tmp_path / "a.yaml"
    target.write_text("old", encoding="utf-8")
    assert runner.invoke(app, ["init", str(target)]).exit_code == 4  # refuses without the flag
    assert target.read_text(encoding="utf-8") == "old"
    result = runner.invoke(app, ["init", str(target), "--force"])
    assert result.exit_code == 0, result.output
    assert "EDIT-ME" in target.read_text(encoding="utf-8")


def test_check_off_a_terminal_at_80_columns_prints_whole_lines(tmp_path):
    result = runner.invoke(app, ["check", str(write_demo_config(tmp_path))])
    assert result.exit_code == 0, result.output
    lines = result.output.splitlines()
    assert not any(ch in result.output for ch in "┃│┏╭"), "a table or panel was drawn off a terminal"
    assert f"Caution: {CAUTION}" in lines
    # Each layer's facts stay on one line, whatever the width.
    assert "    CRS EPSG:4326; units K -> degC; overlap 100.0 %; nodata" in result.output
    assert any(line.startswith("- water_availability: water_availability.tif") for line in lines)
    # Long lines are not wrapped word by word: the assumption about humidity is one line longer than 80.
    dew = [line for line in lines if "dew point is taken as Tmin" in line]
    assert dew and len(dew[0]) > 80 and "FAO-56" in dew[0]
    assert not any(len(line.split()) == 1 and line.strip().isalpha() and line.strip() not in ("ok",) for line in lines)


def test_the_caution_comes_with_results_and_never_before_a_refusal(tmp_path):
    path = write_demo_config(tmp_path)
    refused = runner.invoke(app, ["check", str(path.with_name("missing.yaml"))])
    assert refused.exit_code == 2 and CAUTION_WORDS not in refused.output
    text = path.read_text().replace("classes:", "clases:")
    bad = tmp_path / "bad.yaml"
    bad.write_text(text)
    refused = runner.invoke(app, ["run", str(bad), "--no-progress"])
    assert refused.exit_code == 2 and CAUTION_WORDS not in refused.output
    usable = runner.invoke(app, ["check", str(path)])
    assert usable.exit_code == 0
    assert usable.output.index("look usable") < usable.output.index(CAUTION_WORDS)


def _geotiff(path: Path, *, bands: int, value: float, units: str | None) -> Path:
    import rasterio
    from rasterio.transform import from_origin

    with rasterio.open(path, "w", driver="GTiff", width=50, height=40, count=bands, dtype="float32",
                       crs="EPSG:32740", transform=from_origin(300000, 7460000, 4000, 4000), nodata=-9999) as dst:
        dst.write(np.full((bands, 40, 50), value, np.float32))
        if units:
            dst.update_tags(units=units)
    return path


def test_a_missing_units_hint_fits_the_layer(tmp_path):
    from suitability.config.schema import LayerSpec
    from suitability.inputs.climate import open_converted

    water = _geotiff(tmp_path / "water.tif", bands=12, value=0.6, units=None)
    with pytest.raises(InputDataError) as caught:
        open_converted("water_availability", LayerSpec(path=water), None, 512)
    message = str(caught.value)
    assert "units: fraction" in message and "units: percent" in message and "units: K" not in message
    elevation = _geotiff(tmp_path / "elevation.tif", bands=1, value=300.0, units=None)
    with pytest.raises(InputDataError, match=re.escape("(e.g. units: m) since")):
        open_converted("elevation", LayerSpec(path=elevation), None, 512)


def test_the_crs_column_shows_the_crs_of_a_netcdf_with_a_grid_mapping(tmp_path):
    # A projected NetCDF whose CRS is in a grid-mapping variable named "crs" (CF 1.8 section 5.6).
    import rioxarray  # noqa: F401
    import xarray as xr

    from suitability.inputs import inspect_inputs

    x = np.arange(302000.0, 500000.0, 4000.0)
    y = np.arange(7458000.0, 7300000.0, -4000.0)
    data = xr.DataArray(np.full((12, y.size, x.size), 290.0, np.float32), dims=("month", "y", "x"),
                        coords={"month": np.arange(1, 13), "y": y, "x": x}, name="tmin", attrs={"units": "K"})
    data = data.rio.write_crs("EPSG:32740", grid_mapping_name="crs")
    data.to_dataset().to_netcdf(tmp_path / "tmin.nc")
    config = yaml.safe_load(write_demo_config(tmp_path).read_text())
    config["climate"]["tmin"] = {"path": str(tmp_path / "tmin.nc"), "variable": "tmin", "units": "K"}
    config["climate"]["tmax"]["path"] = str(DEMO_DATA / "temperature.nc")
    path = tmp_path / "projected.yaml"
    path.write_text(yaml.safe_dump(config))
    reports = {r.layer: r for r in inspect_inputs(load_config(path))}
    assert reports["tmin"].crs == "EPSG:32740"
    result = runner.invoke(app, ["check", str(path)])
    assert "CRS EPSG:32740; units K -> degC" in result.output
    assert "CRS None" not in result.output


# ------------------------------------------------------------------------------------------------ 2. extent


def _region(tmp_path, grid: dict) -> Path:
    config = yaml.safe_load(write_demo_config(tmp_path).read_text())
    config["region"]["grid"] = grid
    path = tmp_path / "region.yaml"
    path.write_text(yaml.safe_dump(config))
    return path


def test_bounds_in_lon_lat_are_transformed_and_snapped_to_whole_cells(tmp_path):
    from pyproj import Transformer

    corners = [55.2, -24.2, 56.8, -23.1]  # lon/lat of the invented region
    path = _region(tmp_path, {"crs": "EPSG:32740", "resolution": 1000, "bounds": corners, "bounds_crs": "EPSG:4326"})
    grid = TargetGrid.from_region(load_config(path).region)
    # Independent: every corner and edge midpoint, transformed by pyproj, lies inside the grid, and the grid is
    # no more than one cell larger than the transformed extent on any side.
    to_utm = Transformer.from_crs("EPSG:4326", "EPSG:32740", always_xy=True)
    lons = np.linspace(corners[0], corners[2], 50)
    lats = np.linspace(corners[1], corners[3], 50)
    edge_lon = np.concatenate([lons, lons, np.full(50, corners[0]), np.full(50, corners[2])])
    edge_lat = np.concatenate([np.full(50, corners[1]), np.full(50, corners[3]), lats, lats])
    xs, ys = to_utm.transform(edge_lon, edge_lat)
    xmin, ymin, xmax, ymax = grid.bounds
    assert xmin <= xs.min() and xs.max() <= xmax and ymin <= ys.min() and ys.max() <= ymax
    assert xs.min() - xmin < 1000 and xmax - xs.max() < 1000 and ys.min() - ymin < 1000 and ymax - ys.max() < 1000
    assert all(b % 1000 == 0 for b in grid.bounds)  # whole cells of the resolution
    result = runner.invoke(app, ["check", str(path)])
    assert "bounds in EPSG:32740: [" in result.output and "bounds in EPSG:4326: [" in result.output
    assert f"{grid.height} rows x {grid.width} columns" in result.output


def test_the_extent_of_a_district_file_with_a_margin(tmp_path):
    import geopandas as gpd

    zones = DEMO_DATA / "districts.gpkg"
    path = _region(tmp_path, {"crs": "EPSG:32740", "resolution": 1000, "zones": str(zones), "margin": 5000})
    cfg = load_config(path)
    grid = TargetGrid.from_region(cfg.region)
    from suitability.provenance import input_files

    assert zones in input_files(cfg)  # the file that sets the grid is checksummed for the manifest and resume
    # Independent: geopandas' own total bounds of the districts in the grid's CRS, widened by the margin.
    xmin, ymin, xmax, ymax = gpd.read_file(zones).to_crs("EPSG:32740").total_bounds
    gxmin, gymin, gxmax, gymax = grid.bounds
    assert gxmin <= xmin - 5000 < gxmin + 1000 and gxmax - 1000 < xmax + 5000 <= gxmax
    assert gymin <= ymin - 5000 < gymin + 1000 and gymax - 1000 < ymax + 5000 <= gymax


def test_extent_options_that_contradict_each_other_are_refused(tmp_path):
    zones = str(DEMO_DATA / "districts.gpkg")
    for grid, words in (
        ({"crs": "EPSG:32740", "resolution": 1000, "bounds": [3e5, 7.3e6, 5e5, 7.46e6], "zones": zones}, "exactly one of 'bounds'"),
        ({"crs": "EPSG:32740", "resolution": 1000}, "exactly one of 'bounds'"),
        ({"crs": "EPSG:32740", "resolution": 1000, "zones": zones, "bounds_crs": "EPSG:4326"}, "'bounds_crs' goes with 'bounds'"),
        ({"crs": "EPSG:32740", "resolution": 1000, "bounds": [55, -24, 57, -23], "bounds_crs": "EPSG:9999999"}, "unknown CRS"),
    ):
        with pytest.raises(ConfigError, match=re.escape(words)):
            load_config(_region(tmp_path, grid))


def test_a_district_file_without_a_crs_is_refused(tmp_path):
    import geopandas as gpd

    zones = gpd.read_file(DEMO_DATA / "districts.gpkg").set_crs(None, allow_override=True)
    zones.to_file(tmp_path / "nocrs.shp")  # a Shapefile without .prj (GeoJSON would imply lon/lat)
    assert not (tmp_path / "nocrs.prj").exists()
    path = _region(tmp_path, {"crs": "EPSG:32740", "resolution": 1000, "zones": str(tmp_path / "nocrs.shp")})
    with pytest.raises(InputDataError, match="has no CRS"):
        TargetGrid.from_region(load_config(path).region)


# ------------------------------------------------------------------------------------------------ 3. template


def test_init_writes_placeholders_that_check_refuses_by_key_and_line(tmp_path):
    target = tmp_path / "mine.yaml"
    assert runner.invoke(app, ["init", str(target)]).exit_code == 0
    result = runner.invoke(app, ["check", str(target)])
    assert result.exit_code == 2
    assert "edit me" in result.output and CAUTION_WORDS not in result.output
    lines = target.read_text(encoding="utf-8").splitlines()
    found = re.findall(r"([\w.\[\]]+) \(line (\d+)\)", result.output.replace("\n", " "))
    assert {"region.name", "region.grid.crs", "climate.tmin.path", "climate.water_availability.units"} <= {k for k, _ in found}
    for key, line in found:  # each named line really holds the placeholder of that key
        assert re.match(rf"^\s*{re.escape(key.split('.')[-1])}:\s*EDIT-ME", lines[int(line) - 1]), (key, line)
    assert len(found) == sum("EDIT-ME" in line.split("#")[0] for line in lines)


def test_the_starter_filled_in_passes_check(tmp_path):
    path = filled_starter(tmp_path)
    result = runner.invoke(app, ["check", str(path)])
    assert result.exit_code == 0, result.output
    assert "look usable" in result.output


def _readme_reference() -> dict[str, tuple[str, str]]:
    text = (REPO / "README.md").read_text(encoding="utf-8")
    section = text[text.index("## Config reference"):]
    section = section[: section.index("\n## ", 5)]
    rows = {}
    for line in section.splitlines():
        match = re.match(r"^\| `([^`]+)` \| (.*) \| (.*) \|$", line)
        if match:
            rows[match.group(1)] = tuple(part.replace("\\|", "|").strip() for part in match.group(2, 3))
    return rows


def _schema_keys() -> dict[str, object]:
    """Dotted key -> default (or REQUIRED) of every leaf key of the schema."""
    import typing

    from pydantic import BaseModel, RootModel
    from pydantic_core import PydanticUndefined

    from suitability.config.schema import ClimateLayers, LayerSpec

    keys: dict[str, object] = {}

    def models_in(annotation):
        if isinstance(annotation, type) and issubclass(annotation, BaseModel):
            return [annotation]
        return [m for arg in typing.get_args(annotation) for m in models_in(arg)]

    def walk(model, prefix):
        for name, field in model.model_fields.items():
            inner = [m for m in models_in(field.annotation) if not issubclass(m, RootModel)]
            roots = [m for m in models_in(field.annotation) if issubclass(m, ClimateLayers)]
            if roots and prefix == "":
                walk(LayerSpec, f"{name}.<layer>.")
            elif roots:
                keys[prefix + name] = None
            elif inner:
                is_list = typing.get_origin(field.annotation) is list
                walk(inner[0], f"{prefix}{name}{'[]' if is_list else ''}.")
            else:
                default = field.default
                if field.default_factory is not None:
                    default = field.default_factory()
                keys[prefix + name] = "REQUIRED" if default is PydanticUndefined else default

    walk(RunConfig, "")
    return keys


def _template_comments() -> str:
    parts = []
    for line in STARTER.read_text(encoding="utf-8").splitlines():
        if "#" in line:
            parts.append(line[line.index("#"):].replace("#", " "))
    return " ".join(" ".join(parts).split())


def _words(text: str) -> str:
    return " ".join(text.replace("(optional)", " ").replace("(required)", " ").split())


def test_template_readme_and_help_document_every_key_the_same_way():
    readme = _readme_reference()
    schema = _schema_keys()
    template = _template_comments()
    assert set(readme) == set(schema), (sorted(set(schema) - set(readme)), sorted(set(readme) - set(schema)))
    for key, (meaning, default) in readme.items():
        leaf = key.split(".")[-1].replace("[]", "")
        assert re.search(rf"\b{re.escape(leaf)}\b", STARTER.read_text(encoding="utf-8")), key
        assert _words(meaning) in template, f"{key}: README says {meaning!r}; the template's comment differs"
        value = schema[key]
        if value == "REQUIRED":
            assert default.startswith("required"), (key, default)
        if default.startswith("required"):
            continue
        if isinstance(value, bool):
            expected = "true" if value else "false"
        elif isinstance(value, float):
            expected = f"{value:g}"
        elif isinstance(value, (int, str)) and not isinstance(value, bool):
            expected = str(value) if value != "" else '""'
        elif value == {}:
            expected = "{}"
        else:
            expected = None  # None (given in words: "none", "auto", "crs", ...) or a list: stated in words
        if expected is not None:
            assert default == expected, f"{key}: README default {default!r}, schema default {expected!r}"
        if default not in ("none",):
            assert re.search(rf"default:? {re.escape(default)}", template), f"{key}: template lacks 'default {default}'"
    # The run options that override config keys: the same words in the help, the README and the template.
    help_text = " ".join(runner.invoke(app, ["run", "--help"], env={"COLUMNS": "200"}).output.split())
    for option, (key, text) in CONFIG_OPTIONS.items():
        assert readme[key][0] == text, key
        assert text.lower() in help_text.lower(), option
        assert text in template, option


def test_the_output_layer_list_in_the_docs_is_the_registry():
    from suitability.variables import OUTPUT_VARIABLES

    listed = _readme_reference()["output.layers"][0].split(":", 1)[1]
    assert [name.strip() for name in listed.split(",")] == list(OUTPUT_VARIABLES)


# ------------------------------------------------------------------------------------------------ 4. assumptions


def test_assumptions_are_listed_by_check_printed_by_run_and_recorded_in_the_manifest(tmp_path):
    config = yaml.safe_load(write_demo_config(tmp_path).read_text())
    temperature = config["climate"].pop("tmin")
    config["climate"].pop("tmax")
    config["climate"].pop("elevation")
    config["climate"]["tmean"] = temperature  # the demo's tmin stands in as a tmean layer
    config["physiology"]["diurnal_range_c"] = 12.0
    config["physiology"]["lai"] = 2.5
    del config["physiology"]["c4"]["parameter_set"]
    config["season"] = {"months": [1]}
    config["scenarios"] = config["scenarios"][:1]
    config.pop("brief")
    config["output"]["datacube"] = False
    path = tmp_path / "tmean.yaml"
    path.write_text(yaml.safe_dump(config))
    expected = ["daily range of 12 °C", "sea level (101.3 kPa)", "dew point is taken as Tmin",
                "LAI is 2.5 m2 m-2", f"default set '{DEFAULT_SETS['C4']}'"]
    checked = runner.invoke(app, ["check", str(path)])
    assert checked.exit_code == 0, checked.output
    for words in expected:
        assert words in checked.output, words
    assert "default set 'bernacchi2001'" not in checked.output  # the config names its C3 set
    ran = runner.invoke(app, ["run", str(path), "--no-progress"])
    assert ran.exit_code == 0, ran.output
    for words in expected:
        assert words in ran.output, words
    assert ran.output.index("This run assumed") < ran.output.index(CAUTION_WORDS)
    manifest = json.loads((Path(config["output"]["folder"]) / "manifest.json").read_text())
    recorded = " ".join(manifest["assumptions"])
    for words in expected:
        assert words in recorded, words


def test_a_complete_config_assumes_less(tmp_path):
    from suitability.assumptions import run_assumptions

    notes = run_assumptions(load_config(write_demo_config(tmp_path)))
    text = " ".join(notes)
    # The demo gives tmin, tmax, elevation and both parameter sets; it has no vpd, humidity or lai layer.
    assert "daily range" not in text and "sea level" not in text and "parameter_set" not in text
    assert "dew point" in text and "LAI is 3" in text


# ------------------------------------------------------------------------------------------------ 6. parameters


def test_parameters_lists_every_registered_set_and_shows_one_in_full():
    from suitability.parameter_info import PARAMETER_KEYS
    from suitability.physiology.params import PARAMETER_SETS, resolve_params

    listed = runner.invoke(app, ["parameters"])
    assert listed.exit_code == 0, listed.output
    for pathway, sets in PARAMETER_SETS.items():
        for name, values in sets.items():
            assert f"- {pathway} {name} (model {values['model']}" in listed.output
            assert set(values) <= set(PARAMETER_KEYS), f"{name}: keys without unit/meaning {set(values) - set(PARAMETER_KEYS)}"
    shown = runner.invoke(app, ["parameters", "bernacchi2001"])
    assert shown.exit_code == 0, shown.output
    resolved = resolve_params("C3", "bernacchi2001")
    # Values come from the registry; g1 = 5.25 kPa^0.5 is Lin et al. (2015) Nature Clim Change 5:459, C3 grasses.
    assert resolved["g1"] == 5.25
    assert "  g1 = 5.25 kPa^0.5: slope of the Medlyn et al. (2011) stomatal model" in shown.output
    assert f"  vcmax25 = {resolved['vcmax25']:g} µmol m-2 s-1" in shown.output
    # jmax25 is derived: (2.59 - 0.035 x 25) x 80 = 137.2 (Kattge & Knorr 2007 with Tg = 25 °C, derived here).
    assert "  jmax25 = 137.2 µmol m-2 s-1" in shown.output and "Kattge & Knorr 2007" in shown.output
    assert "source: FvCB (Farquhar et al. 1980)" in shown.output
    unknown = runner.invoke(app, ["parameters", "wheat"])
    assert unknown.exit_code == 2 and "bernacchi2001" in unknown.output


def test_a_set_registered_at_run_time_is_listed():
    from suitability.physiology import params

    values = dict(params.PARAMETER_SETS["C4"]["collatz1992"], source="a toy set for this test", vmax25=45.0)
    params.register_parameter_set("C4", "toy_c4_for_listing", values)
    try:
        shown = runner.invoke(app, ["parameters", "toy_c4_for_listing"])
        assert shown.exit_code == 0, shown.output
        assert "  vmax25 = 45 µmol m-2 s-1" in shown.output and "a toy set for this test" in shown.output
    finally:
        del params.PARAMETER_SETS["C4"]["toy_c4_for_listing"]
        params._resolve_cached.cache_clear()


# ------------------------------------------------------------------------------------------------ 7. options


def test_curves_with_a_config_uses_its_sets_o2_and_elevation(tmp_path):
    import pandas as pd

    from suitability.curves import leaf_curves

    config = yaml.safe_load(write_demo_config(tmp_path).read_text())
    config["physiology"]["c4"] = {"parameter_set": "vc2000", "overrides": {}}
    config["scenarios"][0]["o2_percent"] = 18.0
    path = tmp_path / "curves.yaml"
    path.write_text(yaml.safe_dump(config))
    result = runner.invoke(app, ["curves", "--config", str(path), "--co2", "420", "--out", str(tmp_path / "c")])
    assert result.exit_code == 0, result.output
    match = re.search(r"C4 set vc2000, O2 18 %, elevation (\d+) m \(median of the elevation layer", result.output)
    assert match, result.output
    assert result.output.index("Wrote") < result.output.index(CAUTION_WORDS)
    written = pd.read_csv(tmp_path / "c" / "leaf_curves.csv")
    # Derived here: the same curves computed directly with the settings the command reported.
    from suitability.curves import settings_from_config

    settings = settings_from_config(load_config(path))
    assert settings["elevation_m"] > 0 and round(settings["elevation_m"]) == int(match.group(1))
    direct, _ = leaf_curves([420.0], c3_params=settings["c3_params"], c4_params={"parameter_set": "vc2000"},
                            o2_percent=18.0, elevation_m=settings["elevation_m"])
    np.testing.assert_allclose(written["c4_net"], direct["c4_net"], rtol=1e-6)
    sea_level, _ = leaf_curves([420.0], c4_params={"parameter_set": "vc2000"})
    assert not np.allclose(written["c4_net"], sea_level["c4_net"])  # O2 and elevation made a difference


def test_curves_elevation_and_o2_options(tmp_path):
    import pandas as pd

    from suitability.curves import leaf_curves

    result = runner.invoke(app, ["curves", "--co2", "420", "--elevation", "2000", "--o2", "21", "--out", str(tmp_path)])
    assert result.exit_code == 0, result.output
    assert "O2 21 %, elevation 2000 m (--elevation)" in result.output
    written = pd.read_csv(tmp_path / "crossover.csv")
    _, direct = leaf_curves([420.0], o2_percent=21.0, elevation_m=2000.0)
    np.testing.assert_allclose(written["quantum_yield_crossover_c"], direct["quantum_yield_crossover_c"], rtol=1e-9)
    bad = runner.invoke(app, ["curves", "--o2", "0", "--out", str(tmp_path)])
    assert bad.exit_code == 2 and CAUTION_WORDS not in bad.output


def _finished_run(tmp_path) -> Path:
    config = yaml.safe_load(write_demo_config(tmp_path).read_text())
    config["season"] = {"months": [1]}
    config["scenarios"] = config["scenarios"][:3]
    config["region"]["grid"]["resolution"] = 4000
    config["output"]["datacube"] = False
    path = tmp_path / "finished.yaml"
    path.write_text(yaml.safe_dump(config))
    brief = config.pop("brief")
    run_path = tmp_path / "run.yaml"
    run_path.write_text(yaml.safe_dump(config))
    result = runner.invoke(app, ["run", str(run_path), "--no-progress"])
    assert result.exit_code == 0, result.output
    assert brief
    return path


def test_brief_refuses_an_unknown_scenario_and_missing_outputs(tmp_path):
    path = write_demo_config(tmp_path)
    unknown = runner.invoke(app, ["brief", str(path), "--scenario", "co2_onyl"])
    assert unknown.exit_code == 2 and "co2_onyl" in unknown.output and "co2_only" in unknown.output
    (tmp_path / "out").mkdir()
    missing = runner.invoke(app, ["brief", str(path), "--scenario", "co2_only"])
    assert missing.exit_code == 3 and "baseline" in missing.output and CAUTION_WORDS not in missing.output


@pytest.mark.slow
def test_brief_for_one_scenario_and_overwrite(tmp_path):
    path = _finished_run(tmp_path)
    folder = tmp_path / "out" / "brief"
    first = runner.invoke(app, ["brief", str(path), "--scenario", "co2_only"])
    assert first.exit_code == 0, first.output
    names = {p.name for p in folder.iterdir() if not p.name.startswith(".")}
    assert any(n.endswith("_co2_only.html") for n in names) and any(n.endswith("_co2_only.pdf") for n in names), names
    assert not any("warming_only" in n for n in names), names
    assert first.output.index(".html") < first.output.index(CAUTION_WORDS)
    again = runner.invoke(app, ["brief", str(path), "--scenario", "co2_only"])
    assert again.exit_code == 4 and "--overwrite" in again.output
    replaced = runner.invoke(app, ["brief", str(path), "--scenario", "co2_only", "--overwrite"])
    assert replaced.exit_code == 0, replaced.output


# ------------------------------------------------------------------------------------------------ 5. evaluate


def _readme_example() -> str:
    text = (REPO / "README.md").read_text(encoding="utf-8")
    start = text.index("<!-- runnable example")
    block = text[start:]
    block = block[block.index("```python") + len("```python"): ]
    return block[: block.index("```")]


def test_the_readme_example_runs_and_gives_labelled_results(capsys):
    namespace: dict = {}
    exec(compile(_readme_example(), "README.md example", "exec"), namespace)  # noqa: S102 - our own README
    now, future = namespace["now"], namespace["future"]
    assert now["pathway_advantage"].dims == ("lat", "lon")
    assert now["c4_monthly_assimilation"].dims == ("month", "lat", "lon")
    assert now["c4_assimilation"].attrs["units"] == "g m-2"
    printed = capsys.readouterr().out
    assert CAUTION in printed
    # Ehleringer, Cerling & Helliker (1997) Oecologia 112:285 and Collatz et al. (1998) Oecologia 114:441: the
    # crossover temperature rises with CO2; it does not depend on air temperature, so the +2 °C does not matter.
    assert float(future["crossover_temperature"].mean()) > float(now["crossover_temperature"].mean())


def _canonical_climate():
    """A small monthly climate in canonical units, dims (month, y, x), with a 2-D latitude."""
    import xarray as xr

    rng = np.random.default_rng(16)
    y, x = np.array([-12.0, -18.0, -24.0]), np.array([40.0, 41.0, 42.0, 43.0])
    shape = (12, y.size, x.size)
    season = 4.0 * np.cos(2 * np.pi * np.arange(12) / 12)[:, None, None]
    tmin = 14.0 + season + rng.uniform(-3, 3, shape)
    data = xr.Dataset(
        {
            "tmin": (("month", "y", "x"), tmin),
            "tmax": (("month", "y", "x"), tmin + rng.uniform(8, 14, shape)),
            "shortwave": (("month", "y", "x"), rng.uniform(15, 25, shape)),
            "water_availability": (("month", "y", "x"), rng.uniform(0.4, 1.0, shape)),
            "elevation": (("y", "x"), rng.uniform(0, 1500, shape[1:])),
        },
        coords={"month": np.arange(1, 13), "y": y, "x": x},
    )
    return data.assign(latitude=(("y", "x"), np.broadcast_to(y[:, None], shape[1:]).copy()))


def test_evaluate_takes_a_lat_lon_dataset_in_its_own_units_and_order():
    import pandas as pd

    from suitability import model

    reference = model.evaluate(_canonical_climate(), {"co2_ppm": 500.0})
    base = _canonical_climate()
    # The same climate as a researcher might hold it: lat/lon dims, a time axis, other order, other units.
    # Conversions: K = degC + 273.15 (SI); 1 W m-2 = 0.0864 MJ m-2 d-1 (86 400 s per day); percent = 100 x fraction.
    theirs = base.drop_vars("latitude").rename(y="lat", x="lon", month="time")
    theirs = theirs.assign_coords(time=pd.date_range("1991-01-01", periods=12, freq="MS"))
    theirs["tmin"] = (theirs["tmin"] + 273.15).assign_attrs(units="K").transpose("lon", "time", "lat")
    theirs["tmax"] = (theirs["tmax"] + 273.15).assign_attrs(units="K")
    theirs["shortwave"] = (theirs["shortwave"] / 0.0864).assign_attrs(units="W m-2").transpose("lat", "lon", "time")
    theirs["water_availability"] = (theirs["water_availability"] * 100.0).assign_attrs(units="percent")
    theirs["elevation"] = theirs["elevation"].transpose("lon", "lat")
    import suitability

    result = suitability.evaluate(theirs, {"co2_ppm": 500.0})
    assert result["pathway_advantage"].dims == ("lat", "lon")
    np.testing.assert_allclose(result["lat"].values, base["y"].values)
    for name in ("c3_assimilation", "c4_assimilation", "pathway_advantage", "crossover_temperature"):
        np.testing.assert_allclose(result[name].values, reference[name].values, rtol=2e-5, atol=1e-6, err_msg=name)
    np.testing.assert_array_equal(result["pathway_class"].values, reference["pathway_class"].values)
    # CF attributes from the output-layer registry, and the caution and assumptions on the dataset.
    from suitability.variables import OUTPUT_LAYERS

    for name, layer in result.data_vars.items():
        assert layer.attrs["units"] == OUTPUT_LAYERS[name].units
        assert layer.attrs["long_name"] == OUTPUT_LAYERS[name].long_name
    assert result.attrs["caution"] == CAUTION
    assert "dew point is taken as Tmin" in result.attrs["assumptions"]
    assert "sea level" not in result.attrs["assumptions"]  # it has an elevation layer


def test_evaluate_derives_latitude_from_projected_coordinates_and_a_crs():
    import suitability

    base = _canonical_climate()
    # Spherical Mercator (EPSG:3857): y = R ln tan(pi/4 + phi/2), R = 6378137 m (EPSG Guidance Note 7-2,
    # "Popular Visualisation Pseudo Mercator"), so these y values lie at the latitudes of the reference.
    radius = 6378137.0
    phi = np.radians(base["y"].values)
    projected = base.drop_vars("latitude").assign_coords(
        y=radius * np.log(np.tan(np.pi / 4 + phi / 2)), x=np.radians(base["x"].values) * radius)
    reference = suitability.evaluate(base, {"co2_ppm": 420.0})
    derived = suitability.evaluate(projected, {"co2_ppm": 420.0}, crs="EPSG:3857")
    np.testing.assert_allclose(derived["c4_assimilation"].values, reference["c4_assimilation"].values, rtol=1e-5)
    with pytest.raises(InputDataError, match="cannot tell each cell's latitude"):
        suitability.evaluate(projected, {"co2_ppm": 420.0})


@pytest.mark.parametrize(
    "change, words",
    [
        (lambda d: d.drop_vars("water_availability"), "missing water_availability"),
        (lambda d: d.drop_vars(["shortwave", "tmax"]), "missing tmin and tmax (or tmean)"),
        (lambda d: d.isel(month=slice(0, 6)), "months 1..12 once each"),
        (lambda d: d.rename(y="row", x="col"), "expected y and x, lat and lon"),
        (lambda d: d.assign(tmin=d["tmin"].expand_dims(member=2)), "expected (month (or time), y, x) in any order"),
        (lambda d: d.assign(tmin=d["tmin"].assign_attrs(units="W m-2")), "cannot be converted to 'degC'"),
        (lambda d: d["tmin"], "got a DataArray"),
    ],
)
def test_evaluate_names_what_is_missing(change, words):
    import suitability

    with pytest.raises(InputDataError) as caught:
        suitability.evaluate(change(_canonical_climate()), {"co2_ppm": 420.0})
    assert words in str(caught.value)


def test_evaluate_asks_for_a_climatology_when_given_several_years():
    import pandas as pd
    import xarray as xr

    import suitability

    base = _canonical_climate().drop_vars("latitude").rename(y="lat", x="lon", month="time")
    years = xr.concat([base, base], dim="time").assign_coords(time=pd.date_range("1991-01-01", periods=24, freq="MS"))
    with pytest.raises(InputDataError, match=re.escape("groupby('time.month').mean('time')")):
        suitability.evaluate(years, {"co2_ppm": 420.0})


def test_evaluate_keeps_dask_input_lazy():
    import dask.array

    import suitability

    base = _canonical_climate()
    chunked = base.drop_vars("latitude").rename(y="lat", x="lon").chunk({"lat": 2, "lon": 2})
    lazy = suitability.evaluate(chunked, {"co2_ppm": 500.0})
    assert isinstance(lazy["c4_assimilation"].data, dask.array.Array)
    # Derived here: the same climate in memory gives the same values.
    eager = suitability.evaluate(base, {"co2_ppm": 500.0})
    np.testing.assert_allclose(lazy["c4_assimilation"].values, eager["c4_assimilation"].values, rtol=1e-5)
