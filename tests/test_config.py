"""Config schema, loading and error messages (suitability.config).

What the schema must accept and refuse is set by the project's contract (docs/contracts.md, "config.py")
and its schema by example, configs/demo.yaml; outside standards are named where a rule comes from one:
YAML 1.2 (unique mapping keys), the EPSG registry as PROJ holds it (read through pyproj), POSIX portable
file names (IEEE Std 1003.1-2017, 3.282) for scenario folder names, and FIPS 180-4 SHA-256 via hashlib.
The demo config describes the invented Kessarine Basin; configs written here are invented as well.
"""

from __future__ import annotations

import copy
import hashlib
import json
import os
import re
from pathlib import Path

import pytest
import yaml

from suitability.config import (
    RunConfig,
    dotted_key,
    is_month_pattern,
    load_config,
    validate_config,
)
from suitability.errors import ConfigError
from suitability.inputs import month_path  # the inputs expand the pattern the schema validates
from suitability.physiology import PARAMETER_SETS
from suitability.variables import INPUT_VARIABLES, OUTPUT_VARIABLES

REPO = Path(__file__).resolve().parents[1]
DEMO = REPO / "configs" / "demo.yaml"
STARTER = REPO / "suitability" / "templates" / "starter.yaml"


def demo_dict() -> dict:
    return yaml.safe_load(DEMO.read_text(encoding="utf-8"))


def write(tmp_path: Path, data: dict | str, name: str = "run.yaml") -> Path:
    path = tmp_path / name
    path.write_text(data if isinstance(data, str) else yaml.safe_dump(data, sort_keys=False), encoding="utf-8")
    return path


def error_of(tmp_path: Path, data: dict | str) -> str:
    path = write(tmp_path, data)
    with pytest.raises(ConfigError) as info:
        load_config(path)
    message = str(info.value)
    assert str(path) in message  # every config error names the file (contract: docs/contracts.md)
    return message


# ------------------------------------------------------------------------------------------ valid configs


def test_demo_config_loads_with_the_values_written_in_it():
    # Source: configs/demo.yaml itself, read independently with PyYAML's safe_load.
    raw = demo_dict()
    cfg = load_config(DEMO)
    assert cfg.region.name == raw["region"]["name"]
    assert cfg.region.grid.resolution == (raw["region"]["grid"]["resolution"],) * 2
    assert list(cfg.region.grid.bounds) == raw["region"]["grid"]["bounds"]
    assert [s.name for s in cfg.scenarios] == [s["name"] for s in raw["scenarios"]]
    assert [s.co2_ppm for s in cfg.scenarios] == [s["co2_ppm"] for s in raw["scenarios"]]
    assert [s.temperature_offset_c for s in cfg.scenarios] == [s.get("temperature_offset_c", 0.0) for s in raw["scenarios"]]
    assert cfg.baseline == raw["baseline"]
    assert set(cfg.climate.keys()) == set(raw["climate"])
    assert cfg.climate["tmin"].variable == "tmin" and cfg.climate["tmin"].units == "K"
    assert cfg.physiology.c3.parameter_set == raw["physiology"]["c3"]["parameter_set"]
    assert cfg.compute.chunk_size == raw["compute"]["chunk_size"]
    assert cfg.output.cog.compression == raw["output"]["cog"]["compression"]
    assert cfg.config_dir == DEMO.parent
    assert cfg.source_path == DEMO


def test_relative_paths_resolve_against_the_config_folder_and_home_is_expanded(tmp_path):
    # Source: contract ("relative paths resolve against the config file's folder"); expected paths are built
    # with pathlib/os.path independently of the loader.
    data = demo_dict()
    data["climate"]["elevation"]["path"] = "~/dem.tif"
    data["output"]["folder"] = "results/run1"
    sub = tmp_path / "project"
    sub.mkdir()
    cfg = load_config(write(sub, data))
    assert cfg.config_dir == sub
    assert cfg.climate["tmin"].path == Path(os.path.normpath(sub / "../demo_region/data/temperature.nc"))
    assert cfg.climate["tmin"].path == tmp_path / "demo_region" / "data" / "temperature.nc"
    assert cfg.output.folder == sub / "results" / "run1"
    assert cfg.climate["elevation"].path == Path.home() / "dem.tif"
    assert cfg.brief.zones.is_absolute()


