"""Rubisco constants and the pressure convention (suitability.physiology.rubisco)."""

import csv
from pathlib import Path

import numpy as np
import pytest

from suitability.physiology import leaf_assimilation
from suitability.physiology.crossover import c3_quantum_yield
from suitability.physiology.rubisco import (
    KINETIC_SETS,
    STANDARD_PRESSURE_KPA,
    co2_partial_pressure_pa,
    effective_michaelis_constant,
    o2_partial_pressure_pa,
    rubisco_constants,
)

PUBLISHED = Path(__file__).parents[1] / "data" / "published"
PA_PER_UMOL_MOL = STANDARD_PRESSURE_KPA * 1e-3   # 1 µmol mol-1 at 101.325 kPa is 0.101325 Pa


def _rows(name):
    with open(PUBLISHED / name, newline="", encoding="utf-8") as handle:
        return {r["parameter"]: r for r in csv.DictReader(line for line in handle if not line.startswith("#"))}


def test_bernacchi_2001_values_at_25c_exactly():
    # Bernacchi et al. (2001) Table 1: Kc 404.9 µmol mol-1, Ko 278.4 mmol mol-1, Γ* 42.75 µmol mol-1 at 25 °C
    # (Γ* at O = 210 mmol mol-1); converted back from partial pressures at 101.325 kPa.
    table = _rows("bernacchi2001_kinetics.csv")
    o2_reference = o2_partial_pressure_pa(21.0, STANDARD_PRESSURE_KPA)
    kc, ko, gamma_star = rubisco_constants("bernacchi2001", 25.0, o2_reference)
    assert kc / PA_PER_UMOL_MOL == pytest.approx(float(table["kc"]["value_25c"]), rel=1e-12)
    assert ko / PA_PER_UMOL_MOL / 1e3 == pytest.approx(float(table["ko"]["value_25c"]), rel=1e-12)
    assert gamma_star / PA_PER_UMOL_MOL == pytest.approx(float(table["gamma_star"]["value_25c"]), rel=1e-12)


def test_bernacchi_km_710():
    # Bernacchi et al. (2001): Km = Kc (1 + O/Ko) = 710.3 µmol mol-1 at 25 °C and O = 210 mmol mol-1.
    o2 = o2_partial_pressure_pa(21.0, STANDARD_PRESSURE_KPA)
    kc, ko, _ = rubisco_constants("bernacchi2001", 25.0, o2)
    assert effective_michaelis_constant(kc, ko, o2) / PA_PER_UMOL_MOL == pytest.approx(710.3, abs=0.05)


def test_bernacchi_activation_energies():
    # Bernacchi et al. (2001) Table 1 Ea: recovered from two temperatures by the Arrhenius relation.
    table = _rows("bernacchi2001_kinetics.csv")
    o2 = 21000.0
    low, high = rubisco_constants("bernacchi2001", 15.0, o2), rubisco_constants("bernacchi2001", 35.0, o2)
    inverse_span = 1.0 / 288.15 - 1.0 / 308.15
    for name, index in (("kc", 0), ("ko", 1), ("gamma_star", 2)):
        ea = 8.314 * np.log(high[index] / low[index]) / inverse_span
        assert ea / 1e3 == pytest.approx(float(table[name]["activation_energy_kj_mol"]), rel=1e-9)


def test_collatz_1991_values_at_25c():
    # Collatz et al. (1991) Table A1: Kc 30 Pa, Ko 30 kPa, τ 2600 at 25 °C; Γ* = O/(2τ).
    table = _rows("collatz_kinetics.csv")
    o2 = 20900.0
    kc, ko, gamma_star = rubisco_constants("collatz1991", 25.0, o2)
    assert kc == pytest.approx(float(table["kc"]["value_25c"]))
    assert ko == pytest.approx(float(table["ko"]["value_25c"]) * 1e3)
    assert gamma_star == pytest.approx(o2 / (2 * float(table["tau"]["value_25c"])))
    # Q10 of τ 0.57: Γ* at 35 °C = Γ* at 25 °C / 0.57.
    assert rubisco_constants("collatz1991", 35.0, o2).gamma_star == pytest.approx(gamma_star / 0.57)


