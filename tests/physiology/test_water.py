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


def test_c4_needs_less_water_per_carbon_and_fixes_more_on_the_same_supply():
    # Water-use efficiency A/E = (Ca − Ci)/(1.6 D/P) (Fick's law, Medlyn et al. 2011): with its lower
    # Ci/Ca (g1 1.62 vs 5.25, Lin et al. 2015) a C4 canopy transpires less per carbon than C3, so where
    # both are limited by the same supply S it fixes more carbon (gross = S · A/E, derived here).
    days = realistic_days(40, seed=9)
    kwargs = dict(co2_ppm=400.0, max_water_supply_mm=1e9, **days)
    c3 = canopy.daily_canopy_assimilation("C3", water_availability=1.0, **kwargs)
    c4 = canopy.daily_canopy_assimilation("C4", water_availability=1.0, **kwargs)
    assert np.all(c4.transpiration / c4.gross < c3.transpiration / c3.gross)
    dry = dict(co2_ppm=400.0, water_availability=0.2, **days)
    c3_dry = canopy.daily_canopy_assimilation("C3", **dry)
    c4_dry = canopy.daily_canopy_assimilation("C4", **dry)
    supply = 0.2 * MAX_WATER_SUPPLY_MM_PER_DAY
    both_limited = (c3.transpiration > supply) & (c4.transpiration > supply)
    assert both_limited.sum() >= 10
    np.testing.assert_allclose(c4_dry.gross[both_limited], supply * (c4.gross / c4.transpiration)[both_limited],
                               rtol=1e-10)
    assert np.all(c4_dry.gross[both_limited] > c3_dry.gross[both_limited])


def test_leaf_transpiration_follows_fick_and_closes_in_the_dark():
    # Derived here from Fick's law: gs = 1.6 A/(Ca − Ci), E = gs D/P; A <= 0 shuts the stomata.
    e = leaf_transpiration(np.array([10.0, 0.0, -1.0]), 400.0, 280.0, 2.0, 100.0)
    np.testing.assert_allclose(e, [1.6 * 10.0 / 120.0 * 2.0 / 100.0 * 1e0, 0.0, 0.0])
    assert water_supply_mm(0.5) == pytest.approx(0.5 * MAX_WATER_SUPPLY_MM_PER_DAY)
    net, gross, photo, share = supply_limited_day(5.0, 10.0, 2.0, 1e9, 0.0)
    assert (gross, photo, share) == (0.0, 0.0, 0.0) and net == pytest.approx(-5.0)
