"""Robustness properties (hypothesis): configs near the schema only ever fail as ConfigError with a
message; physiology functions never raise on any float (NaN, ±inf, subnormal, ±1.8e308) and give NaN,
not infinities, for what they cannot compute, leaving valid neighbours untouched.

Checked against the project's contracts: issue 6 ("Robustness properties"), docs/contracts.md
("Physiology never raises on float input: invalid elements ... give NaN for that element") and the
config module's promise of one ConfigError naming file, key and what was expected. The base config is
the invented demo config.
"""

from __future__ import annotations

import copy
import math
import warnings

import numpy as np
import pytest
import yaml
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from suitability import physiology
from suitability.config import RunConfig, load_config, validate_config
from suitability.errors import ConfigError

from .conftest import demo_config

BASE = demo_config(brief=True)


def _known_keys(node, found: set[str]) -> set[str]:
    if isinstance(node, dict):
        for key, value in node.items():
            found.add(key)
            _known_keys(value, found)
    elif isinstance(node, list):
        for item in node:
            _known_keys(item, found)
    return found


# Keys of the demo plus every field name of the schema, so that added keys are often valid ones in the
# wrong place or a second of a pair that excludes each other (tmean with tmin, par with shortwave...).
KEYS = sorted(_known_keys(BASE, set()) | {"tmean", "par", "water_stress", "vpd", "humidity", "lai", "like", "mask",
                                           "band", "nodata", "variable", "min_mean_temperature_c", "climate",
                                           "threads_per_worker", "engine", "overrides", "parameter_set"})
ODD_TEXT = ["", " ", "EPSG:4326", "EPSG:0", "+proj=longlat", "all", "none", "threads", "tcp://host:1", "tcp://:x",
            "{month}", "{month:02d}", "{month:q}", "../x", "/", "~", "2GiB", "-1GiB", "K", "degC", "percent",
            "bernacchi2001", "vc2000", "nearest", "bilinear", "mode", "W m-2", "yes", "no", "null", "1e999", "NaN"]
scalars = st.one_of(
    st.none(), st.booleans(), st.integers(-(10**15), 10**15), st.sampled_from([0, -1, 1, 12, 13, 512, 513]),
    st.floats(allow_nan=True, allow_infinity=True), st.sampled_from(ODD_TEXT), st.text(max_size=12),
)
values = st.recursive(
    scalars,
    lambda inner: st.one_of(st.lists(inner, max_size=4), st.dictionaries(st.sampled_from(KEYS) | st.text(max_size=6),
                                                                          inner, max_size=3)),
    max_leaves=8,
)


def _paths(node, prefix=()):
    yield prefix
    if isinstance(node, dict):
        for key, value in node.items():
            yield from _paths(value, prefix + (key,))
    elif isinstance(node, list):
        for index, value in enumerate(node):
            yield from _paths(value, prefix + (index,))


@st.composite
def near_schema_configs(draw):
    """The demo config after 1-4 random edits: replace a value, delete a key or item, add a key."""
    config = copy.deepcopy(BASE)
    for _ in range(draw(st.integers(1, 4))):
        paths = list(_paths(config))
        path = draw(st.sampled_from(paths if len(paths) == 1 or draw(st.integers(0, 19)) == 7 else paths[1:]))
        parent = config
        for part in path[:-1]:
            parent = parent[part]
        action = draw(st.sampled_from(["replace", "delete", "add"]))
        if not path:
            if action == "replace":
                config = draw(values)
                if not isinstance(config, dict):
                    return config
            continue
        last = path[-1]
        if action == "replace":
            parent[last] = draw(values)
        elif action == "delete":
            del parent[last]
        elif isinstance(parent[last], dict):
            parent[last][draw(st.sampled_from(KEYS) | st.text(max_size=6))] = draw(values)
        elif isinstance(parent[last], list):
            parent[last].append(draw(values))
    return config


def _only_config_errors(call):
    try:
        result = call()
    except ConfigError as error:
        message = str(error)
        assert message.strip(), "a ConfigError without a message"
        return message
    assert isinstance(result, RunConfig)
    return None