def test_month_pattern_uses_python_format_syntax_and_keeps_other_braces():
    # Source: Python format-spec mini-language; expected names built with str.format.
    assert month_path("/d/sw_{month:02d}.tif", 3) == Path("/d/sw_{month:02d}.tif".format(month=3))
    assert month_path("/d/sw_{month}.tif", 11) == Path("/d/sw_{month}.tif".format(month=11))
    assert month_path("/d/{run}/sw_{month:02d}.tif", 7) == Path("/d/{run}/sw_07.tif")
    assert is_month_pattern("a_{month}.tif") and is_month_pattern("a_{month:02d}.tif")
    assert not is_month_pattern("a_{year}.tif")


def test_defaults_fill_in_what_a_minimal_config_leaves_out(tmp_path):
    # Source: defaults stated by the project brief for each key, as documented in templates/starter.yaml.
    data = {
        "region": {"name": "Kessarine Basin", "grid": {"crs": "EPSG:32740", "resolution": [1000, 2000],
                                                         "bounds": [300000, 7300000, 500000, 7460000]}},
        "climate": {"tmean": {"path": "t.nc", "variable": "t", "units": "K"},
                    "par": {"path": "par.tif", "units": "mol m-2 d-1"},
                    "water_stress": {"path": "ws.tif", "units": "1"}},
        "scenarios": [{"name": "now", "co2_ppm": 420}, {"name": "later", "co2_ppm": 560}],
    }
    cfg = load_config(write(tmp_path, data))
    scenario = cfg.scenarios[0]
    assert (scenario.o2_percent, scenario.temperature_offset_c, scenario.shortwave_factor,
            scenario.water_availability_factor, scenario.description) == (20.95, 0.0, 1.0, 1.0, "")
    assert cfg.baseline == "now"  # default: the first scenario
    assert cfg.region.grid.resolution == (1000.0, 2000.0)
    # Default season: the growing season, mean T >= 5 °C (ETCCDI growing-season threshold, from memory)
    # and mean Tmin >= 0 °C (common practice, no source); suitability/config/schema.py SeasonConfig.
    assert cfg.season.months is None
    assert (cfg.season.min_mean_temperature_c, cfg.season.min_mean_tmin_c) == (5.0, 0.0)
    assert cfg.classes.contested_margin == 0.05
    assert (cfg.output.layers, cfg.output.datacube, cfg.output.overwrite) == ("all", False, False)
    assert cfg.output.layer_names() == list(OUTPUT_VARIABLES)
    assert (cfg.output.cog.compression, cfg.output.cog.level, cfg.output.cog.overviews) == ("deflate", 6, True)
    assert (cfg.compute.chunk_size, cfg.compute.scheduler) == (512, "threads")
    assert (cfg.physiology.lai, cfg.physiology.diurnal_range_c) == (3.0, 10.0)
    assert cfg.brief is None
    assert cfg.output.folder == tmp_path / "out"


@pytest.mark.parametrize("scheduler", ["threads", "processes", "local-cluster", "tcp://10.0.0.5:8786", "tls://sched.example:8786"])
def test_valid_schedulers_are_accepted(tmp_path, scheduler):
    # Source: contract list of schedulers; dask.distributed address form protocol://host:port.
    data = demo_dict()
    data["compute"]["scheduler"] = scheduler
    assert load_config(write(tmp_path, data)).compute.scheduler == scheduler


def test_validate_config_accepts_a_python_mapping(tmp_path):
    # Source: contract (RunConfig.model_validate(dict)); relative paths taken from the folder given.
    cfg = validate_config(demo_dict(), tmp_path)
    assert cfg.config_dir == tmp_path
    assert cfg.output.folder == (tmp_path.parent / "out" / "demo")
    assert isinstance(RunConfig.model_validate(demo_dict()), RunConfig)


def test_the_starter_template_loads_and_documents_every_key(tmp_path):
    # Source: project brief ("document each key in the starter template with its default and unit").
    # The template's EDIT-ME placeholders are refused as they are (tests/test_first_hour.py); filled in, it loads.
    from test_first_hour import filled_starter

    cfg = load_config(filled_starter(tmp_path))
    assert len(cfg.scenarios) >= 1
    text = STARTER.read_text(encoding="utf-8")
    keys = set()

    def collect(model):
        for name, field in model.model_fields.items():
            keys.add(name)
            for candidate in _models_in(field.annotation):
                collect(candidate)

    collect(RunConfig)
    keys.discard("root")
    missing = sorted(k for k in keys if not re.search(rf"\b{re.escape(k)}\b\s*:", text))
    assert not missing, f"keys not documented in the starter template: {missing}"
    for layer in INPUT_VARIABLES:  # every input layer name is listed
        assert layer in text
    for layer in OUTPUT_VARIABLES:
        assert layer in text
    for pathway, sets in PARAMETER_SETS.items():  # the valid set names are listed
        for name in sets:
            assert name in text, (pathway, name)


