"""`suitability curves` (suitability/curves.py): the crossover temperatures use the caller's parameters.

The leaf curves and the crossover table must describe the same plants: with a non-default parameter set
or an override the crossover is the one of those parameters, not of the default sets.
"""

from __future__ import annotations

import csv
import itertools
import math

import pytest
from scipy.optimize import brentq

from suitability.curves import leaf_curves, write_curves
from suitability.physiology.crossover import crossover_temperature
from suitability.physiology.params import PARAMETER_SETS

R = 8.314  # J mol-1 K-1


def hand_crossover_collatz_alpha(alpha: float, co2_ppm: float, o2_percent: float = 20.95) -> float:
    """Crossover [°C] of the default C3 set (f = 0.32, Bernacchi Γ*) against a Collatz C4 yield ``alpha``.

    Derived here, independently of the package code:
    C3 light-limited yield φ3 = φ0 (C − Γ*)/(C + 2Γ*), φ0 = (1 − f)/8 (Farquhar et al. 1980; the form of
    Ehleringer et al. 1997 and Collatz et al. 1998); C4 yield = α (Collatz et al. 1992).
    φ3 = α  <=>  Γ* = C (φ0 − α)/(φ0 + 2α)   (C and Γ* as mole fractions at the same pressure).
    Γ*(T) = 42.75 µmol mol-1 · exp[37830 (Tk − 298.15)/(298.15 R Tk)] at O = 210 mmol mol-1
    (Bernacchi et al. 2001, Table 1), scaled in proportion to O (Γ* = 0.5 O/τ, Farquhar et al. 1980).
    Solved for T with scipy's brentq on 0-50 °C.
    """
    phi0 = (1.0 - 0.32) / 8.0  # f = 0.32: the documented default of the bernacchi2001 set (params.py)
    gamma_needed = co2_ppm * (phi0 - alpha) / (phi0 + 2.0 * alpha)

    def gamma_star(t_c):
        tk = t_c + 273.15
        return 42.75 * (o2_percent / 21.0) * math.exp(37830.0 * (tk - 298.15) / (298.15 * R * tk))

    return brentq(lambda t: gamma_star(t) - gamma_needed, 0.0, 50.0, xtol=1e-12)


def test_alpha_override_moves_the_crossover_of_the_curves():
    # Collatz et al. (1992) fitted alpha = 0.04 (the set's own docstring names this override); the default
    # set uses 0.0625. A smaller C4 yield needs a warmer leaf before C3 falls below it.
    c4 = {"parameter_set": "collatz1992", "alpha": 0.04}
    _, crossings = leaf_curves([420.0], c4_params=c4)
    got = float(crossings.loc[0, "crossover_temperature_c"])
    expected = hand_crossover_collatz_alpha(0.04, 420.0)  # derived here (see the helper): 45.64 °C
    assert got == pytest.approx(expected, abs=1e-6)
    default = hand_crossover_collatz_alpha(0.0625, 420.0)  # derived here: 26.05 °C with the default alpha
    assert got - default > 15.0  # the old behaviour (default parameters) gave the default value


@pytest.mark.parametrize("c3_set, c4_set", list(itertools.product(PARAMETER_SETS["C3"], PARAMETER_SETS["C4"])))
def test_crossover_of_the_curves_equals_the_physiology_for_every_set_pair(c3_set, c4_set):
    # Same equations, same parameters: the table must equal a direct call of
    # suitability.physiology.crossover.crossover_temperature with those parameters.
    co2 = [280.0, 420.0, 700.0]
    _, crossings = leaf_curves(co2, c3_params=c3_set, c4_params=c4_set)
    direct = crossover_temperature(co2, params={"C3": c3_set, "C4": c4_set})
    assert crossings["crossover_temperature_c"].tolist() == pytest.approx(list(direct), abs=1e-9)


def test_write_curves_passes_the_parameters_to_the_crossover_table(tmp_path):
    c4 = {"parameter_set": "collatz1992", "alpha": 0.04}
    paths = write_curves([420.0], tmp_path, c4_params=c4)
    with open(paths["crossover"], newline="") as handle:
        rows = list(csv.DictReader(handle))
    assert float(rows[0]["crossover_temperature_c"]) == pytest.approx(hand_crossover_collatz_alpha(0.04, 420.0),
                                                                       abs=1e-6)  # derived here (helper above)
