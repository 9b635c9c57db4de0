"""`suitability curves` (suitability/curves.py): the crossover temperatures use the caller's parameters.

The leaf curves and the crossover table must describe the same plants: with a non-default parameter set
or an override the crossover is the one of those parameters, not of the default sets.
"""

from __future__ import annotations

import csv
import itertools

import pytest

from suitability.curves import leaf_curves, write_curves
from suitability.physiology.crossover import quantum_yield_crossover
from suitability.physiology.params import PARAMETER_SETS

from hand_derived import crossover_with_collatz_c4  # derived here from published equations (see there)


def test_alpha_override_moves_the_crossover_of_the_curves():
    # Collatz et al. (1992) fitted alpha = 0.04 (the set's own docstring names this override); the default
    # set uses 0.0625. A smaller C4 yield needs a warmer leaf before C3 falls below it.
    c4 = {"parameter_set": "collatz1992", "alpha": 0.04}
    _, crossings = leaf_curves([420.0], c4_params=c4)
    got = float(crossings.loc[0, "quantum_yield_crossover_c"])
    # The curves' crossover is taken at the C3 canopy Ci/Ca = g1/(g1 + √D) of the default C3 set (Medlyn et
    # al. 2011; g1 5.25 kPa^0.5, Lin et al. 2015) at the curves' D = 1 kPa.
    expected = crossover_with_collatz_c4(0.04, 420.0, c3_ci_ratio=5.25 / 6.25)  # derived here: 41.79 °C
    assert got == pytest.approx(expected, abs=1e-6)
    other = crossover_with_collatz_c4(0.0625, 420.0, c3_ci_ratio=5.25 / 6.25)  # derived here: 22.66 °C
    assert got - other > 15.0  # with the collatz1992 set's own alpha the crossover is far cooler


@pytest.mark.parametrize("c3_set, c4_set", list(itertools.product(PARAMETER_SETS["C3"], PARAMETER_SETS["C4"])))
def test_crossover_of_the_curves_equals_the_physiology_for_every_set_pair(c3_set, c4_set):
    # Same equations, same parameters: the table must equal a direct call of
    # suitability.physiology.crossover.quantum_yield_crossover with those parameters.
    co2 = [280.0, 420.0, 700.0]
    _, crossings = leaf_curves(co2, c3_params=c3_set, c4_params=c4_set)
    direct = quantum_yield_crossover(co2, params={"C3": c3_set, "C4": c4_set})
    # (at the curves' D = 1 kPa, the crossover's default; NaN where the yields do not cross below 50 °C)
    assert crossings["quantum_yield_crossover_c"].tolist() == pytest.approx(list(direct), abs=1e-9, nan_ok=True)


def test_write_curves_passes_the_parameters_to_the_crossover_table(tmp_path):
    c4 = {"parameter_set": "collatz1992", "alpha": 0.04}
    paths = write_curves([420.0], tmp_path, c4_params=c4)
    with open(paths["crossover"], newline="") as handle:
        rows = list(csv.DictReader(handle))
    expected = crossover_with_collatz_c4(0.04, 420.0, c3_ci_ratio=5.25 / 6.25)  # derived here (hand_derived.py)
    assert float(rows[0]["quantum_yield_crossover_c"]) == pytest.approx(expected, abs=1e-6)


def test_curve_tables_come_with_their_units(tmp_path):
    import pandas as pd

    write_curves([420.0], tmp_path)
    for name in ("leaf_curves", "crossover"):
        table = pd.read_csv(tmp_path / f"{name}.csv")
        dictionary = pd.read_csv(tmp_path / f"{name}.columns.csv")
        assert list(dictionary["column"]) == list(table.columns)
        assert dictionary["units"].notna().all()  # every column of these tables has units
    units = dict(zip(*pd.read_csv(tmp_path / "leaf_curves.columns.csv")[["column", "units"]].to_numpy().T))
    assert units["c3_net"] == "umol m-2 s-1" and units["leaf_temperature_c"] == "degC"
