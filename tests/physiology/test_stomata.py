"""Intercellular CO2 (suitability.physiology.stomata)."""

import csv
from pathlib import Path

import numpy as np
import pytest

from suitability.physiology import PARAMETER_SETS, leaf_assimilation, resolve_params
from suitability.physiology.stomata import capacity_scale, intercellular_co2_ratio, medlyn_ci_ratio

PUBLISHED = Path(__file__).parents[1] / "data" / "published"


def test_medlyn_ratio_agrees_with_conductance_and_fick():
    # Medlyn et al. (2011) eq. 11 with g0 = 0: gs = 1.6 (1 + g1/√D) A/Ca; Fick's law Ci = Ca − 1.6 A/gs.
    # Computed here by that independent route for several A, D and g1; must equal g1/(g1 + √D).
    ca = 400.0
    for assimilation in (2.0, 15.0, 40.0):
        for vpd in (0.2, 1.0, 3.5):
            for g1 in (1.62, 5.25):
                gs = 1.6 * (1 + g1 / np.sqrt(vpd)) * assimilation / ca
                ci = ca - 1.6 * assimilation / gs
                assert medlyn_ci_ratio(vpd, g1) == pytest.approx(ci / ca, rel=1e-12)


def test_default_g1_are_lin_2015_grass_values():
    # Lin et al. (2015) Nature Clim Change 5:459: g1 C3 grass 5.25, C4 grass 1.62 kPa^0.5.
    with open(PUBLISHED / "lin2015_g1.csv", newline="", encoding="utf-8") as handle:
        g1 = {r["plant_type"]: float(r["g1_kpa05"]) for r in csv.DictReader(l for l in handle if l[0] != "#")}
    assert resolve_params("C3")["g1"] == g1["C3 grass"]
    assert resolve_params("C4")["g1"] == g1["C4 grass"]
    assert all(PARAMETER_SETS["C4"][name]["g1"] == g1["C4 grass"] for name in PARAMETER_SETS["C4"] if name != "c4_cereal")
    # The plant-type sets take the g1 of their type (Lin et al. 2015: C3 crop 5.79, C4 crop 1.79).
    assert resolve_params("C3", "c3_temperate_grass")["g1"] == g1["C3 grass"]
    assert resolve_params("C4", "c4_tropical_grass")["g1"] == g1["C4 grass"]
    assert resolve_params("C3", "c3_cereal")["g1"] == g1["C3 crop"]
    assert resolve_params("C4", "c4_cereal")["g1"] == g1["C4 crop"]


def test_medlyn_limits_and_soil_water_keep_the_optimum():
    # Medlyn et al. (2011) with g0 = 0: Ci/Ca = g1/(g1 + √D); D = 0 gives Ci = Ca; g1 = 0 closes the
    # stomata. Soil water does not move a leaf off the optimum (stomata and capacities decline together,
    # Zhou et al. 2013, from memory; suitability/physiology/water.py): a lit leaf keeps its Ci at any W.
    assert medlyn_ci_ratio(1.5, 5.25) == pytest.approx(5.25 / (5.25 + np.sqrt(1.5)), rel=1e-14)
    assert medlyn_ci_ratio(0.0, 5.25) == 1.0
    assert medlyn_ci_ratio(0.0, 0.0) == 0.0
    for pathway in ("C3", "C4"):
        dry = leaf_assimilation(pathway, 30.0, 1500.0, 400.0, vpd_kpa=2.0, water_availability=0.0)
        wet = leaf_assimilation(pathway, 30.0, 1500.0, 400.0, vpd_kpa=2.0, water_availability=1.0)
        assert dry.intercellular_co2 == wet.intercellular_co2
        assert dry.gross > 0


def test_fixed_ratio_option():
    # Fixed Ci/Ca (0.7 C3, 0.4 C4; common practice, no source), independent of VPD and water availability.
    p3 = resolve_params("C3", {"stomatal_model": "fixed"})
    assert intercellular_co2_ratio(3.0, p3) == 0.7
    leaf = leaf_assimilation("C4", 30.0, 1000.0, 400.0, vpd_kpa=np.array([0.5, 3.0]),
                             params={"stomatal_model": "fixed"})
    np.testing.assert_allclose(leaf.intercellular_co2, [160.0, 160.0])


def test_non_stomatal_limitation_switch():
    # Optional Vcmax reduction by water availability (param switch): only with the switch on does a
    # Rubisco-limited C3 leaf with fixed Ci lose carboxylation capacity in proportion to W.
    base = {"stomatal_model": "fixed", "jmax25": 1000.0}
    off = leaf_assimilation("C3", 25.0, 2000.0, 400.0, water_availability=0.5, params=base)
    on = leaf_assimilation("C3", 25.0, 2000.0, 400.0, water_availability=0.5,
                           params={**base, "water_stress_on_vcmax": True})
    assert on.limitation == 1
    assert on.gross == pytest.approx(0.5 * off.gross)
    assert capacity_scale(0.3, resolve_params("C3")) == 1.0