def test_von_caemmerer_c4_constants_at_25c():
    # von Caemmerer (2000) Table 4.1: Kc 650 µbar, Ko 450 mbar, γ* 0.000193; von Caemmerer (2021):
    # Kc 1210 µbar, Ko 292 mbar, γ* = 0.5/1310. 1 µbar = 0.1 Pa; Γ* = γ* O.
    o2 = 21000.0
    kc, ko, gamma_star = rubisco_constants("caemmerer2000_c4", 25.0, o2)
    assert (kc, ko, gamma_star) == pytest.approx((65.0, 45000.0, 0.000193 * o2))
    kc, ko, gamma_star = rubisco_constants("caemmerer2021_c4", 25.0, o2)
    assert (kc, ko, gamma_star) == pytest.approx((121.0, 29200.0, 0.5 / 1310 * o2))


def test_gamma_star_proportional_to_o2():
    # Γ* = 0.5 O / S_c/o (Farquhar et al. 1980): proportional to the O2 partial pressure.
    for kinetics in KINETIC_SETS:
        high = rubisco_constants(kinetics, 30.0, 21000.0).gamma_star
        low = rubisco_constants(kinetics, 30.0, 2000.0).gamma_star
        assert low / high == pytest.approx(2000.0 / 21000.0)


def test_partial_pressures_are_mole_fraction_times_pressure():
    # Dalton's law: p = x P. 400 µmol mol-1 at 101.325 kPa = 40.53 Pa; 20.95 % O2 = 21.23 kPa.
    assert co2_partial_pressure_pa(400.0, 101.325) == pytest.approx(40.53)
    assert o2_partial_pressure_pa(20.95, 101.325) == pytest.approx(21227.59, rel=1e-6)


def test_c3_assimilation_falls_with_elevation():
    # Pressure convention (module docstring): at a fixed CO2 mole fraction a lower air pressure lowers the
    # CO2 partial pressure against unchanged Kc, so Rubisco-limited C3 assimilation falls. 81.8 kPa is
    # 1800 m (FAO-56, Allen et al. 1998, Example 2).
    params = {"jmax25": 1000.0}   # keep the leaf Rubisco-limited at high light
    sea_level = leaf_assimilation("C3", 25.0, 1800.0, 400.0, params=params)
    high = leaf_assimilation("C3", 25.0, 1800.0, 400.0, pressure_kpa=81.8, params=params)
    assert sea_level.limitation == 1 and high.limitation == 1
    assert high.net < 0.93 * sea_level.net
    # Derived here: the electron-transport-limited rate J (C − Γ*)/(4C + 8Γ*) depends on C/Γ* only, and
    # both scale with pressure, so light-limited assimilation is the same at altitude.
    low_light_sea = leaf_assimilation("C3", 25.0, 200.0, 400.0)
    low_light_high = leaf_assimilation("C3", 25.0, 200.0, 400.0, pressure_kpa=81.8)
    assert low_light_sea.limitation == 2
    assert low_light_high.net == pytest.approx(low_light_sea.net, rel=1e-12)


def test_photorespiration_share_independent_of_pressure():
    # Derived here from the convention: Γ* ∝ O and C ∝ P, so Γ*/C and the C3 quantum yield do not depend on P.
    share = []
    for pressure in (101.325, 81.8, 60.0):
        leaf = leaf_assimilation("C3", 28.0, 1200.0, 400.0, pressure_kpa=pressure)
        share.append(leaf.photorespiration / (leaf.gross + leaf.photorespiration))
    assert share == pytest.approx([share[0]] * 3, rel=1e-12)
    assert c3_quantum_yield(30.0, 350.0, pressure_kpa=70.0) == pytest.approx(c3_quantum_yield(30.0, 350.0))
