"""Water supply and demand of a canopy: how soil water limits the daily assimilation of both pathways.

Meaning of water availability W: the relative plant-available soil water of the root zone, 0 at the
wilting point and 1 at field capacity (the "wr" of Haxeltine & Prentice 1996 and Sitch et al. 2003).

Supply and demand (Haxeltine & Prentice 1996, Global Biogeochem Cycles 10:693; Sitch et al. 2003, Global
Change Biol 9:161): the soil can supply at most S = Emax · W per day, Emax = 5 mm d-1 (from memory). The
canopy's demand is the transpiration it would have on that day with its stomata at the optimum of
Medlyn et al. (2011): at every moment each leaf's conductance follows its own assimilation,
gs = 1.6 A / (Ca − Ci) (Fick's law for CO2, which the Medlyn ratio Ci/Ca closes; stomata shut, gs = 0,
where A <= 0), and transpires E = gs D / P; the day's demand is capped at what its net radiation can
evaporate (Priestley & Taylor 1972, :mod:`.energy`). Where the day's demand exceeds the supply, the canopy
closes its stomata and lowers its capacities together, keeping Ci/Ca at the optimum (both decline
under drought, Zhou et al. 2013 Agric For Meteorol 182-183:204; from memory), so its gross assimilation
and photorespiration fall in proportion to the water it can draw:

    share = min(1, S / E_day);  gross' = share · gross;  photorespiration' = share · photorespiration;
    net' = net − (1 − share) · gross   (respiration goes on).

Consequences: both pathways face the same supply; drought never makes a lit leaf lose carbon through
closed stomata (Ci/Ca keeps its optimum) and gross assimilation stays >= 0 at any W; a pathway that
needs less water per carbon (C4, lower Ci/Ca) keeps more of its assimilation on the same soil.
"""

from __future__ import annotations

from . import array_ops as ops
from .elementwise import equation

#: Largest daily transpiration a canopy can draw from a soil at field capacity, Emax [mm d-1]
#: (Haxeltine & Prentice 1996; Sitch et al. 2003; from memory).
MAX_WATER_SUPPLY_MM_PER_DAY = 5.0

#: Molar mass of water [g mol-1] (IUPAC standard atomic weights).
WATER_G_PER_MOL = 18.015

#: Diffusivity ratio of water vapour to CO2 in air [-] (the 1.6 of Medlyn et al. 2011).
VAPOUR_TO_CO2_DIFFUSIVITY = 1.6


@equation
def transpiration_per_assimilation(co2_ppm, intercellular_co2_ppm, vpd_kpa, pressure_kpa):
    """Water transpired per CO2 assimilated through open stomata, E/A = 1.6 D / ((Ca − Ci) P)
    [mol H2O (µmol CO2)-1]; 0 where Ca <= Ci (no drawdown: stomata closed).

    It depends on the air and the stomatal ratio Ci/Ca only, not on the leaf's light: the sunlit and the
    shaded leaf of one moment share it (one division per moment instead of one per leaf).

    Parameters
    ----------
    co2_ppm, intercellular_co2_ppm : Ca and Ci [µmol mol-1].
    vpd_kpa : leaf-to-air vapour pressure deficit D [kPa].
    pressure_kpa : air pressure P [kPa].

    Reference: Medlyn et al. (2011) (gs = 1.6 A / (Ca − Ci) with g0 = 0); Fick's law (E = gs D / P).
    """
    drawdown = co2_ppm - intercellular_co2_ppm
    positive = drawdown > 0
    return ops.where(positive, VAPOUR_TO_CO2_DIFFUSIVITY * vpd_kpa
                     / (ops.where(positive, drawdown, 1.0) * pressure_kpa), 0.0)


@equation
def leaf_transpiration(net_assimilation, co2_ppm, intercellular_co2_ppm, vpd_kpa, pressure_kpa):
    """Leaf transpiration E = gs D / P with gs = 1.6 A / (Ca − Ci) [mol H2O m-2 s-1]; 0 where A <= 0.

    Written E = A · (E/A) with :func:`transpiration_per_assimilation`.

    Parameters
    ----------
    net_assimilation : A [µmol m-2 s-1].
    co2_ppm, intercellular_co2_ppm : Ca and Ci [µmol mol-1].
    vpd_kpa : leaf-to-air vapour pressure deficit D [kPa].
    pressure_kpa : air pressure P [kPa].

    Reference: Medlyn et al. (2011) (gs from A, Ca and Ci with g0 = 0); Fick's law.
    """
    ratio = transpiration_per_assimilation(co2_ppm, intercellular_co2_ppm, vpd_kpa, pressure_kpa)
    return ops.where(net_assimilation > 0, net_assimilation * ratio, 0.0)


@equation
def water_supply_mm(water_availability, max_supply_mm=MAX_WATER_SUPPLY_MM_PER_DAY):
    """Daily water supply of the soil S = Emax W [mm d-1] (module docstring).

    Parameters
    ----------
    water_availability : W [-], 0..1.
    max_supply_mm : Emax, the supply at field capacity [mm d-1].
    """
    return max_supply_mm * water_availability


@equation
def transpiration_mm(transpiration_mol):
    """Water depth of a transpired amount [mm] from [mol H2O m-2] (1 kg m-2 = 1 mm)."""
    return transpiration_mol * (WATER_G_PER_MOL * 1e-3)


@equation
def supply_limited_day(net, gross, photorespiration, transpiration_mol, water_availability,
                       max_supply_mm=MAX_WATER_SUPPLY_MM_PER_DAY, energy_limit_mm=1e300):
    """The day's canopy exchange under the soil's water supply (module docstring).

    Parameters
    ----------
    net, gross, photorespiration : the day's canopy totals with stomata at their optimum [any one unit].
    transpiration_mol : the day's transpiration demand [mol H2O m-2 d-1].
    water_availability : W [-], 0..1.
    max_supply_mm : Emax [mm d-1].
    energy_limit_mm : the most the day's radiation can evaporate (:mod:`.energy`) [mm d-1]; the demand
        is capped at it.

    Returns (net, gross, photorespiration, share) in the units given; ``share`` = min(1, S / E) [-].
    """
    demand = ops.minimum(transpiration_mm(transpiration_mol), energy_limit_mm)
    supply = water_supply_mm(water_availability, max_supply_mm)
    limited = demand > supply
    share = ops.where(limited, supply / ops.where(limited, demand, 1.0), 1.0)
    return net - (1.0 - share) * gross, share * gross, share * photorespiration, share