def _models_in(annotation):
    import typing

    from pydantic import BaseModel

    found = []
    stack = [annotation]
    while stack:
        item = stack.pop()
        if isinstance(item, type) and issubclass(item, BaseModel):
            found.append(item)
            if "root" in item.model_fields:
                stack.append(item.model_fields["root"].annotation)
        stack.extend(typing.get_args(item))
    return found


# ------------------------------------------------------------------------------------------ hash


def test_config_hash_is_the_sha256_of_the_canonical_json_and_tracks_content(tmp_path):
    # Source: FIPS 180-4 SHA-256 (hashlib) of the sorted-key JSON of the validated config (contract).
    data = demo_dict()
    a = load_config(write(tmp_path, data, "a.yaml"))
    expected = hashlib.sha256(
        json.dumps(a.model_dump(mode="json"), sort_keys=True, separators=(",", ":"), ensure_ascii=False).encode()
    ).hexdigest()
    assert a.config_hash() == expected and re.fullmatch(r"[0-9a-f]{64}", expected)
    # Same content, other key order and comments: same hash.
    reordered = {k: data[k] for k in reversed(list(data))}
    b = load_config(write(tmp_path, "# a comment\n" + yaml.safe_dump(reordered, sort_keys=True), "b.yaml"))
    assert b.config_hash() == a.config_hash()
    # A relative path and the same file given absolutely: same hash (paths are made absolute first).
    absolute = copy.deepcopy(data)
    absolute["climate"]["elevation"]["path"] = str((tmp_path / data["climate"]["elevation"]["path"]).resolve())
    assert load_config(write(tmp_path, absolute, "c.yaml")).config_hash() == a.config_hash()
    # One number changed: another hash.
    changed = copy.deepcopy(data)
    changed["scenarios"][1]["co2_ppm"] = 701
    assert load_config(write(tmp_path, changed, "d.yaml")).config_hash() != a.config_hash()


# ------------------------------------------------------------------------------------------ errors


def test_unknown_key_names_the_dotted_key_the_line_and_the_closest_valid_key(tmp_path):
    # Source: contract (ConfigError names file, dotted key, expectation; difflib suggestion).
    data = demo_dict()
    data["scenarios"][2]["o2_percnt"] = 21
    path = write(tmp_path, data)
    line = next(i for i, text in enumerate(path.read_text().splitlines(), 1) if "o2_percnt" in text)
    message = error_of(tmp_path, data)
    assert "scenarios[2].o2_percnt" in message
    assert "did you mean 'o2_percent'" in message
    assert f"line {line}," in message


@pytest.mark.parametrize("dotted, suggestion", [
    ("region.grid.crz", "crs"),
    ("climate.tmin.unitz", "units"),
    ("scenarios[1].climate.tmin.variabel", "variable"),
    ("brief.zonez", "zones"),
    ("output.cog.overview", "overviews"),
])
def test_unknown_nested_keys_suggest_the_valid_key_at_their_level(tmp_path, dotted, suggestion):
    data = demo_dict()
    if dotted.startswith("scenarios[1].climate"):
        data["scenarios"][1]["climate"] = {"tmin": {"path": "future.nc"}}
    _set(data, dotted, 1)
    message = error_of(tmp_path, data)
    assert f"{dotted}: unknown key (did you mean {suggestion!r}?)" in message


def test_unknown_climate_layer_suggests_the_closest_layer_name(tmp_path):
    data = demo_dict()
    data["climate"]["tmpx"] = data["climate"].pop("tmax")
    message = error_of(tmp_path, data)
    assert "climate.tmpx" in message and "did you mean 'tmax'" in message


def test_all_problems_are_reported_at_once(tmp_path):
    data = demo_dict()
    data["scenarios"][0]["co2_ppm"] = -1
    data["compute"]["chunk_size"] = 500
    data["classes"]["contested_margin"] = 2
    message = error_of(tmp_path, data)
    assert "3 problems" in message
    for key in ("scenarios[0].co2_ppm", "compute.chunk_size", "classes.contested_margin"):
        assert key in message


