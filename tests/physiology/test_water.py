"""Water supply and demand of the canopy (suitability.physiology.water)."""

from __future__ import annotations

import numpy as np
import pytest

from suitability.physiology import canopy, leaf_assimilation
from suitability.physiology.water import (
    MAX_WATER_SUPPLY_MM_PER_DAY,
    leaf_transpiration,
    supply_limited_day,
    water_supply_mm,
)

from .test_canopy import realistic_days

WATER = np.linspace(0.0, 1.0, 11)


@pytest.mark.parametrize("pathway,params", [("C3", None), ("C3", "collatz1991"), ("C4", None), ("C4", "vc2000")])
def test_drought_alone_never_makes_a_lit_leaf_or_a_canopy_lose_gross_carbon(pathway, params):
    # Physics (REFERENCES §8, common practice): with Ca > Ci a lit leaf takes CO2 up; drought alone
    # cannot make gross assimilation negative. At every W the leaf keeps Ci > Γ*-level and gross > 0,
    # and the canopy's daily gross stays >= 0 and falls (weakly) with W.
    for w in WATER:
        leaf = leaf_assimilation(pathway, np.array([5.0, 20.0, 35.0]), 1200.0, 400.0, vpd_kpa=2.5,
                                 water_availability=w, params=params)
        assert np.all(leaf.gross > 0)
    days = realistic_days(40, seed=17)
    previous = None
    for w in WATER:
        day = canopy.daily_canopy_assimilation(pathway, co2_ppm=400.0, water_availability=w, params=params, **days)
        assert np.all(day.gross >= 0)
        assert np.all(day.photorespiration >= 0)
        if previous is not None:
            assert np.all(day.gross >= previous - 1e-12)
        previous = day.gross


def test_transpiration_is_capped_at_the_supply_and_gross_falls_in_proportion():
    # Haxeltine & Prentice (1996); Sitch et al. (2003) (from memory): supply S = Emax W; where the
    # demand E exceeds S the day's gross (and photorespiration) scale by S/E, respiration stays.
    days = realistic_days(30, seed=5)
    free = canopy.daily_canopy_assimilation("C3", co2_ppm=400.0, water_availability=1.0,
                                            max_water_supply_mm=1e9, **days)
    for w in (0.1, 0.4):
        limited = canopy.daily_canopy_assimilation("C3", co2_ppm=400.0, water_availability=w, **days)
        supply = MAX_WATER_SUPPLY_MM_PER_DAY * w
        share = np.minimum(1.0, supply / free.transpiration)
        np.testing.assert_allclose(limited.transpiration, np.minimum(free.transpiration, supply), rtol=1e-12)
        np.testing.assert_allclose(limited.gross, share * free.gross, rtol=1e-12)
        np.testing.assert_allclose(limited.photorespiration, share * free.photorespiration, rtol=1e-12)
        # Respiration (gross − net: day and night) goes on unchanged.
        np.testing.assert_allclose(limited.gross - limited.net, free.gross - free.net, rtol=1e-10)
        assert np.any(share < 1.0)


def test_c4_needs_less_water_per_carbon_and_the_supply_bounds_both_alike():
    # Water-use efficiency of a leaf, A/E = (Ca − Ci)/(1.6 D/P) (Fick's law, Medlyn et al. 2011): with its
    # lower Ci/Ca (g1 1.62 vs 5.25, Lin et al. 2015) a C4 leaf transpires less per carbon than a C3 leaf.
    for temperature in (15.0, 25.0, 35.0):
        leaves = {p: leaf_assimilation(p, temperature, 1200.0, 400.0, vpd_kpa=2.0) for p in ("C3", "C4")}
        ratios = {p: leaf_transpiration(leaf.net, 400.0, leaf.intercellular_co2, 2.0, 101.3) / leaf.net
                  for p, leaf in leaves.items()}
        assert ratios["C4"] < ratios["C3"]
    # Both canopies face the same supply S: where the demand E exceeds it, gross = S · gross_free / E
    # (Haxeltine & Prentice 1996; derived here), for either pathway.
    days = realistic_days(40, seed=9)
    supply = 0.2 * MAX_WATER_SUPPLY_MM_PER_DAY
    for pathway in ("C3", "C4"):
        free = canopy.daily_canopy_assimilation(pathway, co2_ppm=400.0, water_availability=1.0,
                                                max_water_supply_mm=1e9, **days)
        dry = canopy.daily_canopy_assimilation(pathway, co2_ppm=400.0, water_availability=0.2, **days)
        limited = free.transpiration > supply
        assert limited.sum() >= 10
        np.testing.assert_allclose(dry.gross[limited], supply * (free.gross / free.transpiration)[limited],
                                   rtol=1e-10)
        np.testing.assert_allclose(dry.transpiration[limited], supply, rtol=1e-12)


def test_leaf_transpiration_follows_fick_and_closes_in_the_dark():
    # Derived here from Fick's law: gs = 1.6 A/(Ca − Ci), E = gs D/P; A <= 0 shuts the stomata.
    e = leaf_transpiration(np.array([10.0, 0.0, -1.0]), 400.0, 280.0, 2.0, 100.0)
    np.testing.assert_allclose(e, [1.6 * 10.0 / 120.0 * 2.0 / 100.0 * 1e0, 0.0, 0.0])
    assert water_supply_mm(0.5) == pytest.approx(0.5 * MAX_WATER_SUPPLY_MM_PER_DAY)
    net, gross, photo, share = supply_limited_day(5.0, 10.0, 2.0, 1e9, 0.0)
    assert (gross, photo, share) == (0.0, 0.0, 0.0) and net == pytest.approx(-5.0)
