"""Property-based checks of the leaf models over realistic input ranges (hypothesis).

Each property follows from the model equations (derived here from Farquhar et al. 1980 and von Caemmerer
2000 eqs. 2.1-2.14 for C3; Collatz et al. 1992 and von Caemmerer 2000 ch. 4 for C4): Rd >= 0 gives net <= gross; J, M and
Aj increase with light; Wc, Wj (1 − Γ*/C) increase with C; the C3 photorespiration share is Γ*/Ci with
Γ* rising with temperature and Ci proportional to Ca.
"""

import dask.array as da
import numpy as np
import pytest
import xarray as xr
from hypothesis import assume, given, settings
from hypothesis import strategies as st

from suitability.physiology import leaf_assimilation

MODELS = [("C3", "bernacchi2001"), ("C3", "collatz1991"), ("C4", "collatz1992"), ("C4", "vc2000")]
FIELDS = ("net", "gross", "photorespiration", "intercellular_co2", "limitation")

temperature = st.floats(-10.0, 50.0)
par = st.floats(0.0, 2500.0)
co2 = st.floats(150.0, 1200.0)
vpd = st.floats(0.05, 5.0)
water = st.floats(0.0, 1.0)
o2 = st.floats(2.0, 25.0)
pressure = st.floats(60.0, 105.0)
model = st.sampled_from(MODELS)
FAST = settings(max_examples=60, deadline=None)
# Numpy warnings are errors here: invalid elements are sanitised and divisions guarded, so none may arise,
# including under dask where np.errstate does not apply.
pytestmark = pytest.mark.filterwarnings("error::RuntimeWarning")


def _leaf(model_, *args, **kwargs):
    pathway, params = model_
    return leaf_assimilation(pathway, *args, params=params, **kwargs)


@FAST
@given(model, temperature, par, co2, vpd, water, o2, pressure)
def test_net_below_gross_and_no_nan(model_, t, q, ca, d, w, o, p):
    leaf = _leaf(model_, t, q, ca, vpd_kpa=d, water_availability=w, o2_percent=o, pressure_kpa=p)
    values = [leaf.net, leaf.gross, leaf.photorespiration, leaf.intercellular_co2]
    assert all(np.isfinite(v) for v in values)
    assert leaf.net <= leaf.gross
    assert leaf.photorespiration >= 0.0
    assert leaf.limitation in (1, 2, 3)
    if model_[1] == "vc2000":
        assert np.isfinite(leaf.bundle_sheath_co2)


@FAST
@given(model, temperature, par, par, co2, vpd, water)
def test_non_decreasing_in_light(model_, t, q1, q2, ca, d, w):
    # Below its CO2 compensation point (nearly closed stomata) a C3 leaf loses more CO2 the more light
    # drives RuBP oxygenation (FvCB: gross = ρ (C − Γ*) < 0), so the property holds where C >= Γ*.
    low, high = sorted((q1, q2))
    leaf_low = _leaf(model_, t, low, ca, vpd_kpa=d, water_availability=w)
    leaf_high = _leaf(model_, t, high, ca, vpd_kpa=d, water_availability=w)
    assume(model_[0] == "C4" or leaf_high.gross >= 0)
    assert leaf_high.net >= leaf_low.net - 1e-9 * (1 + abs(leaf_low.net))


@FAST
@given(st.sampled_from(MODELS[:2]), temperature, par, co2, co2, vpd, water)
def test_c3_non_decreasing_in_co2(model_, t, q, c1, c2, d, w):
    low, high = sorted((c1, c2))
    a_low = _leaf(model_, t, q, low, vpd_kpa=d, water_availability=w).net
    a_high = _leaf(model_, t, q, high, vpd_kpa=d, water_availability=w).net
    assert a_high >= a_low - 1e-9 * (1 + abs(a_low))


def _share(leaf):
    return leaf.photorespiration / (leaf.gross + leaf.photorespiration)