def _set(data: dict, dotted: str, value):
    parts = re.findall(r"[^.\[\]]+", dotted)
    node = data
    for part in parts[:-1]:
        node = node[int(part)] if part.isdigit() else node.setdefault(part, {})
    last = parts[-1]
    if value is _DELETE:
        del node[int(last) if last.isdigit() else last]
    else:
        node[int(last) if last.isdigit() else last] = value


class _Delete:
    """Marker: remove the key instead of setting a value (a stable repr keeps test ids equal across xdist workers)."""

    def __repr__(self) -> str:
        return "<deleted>"


_DELETE = _Delete()

# (dotted key to set, value, key expected in the message, text expected in the message, basis of the rule)
BAD_VALUES = [
    # Ranges of suitability.config.schema.SCENARIO_RANGES (issue 13, class 6; each range's basis is there).
    ("scenarios[2].co2_ppm", -5, "scenarios[2].co2_ppm", "expected 100 to 2000 ppm", "contract: SCENARIO_RANGES"),
    ("scenarios[1].o2_percent", 0, "scenarios[1].o2_percent", "expected 1 to 40 %", "contract: SCENARIO_RANGES"),
    ("scenarios[1].o2_percent", 101, "scenarios[1].o2_percent", "expected 1 to 40 %", "contract"),
    ("scenarios[1].shortwave_factor", -0.1, "scenarios[1].shortwave_factor", "expected 0.5 to 1.5 (", "contract"),
    ("scenarios[1].water_availability_factor", -1, "scenarios[1].water_availability_factor", "expected 0 to 2 (", "contract"),
    ("scenarios[1].name", "../up", "scenarios[1].name", "letters, digits", "POSIX portable file name set, no '.'"),
    ("scenarios[1].name", "a/b", "scenarios[1].name", "letters, digits", "no path separators"),
    ("scenarios[1].name", "two words", "scenarios[1].name", "letters, digits", "POSIX portable file name set"),
    ("scenarios[1].name", "BASELINE", "scenarios[1].name", "unique (ignoring case)", "case-insensitive file systems"),
    ("scenarios[1].name", "baseline", "scenarios[1].name", "unique", "contract: unique names"),
    ("baseline", "basline", "baseline", "did you mean 'baseline'", "contract: baseline is a scenario name"),
    ("scenarios", [], "scenarios", "at least 1", "contract: >= 1 scenario"),
    ("classes.contested_margin", 1.5, "classes.contested_margin", "less than or equal to 1", "contract: 0..1"),
    ("compute.chunk_size", 500, "compute.chunk_size", "multiple of 512", "ECOSYSTEM.md: 512 tiles"),
    ("compute.scheduler", "thread", "compute.scheduler", "did you mean 'threads'", "contract scheduler list"),
    ("compute.scheduler", "tcp://host", "compute.scheduler", "tcp://host:port", "dask.distributed address"),
    ("compute.memory_limit", "lots", "compute.memory_limit", "2GiB", "dask.utils.parse_bytes forms"),
    ("compute.workers", 0, "compute.workers", "greater than or equal to 1", "common practice, no source"),
    ("output.layers", ["c3_assim"], "output.layers", "did you mean 'c3_assimilation'", "variables.OUTPUT_VARIABLES"),
    ("output.cog.compression", "lzw", "output.cog.compression", "'deflate' or 'zstd'", "contract"),
    ("output.cog.level", 12, "output.cog", "1..9", "zlib levels 1-9 (RFC 1950/zlib manual)"),
    ("region.grid.bounds", [500000, 7300000, 300000, 7460000], "region.grid", "xmin < xmax", "contract"),
    ("region.grid.bounds", [300000, 7300000, 500000], "region.grid.bounds", "expected 4 numbers", "contract: 4 numbers"),
    ("region.grid.resolution", 0, "region.grid.resolution", "greater than 0", "contract: > 0"),
    ("region.grid.resolution", [1, 2, 3], "region.grid.resolution", "[x, y]", "contract: one number or [x, y]"),
    ("region.grid.resolution", 0.001, "region.grid", "units of the CRS", "guard against degrees given for metres"),
    ("region.grid.crs", "EPSG:99999", "region.grid.crs", "unknown CRS", "EPSG registry (pyproj)"),
    ("region.like", "dem.tif", "region", "exactly one of 'grid'", "contract: grid OR like"),
    ("region.grid", _DELETE, "region", "exactly one of 'grid'", "contract: grid OR like"),
    ("season", {"months": [0, 1]}, "season.months[0]", "greater than or equal to 1", "calendar months 1..12"),
    ("season", {"months": [1, 1, 2]}, "season", "repeated: [1]", "contract: unique months"),
    ("season.months", [1, 2], "season", "not both", "contract: months OR thresholds"),
    ("climate.tmax", _DELETE, "climate", "tmin is given without tmax", "contract: tmin+tmax or tmean"),
    ("climate.shortwave", _DELETE, "climate", "give shortwave or par", "contract"),
    ("climate.water_stress", {"path": "ws.tif", "units": "1"}, "climate", "not both", "one water layer"),
    ("climate.elevation.path", "dem_{month}.tif", "climate.elevation.path", "only for monthly layers", "variables.py: elevation static"),
    ("climate.elevation.resampling", "bilinar", "climate.elevation.resampling", "did you mean 'bilinear'", "rasterio Resampling names"),
    ("climate.elevation.band", 0, "climate.elevation.band", "greater than or equal to 1", "GDAL bands count from 1"),
    ("physiology.c3.parameter_set", "bernaci", "physiology.c3", "bernacchi2001", "physiology.PARAMETER_SETS"),
    ("physiology.c4.overrides", {"vmaxx": 40}, "physiology.c4", "unknown", "physiology.PARAMETER_SETS keys"),
    ("physiology.lai", 0, "physiology.lai", "greater than 0", "variables.py: lai 0..15"),
    ("scenarios[3].climate", {"vpd": {"path": "v.nc", "units": "kPa"}}, "scenarios[3].climate.vpd", "replaces nothing", "overrides replace baseline layers"),
    ("brief.name_field", _DELETE, "brief.name_field", "required key is missing", "contract: brief {zones, name_field}"),
]


