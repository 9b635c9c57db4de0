"""C3 acclimation to the growth temperature (Kattge & Knorr 2007) as both engines run it.

Kattge & Knorr (2007) Plant Cell Environ 30:1176 let the entropy of the peaked Vcmax and Jmax responses fall
with growth temperature Tg: ΔS = 668.39 − 1.07 Tg (Vcmax) and 659.70 − 0.75 Tg (Jmax), Hd = 200 kJ mol-1,
Ha 71.513 / 49.884 kJ mol-1, and Jmax25/Vcmax25 = 2.59 − 0.035 Tg; the coefficients as the CLM5 technical
note (Lawrence et al. 2018, eqs. 9.15-9.16, seen) and rpmodel's ftemp_inst_vcmax (seen) print them. The
optimum of a peaked response is Topt = Hd / (ΔS − R ln(Ha/(Hd − Ha))) (Medlyn et al. 2002 eq. 18). So
acclimation moves the Vcmax optimum by Hd · 1.07 / (ΔS − R ln(...))² ≈ 0.51 °C per °C of Tg (derived here).
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.optimize import minimize_scalar

from suitability.physiology.c3 import (
    GROWTH_TEMPERATURE_RANGE_C,
    fvcb_acclimated_terms,
    fvcb_constants,
    fvcb_temperature_terms,
)
from suitability.physiology.params import resolve_params
from suitability.physiology.temperature import R_GAS, peaked_arrhenius_optimum_c

HA, HD = 71513.0, 200000.0


def model_vcmax(leaf_c, growth_c, params=None):
    """Vcmax [µmol m-2 s-1] as the engines compute it: tabulated terms completed for Tg."""
    p = resolve_params("C3", params)
    return fvcb_acclimated_terms(fvcb_temperature_terms(leaf_c, p), fvcb_constants(p), growth_c)[3]


def model_optimum(growth_c):
    return minimize_scalar(lambda t: -float(model_vcmax(t, growth_c)), bounds=(10.0, 55.0), method="bounded",
                           options={"xatol": 1e-6}).x


@pytest.mark.parametrize("growth_c", [12.0, 20.0, 25.0, 30.0, 34.0])
def test_vcmax_optimum_follows_kattge_knorr_with_growth_temperature(growth_c):
    # Kattge & Knorr (2007) ΔS(Tg) with Medlyn et al. (2002) eq. 18 for the optimum (module docstring).
    expected = peaked_arrhenius_optimum_c(HA, HD, 668.39 - 1.07 * growth_c)
    assert model_optimum(growth_c) == pytest.approx(expected, abs=1e-3)


def test_the_optimum_moves_about_half_a_degree_per_degree_of_growth_temperature():
    # Derived here from Kattge & Knorr (2007) and Medlyn et al. (2002) eq. 18: dTopt/dTg = 1.07 Hd / (ΔS −
    # R ln(Ha/(Hd − Ha)))², 0.51 at Tg = 20 °C; from 15 to 30 °C the optimum rises by about 7.6 °C.
    denominator = 668.39 - 1.07 * 20.0 - R_GAS * np.log(HA / (HD - HA))
    slope = 1.07 * HD / denominator**2
    assert slope == pytest.approx(0.51, abs=0.01)
    rise = model_optimum(30.0) - model_optimum(15.0)
    assert rise == pytest.approx(15.0 * slope, rel=0.03)


def test_growth_temperature_outside_the_data_is_held_at_the_nearest_end():
    # The range of Kattge & Knorr's data, 11-35 °C (from memory), as the CLM5 technical note restricts it.
    low, high = GROWTH_TEMPERATURE_RANGE_C
    leaf = np.linspace(0.0, 50.0, 11)
    np.testing.assert_array_equal(model_vcmax(leaf, 2.0), model_vcmax(leaf, low))
    np.testing.assert_array_equal(model_vcmax(leaf, 45.0), model_vcmax(leaf, high))


def test_jmax25_follows_growth_temperature_where_the_set_derives_it():
    # Kattge & Knorr (2007): Jmax25/Vcmax25 = 2.59 − 0.035 Tg, e.g. 2.065 at 15 °C and 1.54 at 30 °C.
    p = resolve_params("C3")
    for growth_c, ratio in ((15.0, 2.065), (30.0, 1.54)):
        terms = fvcb_acclimated_terms(fvcb_temperature_terms(25.0, p), fvcb_constants(p), growth_c)
        assert terms[4] / terms[3] == pytest.approx(ratio, rel=1e-12)
    fixed = resolve_params("C3", {"jmax25": 150.0})  # a given Jmax25 stays as given
    terms = fvcb_acclimated_terms(fvcb_temperature_terms(25.0, fixed), fvcb_constants(fixed), 15.0)
    assert terms[4] == pytest.approx(150.0, rel=1e-12)


def test_the_sets_own_growth_temperature_gives_the_former_values():
    # Derived here: with Tg = the set's growth_temperature_c the acclimated terms are the peaked responses
    # of Kattge & Knorr at that Tg, as computed before the split (c3.capacity_temperature_factors).
    from suitability.physiology.c3 import capacity_temperature_factors

    p = resolve_params("C3")
    leaf = np.linspace(-5.0, 50.0, 56)
    fv, _, _ = capacity_temperature_factors(leaf, "peaked", p["growth_temperature_c"])
    np.testing.assert_allclose(model_vcmax(leaf, p["growth_temperature_c"]), p["vcmax25"] * fv, rtol=1e-12)
