"""Temperature responses (suitability.physiology.temperature)."""

import csv
from pathlib import Path

import numpy as np
import pytest
from scipy.optimize import minimize_scalar

from suitability.physiology.temperature import (
    R_GAS,
    arrhenius,
    gaussian_response,
    peaked_arrhenius,
    peaked_arrhenius_optimum_c,
    q10_response,
)

PUBLISHED = Path(__file__).parents[1] / "data" / "published"


def _rows(name):
    with open(PUBLISHED / name, newline="", encoding="utf-8") as handle:
        return list(csv.DictReader(line for line in handle if not line.startswith("#")))


def test_normalised_responses_are_one_at_25c():
    # Derived here from the definitions (Medlyn et al. 2002 eqs. 16-17): every normalised form is 1 at 25 °C.
    assert arrhenius(25.0, 65330.0) == pytest.approx(1.0, abs=1e-15)
    assert peaked_arrhenius(25.0, 71513.0, 200000.0, 641.64) == pytest.approx(1.0, abs=1e-15)
    assert q10_response(25.0, 2.1) == 1.0
    assert gaussian_response(25.0, 43.0, 26.0) == pytest.approx(1.0, abs=1e-15)


def test_q10_doubles_per_ten_degrees():
    # Definition of Q10 (as used by Collatz et al. 1991): k(T + 10) / k(T) = Q10.
    assert q10_response(35.0, 2.0) == pytest.approx(2.0)
    assert q10_response(5.0, 2.4) == pytest.approx(2.4 ** -2)


@pytest.mark.parametrize("row", _rows("bernacchi2001_kinetics.csv"), ids=lambda r: r["parameter"])
def test_arrhenius_matches_bernacchi_exponential_form(row):
    # Bernacchi et al. (2001) Table 1 give each parameter as exp(c - Ea/(R Tk)); the scaling constants c
    # are from memory. The rounded c shifts the level by up to ~2 % (REFERENCES §1), but the temperature
    # shape must agree: ratios k(T)/k(25) of the two forms are identical when Ea is the same.
    ea = float(row["activation_energy_kj_mol"]) * 1e3
    c = float(row["scaling_constant_c"])
    temperatures = np.array([5.0, 15.0, 30.0, 40.0])
    exponential_form = np.exp(c - ea / (R_GAS * (temperatures + 273.15)))
    at_25 = np.exp(c - ea / (R_GAS * 298.15))
    np.testing.assert_allclose(arrhenius(temperatures, ea), exponential_form / at_25, rtol=1e-12)
    # The level: exp(c - Ea/(R 298.15)) reproduces the tabulated 25 °C value within 2.5 % (from memory c).
    assert at_25 == pytest.approx(float(row["value_25c"]), rel=0.025)


@pytest.mark.parametrize(
    "activation, deactivation, entropy",
    [(71513.0, 200000.0, 668.39 - 1.07 * 25.0), (49884.0, 200000.0, 659.70 - 0.75 * 25.0), (60000.0, 200000.0, 650.0)],
)
def test_peaked_arrhenius_optimum_is_the_maximum(activation, deactivation, entropy):
    # Medlyn et al. (2002) eq. 18 for Topt, checked against a numerical maximisation of eq. 17 (scipy),
    # for the Kattge & Knorr (2007) Vcmax and Jmax parameters at Tg = 25 °C.
    numerical = minimize_scalar(
        lambda t: -peaked_arrhenius(t, activation, deactivation, entropy), bounds=(0.0, 60.0), method="bounded",
        options={"xatol": 1e-7},
    ).x
    assert peaked_arrhenius_optimum_c(activation, deactivation, entropy) == pytest.approx(numerical, abs=1e-3)


def test_kattge_knorr_optimum_rises_with_growth_temperature():
    # Kattge & Knorr (2007): acclimation lowers ΔS with growth temperature, which raises Topt.
    optima = [peaked_arrhenius_optimum_c(71513.0, 200000.0, 668.39 - 1.07 * tg) for tg in (10.0, 20.0, 30.0)]
    assert optima[0] < optima[1] < optima[2]


def test_gaussian_response_peaks_at_optimum():
    # von Caemmerer (2021) Gaussian form: maximum at To, symmetric about it.
    assert gaussian_response(43.0, 43.0, 26.0) > gaussian_response(42.0, 43.0, 26.0)
    assert gaussian_response(33.0, 43.0, 26.0) == pytest.approx(gaussian_response(53.0, 43.0, 26.0))
