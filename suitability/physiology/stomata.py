"""Intercellular CO2 from ambient CO2, vapour pressure deficit and water availability.

Medlyn et al. (2011) Glob Change Biol 17:2134 (doi:10.1111/j.1365-2486.2010.02375.x), optimal stomatal
conductance gs = g0 + 1.6 (1 + g1/√D) A/Ca; with g0 = 0 the ratio of intercellular to ambient CO2 is

    Ci/Ca = g1 / (g1 + √D)                                     (D in kPa, g1 in kPa^0.5)

Water stress scales the slope, g1' = g1 · W with water availability W in [0, 1] (a common choice, e.g.
the β factor of many land models [CP]); W = 0 closes the stomata (Ci = 0). The alternative
``stomatal_model = "fixed"`` uses a constant Ci/Ca (0.7 C3, 0.4 C4 [CP]) and ignores D and W.
The optional non-stomatal limitation (``water_stress_on_vcmax``) multiplies the carboxylation
capacities by W; ``capacity_scale`` returns that factor.
"""

from __future__ import annotations

from . import array_ops as ops
from .elementwise import equation


@equation
def medlyn_ci_ratio(vpd_kpa, g1, water_availability=1.0):
    """Ci/Ca = g1 W / (g1 W + √D) [-] (Medlyn et al. 2011 with g0 = 0; g1 scaled by water availability).

    Parameters
    ----------
    vpd_kpa : leaf-to-air vapour pressure deficit D [kPa], >= 0
    g1 : stomatal slope [kPa^0.5]
    water_availability : W [-], 0 (none) .. 1 (unstressed)
    """
    slope = g1 * water_availability
    denominator = slope + ops.weak_scalar(ops.sqrt(vpd_kpa))
    # Closed stomata in saturated air (W = 0 and D = 0) is 0/0; closed stomata win: Ci/Ca = 0.
    return ops.where(denominator > 0, slope / ops.where(denominator > 0, denominator, 1.0), 0.0)


def intercellular_co2_ratio(vpd_kpa, water_availability, params):
    """Ci/Ca [-] from the stomatal model named in a resolved parameter mapping ("medlyn" or "fixed").

    Parameters
    ----------
    vpd_kpa : vapour pressure deficit [kPa]
    water_availability : W [-]
    params : mapping with ``stomatal_model``, ``g1`` [kPa^0.5] and ``ci_ratio`` [-]
    """
    if params["stomatal_model"] == "fixed":
        return params["ci_ratio"]
    return medlyn_ci_ratio(vpd_kpa, params["g1"], water_availability)


def capacity_scale(water_availability, params):
    """Factor on the carboxylation capacities: W if ``water_stress_on_vcmax`` else 1 [-]."""
    return water_availability if params["water_stress_on_vcmax"] else 1.0


def stomatal_constants(params) -> tuple:
    """(g1 [kPa^0.5], fixed Ci/Ca [-], 1.0 if the stomatal model is "fixed" else 0.0, 1.0 if water stress
    also scales the carboxylation capacities else 0.0) of a resolved parameter mapping, for
    :func:`ci_ratio_given` and :func:`capacity_scale_given`."""
    return (float(params["g1"]), float(params["ci_ratio"]), 1.0 if params["stomatal_model"] == "fixed" else 0.0,
            1.0 if params["water_stress_on_vcmax"] else 0.0)


@equation
def ci_ratio_given(vpd_kpa, water_availability, constants):
    """Ci/Ca [-] of :func:`intercellular_co2_ratio` from :func:`stomatal_constants` instead of a mapping."""
    return ops.where(constants[2] == 1.0, constants[1], medlyn_ci_ratio(vpd_kpa, constants[0], water_availability))


@equation
def capacity_scale_given(water_availability, constants):
    """:func:`capacity_scale` from :func:`stomatal_constants` instead of a mapping [-]."""
    return ops.where(constants[3] == 1.0, water_availability, 1.0)