@FAST
@given(st.sampled_from(MODELS[:2]), temperature, temperature, st.floats(10.0, 2500.0), co2, co2, vpd)
def test_photorespiration_share_rises_with_temperature_falls_with_co2(model_, t1, t2, q, c1, c2, d):
    cool, warm = sorted((t1, t2))
    low, high = sorted((c1, c2))
    assert _share(_leaf(model_, warm, q, low, vpd_kpa=d)) >= _share(_leaf(model_, cool, q, low, vpd_kpa=d))
    assert _share(_leaf(model_, cool, q, high, vpd_kpa=d)) <= _share(_leaf(model_, cool, q, low, vpd_kpa=d))
    if warm > cool + 1.0 and high > low + 10.0:
        assert _share(_leaf(model_, warm, q, low, vpd_kpa=d)) > _share(_leaf(model_, cool, q, low, vpd_kpa=d))
        assert _share(_leaf(model_, cool, q, high, vpd_kpa=d)) < _share(_leaf(model_, cool, q, low, vpd_kpa=d))


@settings(max_examples=15, deadline=None)
@given(model, st.lists(st.tuples(temperature, par, co2, vpd, water), min_size=1, max_size=6))
def test_scalar_numpy_xarray_dask_agree(model_, rows):
    t, q, ca, d, w = (np.array(column) for column in zip(*rows))
    numpy_leaf = _leaf(model_, t, q, ca, vpd_kpa=d, water_availability=w)
    as_xarray = [xr.DataArray(v, dims="cell") for v in (t, q, ca, d, w)]
    xarray_leaf = _leaf(model_, *as_xarray[:3], vpd_kpa=as_xarray[3], water_availability=as_xarray[4])
    as_dask = [a.chunk({"cell": 2}) for a in as_xarray]
    dask_leaf = _leaf(model_, *as_dask[:3], vpd_kpa=as_dask[3], water_availability=as_dask[4])
    for name in FIELDS:
        assert isinstance(getattr(dask_leaf, name).data, da.Array)
        np.testing.assert_array_equal(getattr(xarray_leaf, name).values, getattr(numpy_leaf, name))
        np.testing.assert_array_equal(getattr(dask_leaf, name).values, getattr(numpy_leaf, name))
    # Scalars go through numpy's scalar loops, arrays through its vectorised ones, whose exp/pow may
    # differ in the last bit: scalars agree to rounding (a few ulp), the array kinds exactly.
    for i in range(len(rows)):
        scalar_leaf = _leaf(model_, t[i], q[i], ca[i], vpd_kpa=d[i], water_availability=w[i])
        for name in FIELDS:
            np.testing.assert_allclose(getattr(scalar_leaf, name), getattr(numpy_leaf, name)[i], rtol=1e-13, atol=1e-12)


bad_temperature = st.one_of(temperature, st.floats(-200.0, -60.01), st.floats(60.01, 200.0), st.just(np.nan))
bad_par = st.one_of(par, st.floats(-1000.0, -1e-6), st.just(np.nan), st.just(np.inf))
bad_co2 = st.one_of(co2, st.floats(-100.0, 0.0), st.just(np.nan))
bad_water = st.one_of(water, st.floats(1.0001, 5.0), st.floats(-5.0, -1e-6), st.just(np.nan))


@settings(max_examples=40, deadline=None)
@given(model, st.lists(st.tuples(bad_temperature, bad_par, bad_co2, bad_water), min_size=1, max_size=8))
def test_invalid_elements_are_nan_and_only_those(model_, rows):
    t, q, ca, w = (np.array(column, dtype=float) for column in zip(*rows))
    leaf = _leaf(model_, t, q, ca, water_availability=w)
    invalid = ~((t >= -60) & (t <= 60) & (q >= 0) & np.isfinite(q) & (ca > 0) & (w >= 0) & (w <= 1))
    for name in ("net", "gross", "photorespiration", "intercellular_co2"):
        np.testing.assert_array_equal(np.isnan(getattr(leaf, name)), invalid)
    np.testing.assert_array_equal(leaf.limitation == 0, invalid)


@FAST
@given(model, temperature, co2, vpd, st.floats(0.05, 1.0), pressure)
def test_darkness_net_is_minus_day_respiration(model_, t, ca, d, w, p):
    # Derived here from every model: without light there is no electron transport (C3, von Caemmerer C4)
    # and no light-limited rate (Collatz C4), so gross = 0 and net = −Rd < 0. (With fully closed stomata,
    # W = 0, the von Caemmerer enzyme-limited rate, which assumes saturating RuBP, can dip ~1e-4 below −Rd
    # in the cold: excluded here.)
    leaf = _leaf(model_, t, 0.0, ca, vpd_kpa=d, water_availability=w, pressure_kpa=p)
    assert abs(leaf.gross) < 1e-9
    assert leaf.net < 0
