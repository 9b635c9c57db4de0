"""FvCB C3 leaf model (suitability.physiology.c3)."""

import numpy as np
import pytest

from suitability.physiology import leaf_assimilation, resolve_params
from suitability.physiology.c3 import (
    capacity_temperature_factors,
    electron_transport_rate,
    fvcb_rates,
    oxygenation_ratio,
    photorespiration_share,
)
from suitability.physiology.rubisco import rubisco_constants

O2_PA = 21227.6  # 20.95 % of 101.325 kPa


def _leaf_capacities(temperature_c, params=None):
    p = resolve_params("C3", params)
    kc, ko, gamma_star = rubisco_constants(p["kinetics"], temperature_c, O2_PA)
    fv, fj, fr = capacity_temperature_factors(temperature_c, p["vcmax_temperature_response"], p["growth_temperature_c"])
    return dict(
        vcmax=p["vcmax25"] * fv, jmax=p["jmax25"] * fj, tpu=p["tpu25"], rd=p["rd25"] * fr,
        kc=kc, ko=ko, gamma_star=gamma_star, theta=p["theta"], spectral_correction=p["spectral_correction"],
    )


@pytest.mark.parametrize("temperature_c", [5.0, 20.0, 35.0])
@pytest.mark.parametrize("par", [50.0, 2000.0])
def test_assimilation_at_gamma_star_is_minus_rd(temperature_c, par):
    # FvCB identity (Farquhar et al. 1980; von Caemmerer 2000 eq. 2.3): at C = Γ*, A = −Rd and vo/vc = 2.
    capacities = _leaf_capacities(temperature_c)
    gamma_star = capacities["gamma_star"]
    rates = fvcb_rates(gamma_star, O2_PA, par, **capacities)
    assert rates.net == pytest.approx(-capacities["rd"], abs=1e-12)
    assert rates.gross == pytest.approx(0.0, abs=1e-12)
    assert oxygenation_ratio(gamma_star, gamma_star) == 2.0


def test_photorespiration_is_half_oxygenation():
    # von Caemmerer (2000) eq. 2.3: photorespiratory release 0.5 vo = vc Γ*/C, so its share of
    # gross carboxylation vc is Γ*/C; and A = vc − 0.5 vo − Rd.
    capacities = _leaf_capacities(25.0)
    co2 = np.array([10.0, 25.0, 40.0, 80.0])
    rates = fvcb_rates(co2, O2_PA, 1200.0, **capacities)
    carboxylation = rates.gross + rates.photorespiration
    oxygenation = oxygenation_ratio(co2, capacities["gamma_star"]) * carboxylation
    np.testing.assert_allclose(rates.photorespiration, 0.5 * oxygenation, rtol=1e-12)
    np.testing.assert_allclose(rates.photorespiration / carboxylation,
                               photorespiration_share(co2, capacities["gamma_star"]), rtol=1e-12)
    np.testing.assert_allclose(rates.net, carboxylation - 0.5 * oxygenation - capacities["rd"], rtol=1e-12)


def test_rubisco_limited_rate_matches_michaelis_menten():
    # Farquhar et al. (1980): Wc = Vcmax C / (C + Kc (1 + O/Ko)); at low CO2 and high light the leaf is
    # Rubisco-limited and gross = Wc (1 − Γ*/C). Computed here directly from the equation.
    c = _leaf_capacities(25.0)
    co2 = 15.0
    rates = fvcb_rates(co2, O2_PA, 2000.0, **c)
    wc = c["vcmax"] * co2 / (co2 + c["kc"] * (1 + O2_PA / c["ko"]))
    assert rates.limitation == 1
    assert rates.gross == pytest.approx(wc * (1 - c["gamma_star"] / co2), rel=1e-12)


def test_electron_transport_limits_and_absorbed_par_convention():
    # von Caemmerer (2000) eq. 2.14 with ABSORBED PAR: I2 = Q (1 − f)/2. J → I2 at low light,
    # J → Jmax at high light; θ = 1 gives min(I2, Jmax) and θ = 0 the rectangular hyperbola.
    f, theta, jmax = 0.15, 0.7, 150.0
    low = electron_transport_rate(1e-3, jmax, theta, f)
    assert low == pytest.approx(1e-3 * (1 - f) / 2, rel=1e-5)
    assert electron_transport_rate(1e7, jmax, theta, f) == pytest.approx(jmax, rel=1e-4)
    i2 = 400.0 * (1 - f) / 2
    assert electron_transport_rate(400.0, jmax, 1.0, f) == pytest.approx(min(i2, jmax))
    assert electron_transport_rate(400.0, jmax, 0.0, f) == pytest.approx(i2 * jmax / (i2 + jmax))
    # The smaller root satisfies the quadratic.
    j = electron_transport_rate(400.0, jmax, theta, f)
    assert theta * j**2 - (i2 + jmax) * j + i2 * jmax == pytest.approx(0.0, abs=1e-9)


