"""leaf_assimilation dispatcher, input checking, return kinds and parameter resolution."""

import dataclasses
import warnings

import dask
import dask.array as da
import numpy as np
import pytest
import xarray as xr

from suitability.physiology import PARAMETER_SETS, LeafAssimilation, leaf_assimilation, resolve_params

FIELDS = [f.name for f in dataclasses.fields(LeafAssimilation)]
FLOAT_FIELDS = [name for name in FIELDS if name != "limitation"]


def test_pathway_is_case_insensitive_and_checked():
    assert leaf_assimilation("c3", 25.0, 800.0, 400.0).net == leaf_assimilation("C3", 25.0, 800.0, 400.0).net
    with pytest.raises(ValueError, match="C3, C4"):
        leaf_assimilation("CAM", 25.0, 800.0, 400.0)


def test_result_is_frozen():
    leaf = leaf_assimilation("C4", 25.0, 800.0, 400.0)
    with pytest.raises(dataclasses.FrozenInstanceError):
        leaf.net = 0.0


def test_c3_has_nan_c4_fields():
    # Contract (docs/contracts.md): bundle_sheath_co2 and leakiness are NaN for C3.
    leaf = leaf_assimilation("C3", 25.0, 800.0, 400.0)
    assert np.isnan(leaf.bundle_sheath_co2) and np.isnan(leaf.leakiness)
    assert leaf.intercellular_co2 == pytest.approx(400.0 * 5.25 / (5.25 + 1.0))   # Medlyn et al. (2011), D = 1 kPa


@pytest.mark.parametrize("pathway, params", [("C3", None), ("C3", "collatz1991"), ("C4", None), ("C4", "vc2000")])
def test_invalid_inputs_give_nan_elementwise_without_warnings(pathway, params):
    # Contract: invalid elements give NaN (limitation 0), valid neighbours are untouched, nothing raises or warns.
    temperature = np.array([25.0, -61.0, 61.0, np.nan, 25.0, 25.0, 25.0, 25.0, 25.0, 25.0, 25.0])
    par = np.array([900.0, 900.0, 900.0, 900.0, -1.0, 900.0, 900.0, 900.0, 900.0, np.inf, 900.0])
    co2 = np.array([400.0, 400.0, 400.0, 400.0, 400.0, 0.0, -5.0, 400.0, 400.0, 400.0, 400.0])
    water = np.array([1.0, 1.0, 1.0, 1.0, 1.0, 1.0, 1.0, 1.2, -0.1, 1.0, 1.0])
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        leaf = leaf_assimilation(pathway, temperature, par, co2, water_availability=water, params=params)
        reference = leaf_assimilation(pathway, 25.0, 900.0, 400.0, params=params)
    for name in ("net", "gross", "photorespiration", "intercellular_co2"):
        values = getattr(leaf, name)
        assert values[0] == getattr(reference, name) == values[-1]
        assert np.all(np.isnan(values[1:-1])), name
    assert list(leaf.limitation) == [reference.limitation] + [0] * 9 + [reference.limitation]
    assert leaf.limitation.dtype == np.int8


@pytest.mark.parametrize("keyword, bad", [("o2_percent", 101.0), ("pressure_kpa", 0.0), ("vpd_kpa", -0.5),
                                          ("water_availability", np.nan)])
def test_invalid_scalar_keyword_gives_nan_everywhere(keyword, bad):
    leaf = leaf_assimilation("C3", np.array([10.0, 20.0]), 900.0, 400.0, **{keyword: bad})
    assert np.all(np.isnan(leaf.net)) and list(leaf.limitation) == [0, 0]


def test_scalar_in_scalar_out():
    leaf = leaf_assimilation("C3", 25.0, 800.0, 400.0)
    assert isinstance(leaf.net, np.floating) and isinstance(leaf.limitation, np.integer)


def test_broadcasting_and_kinds_agree():
    temperature = np.linspace(5.0, 40.0, 6)
    par = np.array([[100.0], [1500.0]])
    leaf = leaf_assimilation("C4", temperature, par, 400.0, params="vc2000")
    assert leaf.net.shape == (2, 6)
    for i in range(2):
        for j in range(6):
            single = leaf_assimilation("C4", temperature[j], par[i, 0], 400.0, params="vc2000")
            for name in FIELDS:
                np.testing.assert_array_equal(getattr(leaf, name)[i, j], getattr(single, name))


def test_dask_backed_xarray_stays_lazy_and_matches_numpy():
    values = np.linspace(-5.0, 45.0, 24).reshape(4, 6)
    temperature = xr.DataArray(da.from_array(values, chunks=(2, 3)), dims=("y", "x"))
    computed = []

    class Counter(dask.callbacks.Callback):
        def _start(self, dsk):
            computed.append(len(dsk))

    for pathway, params in (("C3", None), ("C4", None), ("C4", "vc2000")):
        with Counter():
            lazy = leaf_assimilation(pathway, temperature, 1200.0, 420.0, vpd_kpa=1.7, params=params)
        assert not computed, "building the result must not compute"
        eager = leaf_assimilation(pathway, values, 1200.0, 420.0, vpd_kpa=1.7, params=params)
        for name in FIELDS:
            field = getattr(lazy, name)
            assert isinstance(field, xr.DataArray) and isinstance(field.data, da.Array), name
        results = dask.compute(*[getattr(lazy, name) for name in FIELDS])
        for name, result in zip(FIELDS, results):
            np.testing.assert_array_equal(result.values, getattr(eager, name))