@settings(max_examples=300, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(near_schema_configs())
def test_configs_near_the_schema_fail_only_as_config_errors(tmp_path_factory, data):
    folder = tmp_path_factory.getbasetemp()
    message = _only_config_errors(lambda: validate_config(data, folder))
    if message is not None:
        assert message.startswith("<config>: "), message  # names its source


@settings(max_examples=200, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(near_schema_configs(), st.lists(st.tuples(st.integers(0, 10**6), st.sampled_from(
    ["", ":", "- ", "\t", "  ", "{", "}", "[", "]", '"', "'", "&a", "*a", "!!python/name:os.system", "#", "\n", "%"])),
    max_size=3))
def test_yaml_files_near_the_schema_fail_only_as_config_errors(tmp_path_factory, data, edits):
    text = yaml.safe_dump(data, sort_keys=False, allow_unicode=True)
    for position, insert in edits:  # raw text edits: broken quotes, indentation, tags, anchors
        position %= len(text) + 1
        text = text[:position] + insert + text[position:]
    path = tmp_path_factory.getbasetemp() / "fuzzed.yaml"
    path.write_text(text, encoding="utf-8")
    message = _only_config_errors(lambda: load_config(path))
    if message is not None:
        assert message.startswith(f"{path}: "), message


# ------------------------------------------------------------------------------------------- physiology

any_float = st.floats(allow_nan=True, allow_infinity=True, allow_subnormal=True)
# Ordinary values of every argument: the "valid neighbour" placed beside the fuzzed element.
ORDINARY = {"temperature_c": 25.0, "absorbed_par": 800.0, "co2_ppm": 420.0, "o2_percent": 20.95, "pressure_kpa": 95.0,
            "vpd_kpa": 1.2, "water_availability": 0.8, "tmin_c": 14.0, "tmax_c": 27.0, "shortwave_mj": 20.0,
            "latitude_deg": -24.0, "day_of_year": 15.0, "elevation_m": 600.0, "actual_vapour_pressure_kpa": 1.5,
            "lai": 3.0}
FUNCTIONS = {
    "leaf_assimilation C3": (lambda **a: physiology.leaf_assimilation("C3", **a),
                             ["temperature_c", "absorbed_par", "co2_ppm", "o2_percent", "pressure_kpa", "vpd_kpa",
                              "water_availability"]),
    "leaf_assimilation C4": (lambda **a: physiology.leaf_assimilation("C4", **a),
                             ["temperature_c", "absorbed_par", "co2_ppm", "o2_percent", "pressure_kpa", "vpd_kpa",
                              "water_availability"]),
    "daily_canopy_assimilation C3": (lambda **a: physiology.daily_canopy_assimilation("C3", **a),
                                     ["tmin_c", "tmax_c", "shortwave_mj", "latitude_deg", "day_of_year", "co2_ppm",
                                      "elevation_m", "actual_vapour_pressure_kpa", "water_availability", "lai",
                                      "o2_percent"]),
    "daily_canopy_assimilation C4": (lambda **a: physiology.daily_canopy_assimilation("C4", **a),
                                     ["tmin_c", "tmax_c", "shortwave_mj", "latitude_deg", "day_of_year", "co2_ppm",
                                      "elevation_m", "vpd_kpa", "water_availability", "lai", "o2_percent"]),
    "quantum_yield_crossover": (physiology.quantum_yield_crossover, ["co2_ppm", "o2_percent", "pressure_kpa"]),
    "c3_quantum_yield": (physiology.c3_quantum_yield, ["temperature_c", "co2_ppm", "o2_percent", "pressure_kpa"]),
    "c4_quantum_yield": (physiology.c4_quantum_yield, ["temperature_c", "co2_ppm", "o2_percent", "pressure_kpa"]),
}
FLOAT_FUNCTIONS = {"leaf_assimilation", "daily_canopy_assimilation", "quantum_yield_crossover", "c3_quantum_yield",
                   "c4_quantum_yield"}


def test_every_public_float_function_of_physiology_is_covered():
    public = {name for name in physiology.__all__ if callable(getattr(physiology, name))
              and not isinstance(getattr(physiology, name), type) and name != "resolve_params"}
    assert public == FLOAT_FUNCTIONS


def _float_fields(result) -> dict[str, np.ndarray]:
    if hasattr(result, "__dataclass_fields__") or hasattr(result, "net"):
        names = [n for n in ("net", "gross", "photorespiration", "intercellular_co2", "bundle_sheath_co2", "leakiness")
                 if hasattr(result, n)]
        return {n: np.asarray(getattr(result, n), dtype=float) for n in names}
    return {"value": np.asarray(result, dtype=float)}


@pytest.mark.parametrize("name", list(FUNCTIONS))
@settings(max_examples=60, deadline=None)
@given(data=st.data())
def test_physiology_never_raises_and_gives_nan_not_infinity(name, data):
    function, arguments = FUNCTIONS[name]
    fuzzed = {a: data.draw(st.one_of(any_float, st.sampled_from([ORDINARY[a]])), label=a) for a in arguments}
    # Element 0: the fuzzed values; element 1: ordinary values only.
    arrays = {a: np.array([fuzzed[a], ORDINARY[a]]) for a in arguments}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)  # warnings are allowed; exceptions are not
        together = _float_fields(function(**arrays))
        alone = _float_fields(function(**{a: ORDINARY[a] for a in arguments}))
    for field, values in together.items():
        assert values.shape == (2,), field
        assert not np.isinf(values).any(), (field, values, fuzzed)
        reference = float(alone[field])
        if math.isnan(reference):
            assert math.isnan(values[1]), field
        else:  # the ordinary neighbour is untouched by the fuzzed element (to float rounding)
            assert values[1] == pytest.approx(reference, rel=1e-12, abs=1e-12), (field, fuzzed)
