"""Intercellular CO2 from ambient CO2 and vapour pressure deficit.

Medlyn et al. (2011) Glob Change Biol 17:2134 (doi:10.1111/j.1365-2486.2010.02375.x), optimal stomatal
conductance gs = g0 + 1.6 (1 + g1/√D) A/Ca; with g0 = 0 the ratio of intercellular to ambient CO2 is

    Ci/Ca = g1 / (g1 + √D)                                     (D in kPa, g1 in kPa^0.5)

The alternative ``stomatal_model = "fixed"`` uses a constant Ci/Ca (0.7 C3, 0.4 C4 [CP]) and ignores D.

Soil water does not lower Ci/Ca here: under drought stomata and capacities decline together, keeping
Ci/Ca at its optimum, and the canopy's daily assimilation is limited by the water the soil can supply
(:mod:`.water`). So drought never makes a lit leaf lose carbon through closed stomata. The optional
non-stomatal limitation (``water_stress_on_vcmax``) also multiplies the carboxylation capacities by the
water availability W; ``capacity_scale`` returns that factor.
"""

from __future__ import annotations

from . import array_ops as ops
from .elementwise import equation


@equation
def medlyn_ci_ratio(vpd_kpa, g1):
    """Ci/Ca = g1 / (g1 + √D) [-] (Medlyn et al. 2011 with g0 = 0).

    Parameters
    ----------
    vpd_kpa : leaf-to-air vapour pressure deficit D [kPa], >= 0
    g1 : stomatal slope [kPa^0.5]
    """
    denominator = g1 + ops.weak_scalar(ops.sqrt(vpd_kpa))
    # g1 = 0 in saturated air is 0/0; closed stomata win: Ci/Ca = 0.
    return ops.where(denominator > 0, g1 / ops.where(denominator > 0, denominator, 1.0), 0.0)


def intercellular_co2_ratio(vpd_kpa, params):
    """Ci/Ca [-] from the stomatal model named in a resolved parameter mapping ("medlyn" or "fixed").

    Parameters
    ----------
    vpd_kpa : vapour pressure deficit [kPa]
    params : mapping with ``stomatal_model``, ``g1`` [kPa^0.5] and ``ci_ratio`` [-]
    """
    if params["stomatal_model"] == "fixed":
        return params["ci_ratio"]
    return medlyn_ci_ratio(vpd_kpa, params["g1"])


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
def ci_ratio_given(vpd_kpa, constants):
    """Ci/Ca [-] of :func:`intercellular_co2_ratio` from :func:`stomatal_constants` instead of a mapping."""
    return ops.where(constants[2] == 1.0, constants[1], medlyn_ci_ratio(vpd_kpa, constants[0]))


@equation
def capacity_scale_given(water_availability, constants):
    """:func:`capacity_scale` from :func:`stomatal_constants` instead of a mapping [-]."""
    return ops.where(constants[3] == 1.0, water_availability, 1.0)