def test_tpu_limit_and_codes():
    # Sharkey (1985) Bot Rev 51:53 and von Caemmerer (2000) eq. 2.26, the standard form of the TPU limit:
    # A = 3 Tp − Rd, i.e. gross = 3 Tp, at high CO2 and light (code 3); carboxylation vc = 3 Tp C/(C − Γ*)
    # and photorespiratory release 0.5 vo = vc Γ*/C (von Caemmerer 2000 eq. 2.3), derived here.
    c = _leaf_capacities(25.0)
    c["tpu"] = 5.0
    co2 = np.array([10.0, 150.0])
    rates = fvcb_rates(co2, O2_PA, 2000.0, **c)
    assert list(rates.limitation) == [1, 3]
    assert rates.gross[1] == pytest.approx(15.0, rel=1e-12)
    assert rates.net[1] == pytest.approx(15.0 - c["rd"], rel=1e-12)
    carboxylation = 15.0 * 150.0 / (150.0 - c["gamma_star"])
    assert rates.photorespiration[1] == pytest.approx(carboxylation * c["gamma_star"] / 150.0, rel=1e-12)
    assert fvcb_rates(30.0, O2_PA, 100.0, **_leaf_capacities(25.0)).limitation == 2


def test_tpu_cannot_limit_at_or_below_gamma_star():
    # Derived from the standard form (gross = 3 Tp > 0): at C <= Γ* the gross rate of the other limits is
    # <= 0 < 3 Tp, so TPU never limits there, however small Tp is; at C = Γ*, A = −Rd (FvCB identity).
    c = _leaf_capacities(25.0)
    c["tpu"] = 0.01
    gamma_star = c["gamma_star"]
    rates = fvcb_rates(np.array([0.0, 0.5 * gamma_star, gamma_star]), O2_PA, 2000.0, **c)
    assert np.all(rates.limitation != 3)
    assert rates.net[2] == pytest.approx(-c["rd"], abs=1e-12)
    assert np.all(np.isfinite(rates.photorespiration))


def test_kattge_knorr_jmax_to_vcmax_ratio():
    # Kattge & Knorr (2007): Jmax25/Vcmax25 = 2.59 − 0.035 Tg; at Tg = 25 °C, 1.715; at Tg = 15 °C, 2.065.
    assert resolve_params("C3")["jmax25"] / resolve_params("C3")["vcmax25"] == pytest.approx(1.715)
    p = resolve_params("C3", {"growth_temperature_c": 15.0})
    assert p["jmax25"] / p["vcmax25"] == pytest.approx(2.065)


def test_peaked_vcmax_declines_above_optimum_arrhenius_does_not():
    # Kattge & Knorr (2007) peaked response has an optimum (~36 °C at Tg 25, from eq. 18); the Bernacchi
    # (2001) Arrhenius response rises monotonically.
    peaked = capacity_temperature_factors(np.array([30.0, 36.0, 45.0]), "peaked", 25.0)[0]
    assert peaked[1] > peaked[0] and peaked[1] > peaked[2]
    arrhenius = capacity_temperature_factors(np.array([30.0, 36.0, 45.0]), "arrhenius")[0]
    assert np.all(np.diff(arrhenius) > 0)
    # Bernacchi et al. (2001): Vcmax Ea 65.33 kJ mol-1 -> factor exp(Ea (308.15 − 298.15)/(R 298.15 308.15)) at 35 °C.
    expected = np.exp(65330.0 * 10.0 / (8.314 * 298.15 * 308.15))
    assert capacity_temperature_factors(35.0, "arrhenius")[0] == pytest.approx(expected)


def test_collatz_1991_vmax_response():
    # Collatz et al. (1991), from memory: Vm = Vm25 2.4^((T−25)/10) / (1 + exp((710 Tk − 220000)/(R Tk))).
    tk = 40.0 + 273.15
    expected = 2.4**1.5 / (1 + np.exp((710 * tk - 220000) / (8.314 * tk)))
    assert capacity_temperature_factors(40.0, "collatz1991")[0] == pytest.approx(expected)


def test_c3_gains_more_than_c4_from_doubled_co2():
    # Common practice, no source: at 25 °C and high light, doubling CO2 (350 -> 700 ppm) raises C3 net
    # assimilation much more than C4, whose CO2 concentrating mechanism nearly saturates it already.
    for c4_set in ("collatz1992", "vc2000"):
        gain3 = leaf_assimilation("C3", 25.0, 1500.0, 700.0).net / leaf_assimilation("C3", 25.0, 1500.0, 350.0).net
        gain4 = (leaf_assimilation("C4", 25.0, 1500.0, 700.0, params=c4_set).net
                 / leaf_assimilation("C4", 25.0, 1500.0, 350.0, params=c4_set).net)
        assert gain3 > 1.15 and gain3 > gain4 + 0.1


def test_dry_air_raises_photorespiration_share():
    # Medlyn et al. (2011) stomata + FvCB: higher VPD closes stomata, lowers Ci and so raises Γ*/Ci, the
    # share of carboxylation lost to photorespiration (REFERENCES §7 check). Soil water keeps Ci/Ca at
    # its optimum (stomata and capacities decline together, Zhou et al. 2013, from memory;
    # suitability/physiology/water.py), so it leaves the share unchanged.
    def share(**kwargs):
        leaf = leaf_assimilation("C3", 30.0, 1200.0, 400.0, **kwargs)
        return leaf.photorespiration / (leaf.gross + leaf.photorespiration)

    assert share(vpd_kpa=3.0) > share(vpd_kpa=1.0) > share(vpd_kpa=0.3)
    assert share(water_availability=0.3) == pytest.approx(share(water_availability=1.0), rel=1e-12)


def test_collatz1991_set_has_no_electron_transport_saturation():
    # Collatz et al. (1991): J_E = α Q (Ci − Γ*)/(Ci + 2Γ*) with no saturation, and an export limit Vm/2.
    p = resolve_params("C3", "collatz1991")
    assert p["jmax25"] == np.inf
    leaf = leaf_assimilation("C3", 25.0, 5000.0, 2000.0, params="collatz1991")
    assert leaf.limitation == 3