@pytest.mark.parametrize("dotted, value, key, expected, basis", BAD_VALUES, ids=[f"{b[0]}={b[1]!r}" for b in BAD_VALUES])
def test_bad_values_give_a_config_error_naming_the_key_and_the_expectation(tmp_path, dotted, value, key, expected, basis):
    data = demo_dict()
    _set(data, dotted, value)
    message = error_of(tmp_path, data)
    assert f" {key}:" in message, message
    assert expected in message, message


def test_config_error_is_also_a_value_error():
    # Source: suitability/errors.py contract (ConfigError subclasses ValueError).
    assert issubclass(ConfigError, ValueError)


def test_yaml_syntax_error_reports_the_line(tmp_path):
    # Source: YAML 1.2 flow sequences must be closed; PyYAML marks are 0-based, messages 1-based.
    text = "region:\n  name: x\nscenarios: [\n  {name: a, co2_ppm: 420}\nclasses: {}\n"
    message = error_of(tmp_path, text)
    assert "YAML error" in message
    assert re.search(r"line [45], column", message), message


def test_a_key_given_twice_is_an_error_with_both_lines(tmp_path):
    # Source: YAML 1.2 spec, 3.2.1.1 "the content of a mapping node is an unordered set of key/value
    # node pairs, with the restriction that each of the keys is unique" (plain safe_load keeps the last).
    text = DEMO.read_text().replace("  tmax:\n", "  tmin:\n", 1)
    message = error_of(tmp_path, text)
    first = next(i for i, t in enumerate(text.splitlines(), 1) if t == "  tmin:")
    assert "'tmin' is given twice" in message and f"first on line {first}" in message


def test_a_list_as_a_key_is_a_config_error_with_its_line(tmp_path):
    # Source: YAML 1.2 spec, 6.9.1 / example 2.11: "? [a, b]" is a legal complex mapping key; a config's keys
    # are names, so it is refused as a config error naming the line (found by the hypothesis test of
    # tests/reliability/test_robustness_properties.py, which raised TypeError before).
    text = "region:\n  name: x\n  ? [a, b]\n  : 1\n"
    message = error_of(tmp_path, text)
    assert "a key must be a name, not a list" in message and "line 3" in message, message


@pytest.mark.parametrize("text, expected", [("", "empty"), ("- a\n- b\n", "expected a mapping"), ("just text", "expected a mapping")])
def test_empty_or_non_mapping_files_are_refused(tmp_path, text, expected):
    assert expected in error_of(tmp_path, text)


def test_missing_config_file_is_a_config_error(tmp_path):
    with pytest.raises(ConfigError, match="not found"):
        load_config(tmp_path / "nope.yaml")


def test_dotted_key_format():
    # Source: contract example `scenarios[2].co2_ppm`.
    assert dotted_key(("scenarios", 2, "co2_ppm")) == "scenarios[2].co2_ppm"
    assert dotted_key(("region", "grid", "bounds", 0)) == "region.grid.bounds[0]"
