"""A leaf model added in one place runs through both engines with the same numbers.

The toy model below is invented for this test only (no published source): a C4 leaf whose gross
assimilation is the smaller of a light-limited α·Q and a Q10 capacity, minus a respiration of 2 % of
that capacity. It is registered with one ``register_leaf_model`` call and one parameter set, and the
compiled kernel must then give what the numpy engine gives (within the kernel's 1e-4 tolerance,
tests/test_kernel.py), with no change to the kernel or the physiology modules.
"""

from __future__ import annotations

import numpy as np
import pytest

from suitability import kernel
from suitability.kernel import tables
from suitability.physiology import array_ops as ops  # noqa: F401  (the equations' namespace)
from suitability.physiology import canopy, models, params
from suitability.physiology.elementwise import equation
from suitability.physiology.temperature import q10_response

TOY = "toy_linear_c4"


def toy_temperature_terms(temperature_c, p):
    capacity = p["vmax25"] * q10_response(temperature_c, p["q10"])
    return (capacity, 0.02 * capacity)


def toy_constants(p):
    return (float(p["alpha"]),)


@equation
def toy_rates(terms, constants, absorbed_par, co2_pa, o2_pa, capacity_scale):
    light = constants[0] * absorbed_par
    capacity = terms[0] * capacity_scale
    gross = ops.minimum(light, capacity)
    return models.LeafRates(gross - terms[1], gross, 0.0 * gross, ops.where(light < capacity, 2, 1), ops.nan, ops.nan)


def toy_quantum_yield(temperature_c, co2_pa, o2_pa, p):
    return p["alpha"] + 0.0 * temperature_c


@pytest.fixture
def toy_model(monkeypatch):
    monkeypatch.setitem(models.LEAF_MODELS, TOY, None)
    del models.LEAF_MODELS[TOY]
    models.register_leaf_model(models.LeafModel(
        name=TOY, pathway="C4", temperature_terms=toy_temperature_terms, constants=toy_constants, rates=toy_rates,
        quantum_yield=toy_quantum_yield, limitation_codes={0: "invalid input", 1: "capacity", 2: "light"}))
    monkeypatch.setitem(params.PARAMETER_SETS["C4"], TOY, None)
    del params.PARAMETER_SETS["C4"][TOY]
    params.register_parameter_set("C4", TOY, {
        "source": "invented for tests/test_leaf_model_registry.py (no published source)", "model": TOY,
        "vmax25": 35.0, "q10": 2.0, "alpha": 0.05, "stomatal_model": "medlyn", "g1": 1.62, "ci_ratio": 0.4,
        "water_stress_on_vcmax": False})
    yield TOY
    tables._cached_tables.cache_clear()
    params._resolve_cached.cache_clear()


def test_a_registered_toy_model_gives_the_same_numbers_in_both_engines(toy_model):
    rng = np.random.default_rng(11)
    n = 40
    tmin = rng.uniform(-2.0, 22.0, (n, 12))
    tmax = tmin + rng.uniform(3.0, 14.0, (n, 12))
    shortwave = rng.uniform(4.0, 28.0, (n, 12))
    water = rng.uniform(0.2, 1.0, (n, 12))
    latitude = rng.uniform(-45.0, 45.0, n)
    days = np.arange(12) * 30 + 15
    compiled = kernel.monthly_canopy_assimilation(
        tmin_c=tmin, tmax_c=tmax, shortwave_mj=shortwave, water_availability=water, latitude_deg=latitude,
        day_of_year=days, co2_ppm=420.0, c4_params=toy_model)
    reference = canopy.daily_canopy_assimilation(
        "C4", tmin_c=tmin, tmax_c=tmax, shortwave_mj=shortwave, latitude_deg=latitude[:, None], day_of_year=days,
        co2_ppm=420.0, water_availability=water, params=toy_model)
    assert np.all(np.isfinite(reference.gross)) and np.all(reference.gross > 0)
    for got, expected in ((compiled.c4_net, reference.net), (compiled.c4_gross, reference.gross)):
        np.testing.assert_allclose(got, expected, rtol=0, atol=1e-4 * np.abs(reference.gross).max())
    # The toy's own arithmetic reached the engines, not the default C4 model's: the numbers differ.
    default = canopy.daily_canopy_assimilation(
        "C4", tmin_c=tmin, tmax_c=tmax, shortwave_mj=shortwave, latitude_deg=latitude[:, None], day_of_year=days,
        co2_ppm=420.0, water_availability=water)
    assert np.abs(default.gross - reference.gross).max() > 0.1 * np.abs(reference.gross).max()


def test_a_parameter_set_must_name_a_registered_model_and_its_source():
    with pytest.raises(ValueError, match="unknown C4 leaf model 'nonexistent'; valid: collatz1992, vc2000"):
        params.register_parameter_set("C4", "bad_model", {"source": "test", "model": "nonexistent"})
    assert "bad_model" not in params.PARAMETER_SETS["C4"]
    with pytest.raises(ValueError, match="must name its source"):
        params.register_parameter_set("C4", "no_source", {"model": "collatz1992"})