def test_bare_dask_arrays_stay_lazy():
    temperature = da.from_array(np.array([10.0, 25.0, 70.0]), chunks=2)
    leaf = leaf_assimilation("C3", temperature, 1000.0, 400.0)
    assert isinstance(leaf.net, da.Array)
    np.testing.assert_array_equal(leaf.net.compute(), leaf_assimilation("C3", [10.0, 25.0, 70.0], 1000.0, 400.0).net)


# --- resolve_params ---------------------------------------------------------------------------------------

def test_every_set_names_its_source_and_resolves():
    for pathway, sets in PARAMETER_SETS.items():
        for name in sets:
            p = resolve_params(pathway, name)
            assert p["parameter_set"] == name and len(p["source"]) > 20
            leaf = leaf_assimilation(pathway, 25.0, 1000.0, 400.0, params=name)
            assert leaf.net > 0
            # Day respiration is positive at 25 °C, so net < gross (FvCB: A = gross - Rd; Collatz 1992: An = A - Rd).
            assert leaf.net < leaf.gross
            # Light limits: at most one CO2 per 8 absorbed photons for any leaf (the minimum quantum
            # requirement of oxygenic photosynthesis, from memory); tighter by the model's own initial slope:
            # FvCB: J <= I2 = Q (1 - f)/2 (smaller root of von Caemmerer 2000 eq. 2.14) and the light-limited
            # rate J (C - Γ*)/(4C + 8Γ*) < J/4 (Farquhar et al. 1980), so gross < Q (1 - f)/8; Collatz et al.
            # (1992): A <= M <= α Q (smaller roots of their two quadratics). Derived here from those forms.
            assert leaf.gross < 1000.0 / 8.0
            if p["model"] == "fvcb":
                assert leaf.gross < 1000.0 * (1.0 - p["spectral_correction"]) / 8.0
            elif p["model"] == "collatz1992":
                assert leaf.gross <= 1000.0 * p["alpha"]


def test_defaults_and_read_only():
    # The default pair is the grass pair (issue: published map methods are about grasses).
    assert resolve_params("C3")["parameter_set"] == "c3_temperate_grass"
    assert resolve_params("c4")["parameter_set"] == "c4_tropical_grass"
    with pytest.raises(TypeError):
        resolve_params("C3")["vcmax25"] = 1.0


def test_overrides_and_config_form():
    # Config form {"parameter_set": name, **overrides}; derived values follow the overrides.
    p = resolve_params("C3", {"parameter_set": "bernacchi2001", "vcmax25": 100.0})
    assert p["vcmax25"] == 100.0 and p["jmax25"] == pytest.approx(171.5) and p["rd25"] == pytest.approx(1.5)
    assert resolve_params("C3", p) == p   # resolving a resolved mapping is idempotent
    assert resolve_params("C3", {"vcmax25": 100}) is resolve_params("C3", {"vcmax25": 100.0})   # cached by value


@pytest.mark.parametrize("pathway, params, message", [
    ("C3", "nope", "bernacchi2001, c3_cereal, c3_temperate_grass, collatz1991"),
    ("C4", "bernacchi2001", "collatz1992, vc2000"),
    ("C3", {"vcmax": 50.0}, "vcmax25"),
    ("C3", {"vcmax_temperature_response": "linear"}, "peaked, arrhenius, collatz1991"),
    ("C3", {"kinetics": "caemmerer2000_c4"}, "bernacchi2001, collatz1991"),
    ("C4", {"parameter_set": "vc2000", "alpha": 0.05}, "vcmax25"),
    ("C3", {"theta": 1.5}, "between 0 and 1"),
    ("C3", {"vcmax25": -3.0}, ">= 0"),
    ("C3", {"vcmax25": "high"}, "number"),
    ("C3", {"water_stress_on_vcmax": 1}, "true or false"),
    ("C3", 3, "mapping"),
])
def test_bad_params_list_valid_choices(pathway, params, message):
    with pytest.raises(ValueError, match=message):
        resolve_params(pathway, params)


@pytest.mark.parametrize("pathway, params", [("C3", None), ("C3", "collatz1991"), ("C4", None), ("C4", "vc2000")])
def test_float32_stays_float32(pathway, params):
    # The pipeline carries float32 layers (docs/contracts.md): results stay float32, within float32
    # rounding of the float64 computation.
    t, q = np.float32([5.0, 25.0, 40.0]), np.float32([100.0, 800.0, 2000.0])
    single = leaf_assimilation(pathway, t, q, np.float32(400.0), vpd_kpa=np.float32(1.2),
                               water_availability=np.float32(0.8), params=params)
    double = leaf_assimilation(pathway, t.astype(float), q.astype(float), 400.0, vpd_kpa=1.2,
                               water_availability=0.8, params=params)
    for name in FLOAT_FIELDS:
        assert getattr(single, name).dtype == np.float32, name
        # Derived here: bundle-sheath CO2 Cs = Cm + leak/gbs divides a small difference by a small
        # conductance, which amplifies float32 rounding (eps 6e-8) by up to a few hundred.
        rtol = 5e-5 if name == "bundle_sheath_co2" else 1e-5
        np.testing.assert_allclose(getattr(single, name), getattr(double, name), rtol=rtol, atol=1e-5)
