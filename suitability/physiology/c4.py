"""C4 leaf photosynthesis: Collatz, Ribas-Carbo & Berry (1992) and von Caemmerer (2000).

Both take ABSORBED PAR [µmol m-2 s-1] and gas partial pressures [Pa] (see ``rubisco`` for the pressure
convention) and return :class:`C4Rates`.

Collatz et al. (1992) Aust J Plant Physiol 19:519 (doi:10.1071/PP9920519)
-------------------------------------------------------------------------
Vt = Vmax 2^((T−25)/10) / [(1 + e^(0.3(13 − T)))(1 + e^(0.3(T − 36)))]
Rd,t = Rd 2^((T−25)/10) / (1 + e^(1.3(T − 55)));  kt = k 2^((T−25)/10)
M = smaller root of θ M² − M (Vt + α Q) + Vt α Q = 0
A = smaller root of β A² − A (M + kt Ci/P) + M kt Ci/P = 0;  net = A − Rd,t;  gross = A.
Ci/P is the intercellular CO2 mole fraction; here Ci/P = Ci [Pa] / 101.325 kPa, so that PEP
carboxylation sees the CO2 partial pressure like every other enzyme constant (elevation lowers it).
The model has no photorespiration (reported as 0), no bundle-sheath CO2 and no leakiness (NaN).
Limitation codes: 1 enzyme (Vt), 2 light (α Q), 3 CO2/PEPc (kt Ci/P): whichever of the three is smallest.

von Caemmerer (2000) Biochemical models of leaf photosynthesis, ch. 4, eqs. 4.21-4.23 and 4.44-4.47
----------------------------------------------------------------------------------------------------
Mesophyll CO2 Cm = Ci (no mesophyll resistance), no PSII activity in the bundle sheath (α = 0, so the
bundle-sheath O2 equals the mesophyll O2 Om), gbs the bundle-sheath conductance.
Enzyme-limited: Vp = min(Cm Vpmax/(Cm + Kp), Vpr);  Ac = smaller root of A² + b A + c = 0 with
  b = −[(Vp − Rm + gbs Cm) + (Vcmax − Rd) + gbs Kc (1 + Om/Ko)],
  c = (Vcmax − Rd)(Vp − Rm + gbs Cm) − [Vcmax gbs γ* Om + Rd gbs Kc (1 + Om/Ko)].
Light-limited: Aj = smaller root of A² + b A + c = 0 with
  b = −[(x J/2 − Rm + gbs Cm) + ((1 − x) J/3 − Rd) + 7 gbs γ* Om/3],
  c = ((1 − x) J/3 − Rd)(x J/2 − Rm + gbs Cm) − gbs γ* Om ((1 − x) J/3 + 7 Rd/3).
A = min(Ac, Aj); bundle-sheath CO2 Cs = Cm + (Vp − A − Rm)/gbs (Vp = x J/2 when light-limited);
leakiness φ = gbs (Cs − Cm)/Vp; photorespiratory CO2 release 0.5 vo = vc γ* Om / Cs.
J is the non-rectangular response to I2 = absorbed (1 − f)/2 as in C3.
Kinetic constants at 25 °C: von Caemmerer (2000) Table 4.1 (``kinetics = "caemmerer2000_c4"``, default)
or von Caemmerer (2021) (``"caemmerer2021_c4"``); see ``rubisco`` and ``PEPC_KINETICS``.
Temperature (``capacity_temperature_response``):
- "massad2007" (default of the vc2000 and C4 plant-type sets): peaked (Johnson et al. 1942 / Medlyn et al.
  2002 form, normalised at 25 °C) responses of Vcmax (Ha 67294 J mol-1, Hd 144568 J mol-1, ΔS 472 J mol-1
  K-1), Vpmax (70373, 117910, 376; also used for Vpr, a decision here) and Jmax (77900, 191929, 627) fitted
  to maize by Massad, Tuzet & Bethenod (2007) Plant Cell Environ 30:1191 (doi:10.1111/j.1365-3040.2007.01691.x)
  [values from two independent secondary copies of the paper's table, not from the paper itself; one gives
  Hd of Vpmax as 117930: see ``MASSAD_2007``]. Their optima (Medlyn et al. 2002 eq. 18) are about 32 °C
  (Vcmax), 43 °C (Vpmax) and 31 °C (Jmax);
- "caemmerer2021": Arrhenius (von Caemmerer 2021 J Exp Bot 72:6003) for Vcmax (78.0 kJ mol-1) and Vpmax
  (50.1; also Vpr), Gaussian Jmax (To ``jmax_optimum_c`` 43 °C, Ω ``jmax_width_c`` 26 °C, normalised at
  25 °C): no high-temperature decline of the enzymes.
Both: Rd Arrhenius 66.4 kJ mol-1, Kp 38.3 kJ mol-1 and the Rubisco constants (``rubisco``) of von
Caemmerer (2021); gbs and x constant.
Chilling (``chilling_response``): "collatz1992" multiplies Vcmax, Vpmax and Vpr by the low-temperature
term of Collatz, Ribas-Carbo & Berry (1992), 1/(1 + e^(0.3 (Tlow − T))) with Tlow =
``chilling_temperature_c`` (13 °C in Collatz et al. 1992), normalised here to 1 at 25 °C (0.973 as
printed) so that the 25 °C capacities keep their measured values. Why this term: it is the published
C4 form that our Collatz (1992) model already uses, so both C4 models lose capacity in the cold alike;
it stands for the cold lability of C4 enzymes (PPDK, Rubisco) that limits C4 photosynthesis at chilling
temperatures (Long 1983 Plant Cell Environ 6:345; Sage & Kubien 2007 Plant Cell Environ 30:1086 [both
from memory]). Jmax is not chilled (Collatz's light-limited term has no temperature response). "none"
switches it off.
Limitation codes: 1 enzyme (Rubisco or PEP regeneration), 2 light, 3 CO2 (PEPc CO2-limited, Cm Vpmax/(Cm +
Kp) < Vpr, and the mesophyll supply Vp − Rm + gbs Cm below Vcmax − Rd).
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np

from . import array_ops as ops
from .c3 import electron_transport_rate, non_rectangular_hyperbola
from .elementwise import equation
from .models import LeafModel, LeafRates, register_leaf_model
from .rubisco import STANDARD_PRESSURE_KPA, effective_michaelis_constant, rubisco_constants
from .temperature import arrhenius, gaussian_response, peaked_arrhenius, q10_response

PEPC_KINETICS = {
    "caemmerer2000_c4": {"kp25_pa": 80e-6 * 1e5, "kp_activation_energy": 38300.0},
    "caemmerer2021_c4": {"kp25_pa": 82e-6 * 1e5, "kp_activation_energy": 38300.0},
}
"""PEP carboxylase Kp [Pa] at 25 °C (von Caemmerer 2000 Table 4.1: 80 µbar; 2021 Table 1: 82 µbar) and its
activation energy [J mol-1] (von Caemmerer 2021), keyed by the ``kinetics`` name of the vc2000 set."""

MASSAD_2007 = {
    "vcmax": (67294.0, 144568.0, 472.0),
    "vpmax": (70373.0, 117910.0, 376.0),
    "jmax": (77900.0, 191929.0, 627.0),
}
"""Peaked temperature responses of maize C4 capacities, (Ha [J mol-1], Hd [J mol-1], ΔS [J mol-1 K-1]):
Massad, Tuzet & Bethenod (2007) Plant Cell Environ 30:1191, as transcribed in the R package plantecophys
(AciC4) and in the SCOPE model's biochemical routine (Magnani & van der Tol); the two agree except Hd of
Vpmax (117910 vs 117.93 kJ mol-1, a 0.02 % difference). Not checked against the paper itself."""

COLLATZ_1992_CHILLING_SLOPE = 0.3
"""Slope [K-1] of the low-temperature term of Collatz, Ribas-Carbo & Berry (1992), 1/(1 + e^(0.3(13 − T)))."""


def chilling_factor(temperature_c, chilling_temperature_c):
    """Low-temperature term of Collatz et al. (1992), normalised to 1 at 25 °C [-].

    f(T) = (1 + e^(0.3 (Tlow − 25))) / (1 + e^(0.3 (Tlow − T)))

    Parameters
    ----------
    temperature_c : leaf temperature [°C]
    chilling_temperature_c : Tlow, where the un-normalised term is 0.5 [°C] (13 °C in Collatz et al. 1992)
    """
    slope = COLLATZ_1992_CHILLING_SLOPE
    at_reference = ops.weak_scalar(1.0 + np.exp(slope * (chilling_temperature_c - 25.0)))
    return at_reference / (1.0 + np.exp(slope * (chilling_temperature_c - temperature_c)))


def caemmerer_capacity_factors(temperature_c, params):
    """Factors (Vcmax, Vpmax and Vpr, Jmax) relative to 25 °C of a resolved vc2000 mapping [-] (module
    docstring: ``capacity_temperature_response`` and ``chilling_response``); temperature [°C]."""
    response = params["capacity_temperature_response"]
    if response == "massad2007":
        vcmax, vpmax, jmax = (peaked_arrhenius(temperature_c, *MASSAD_2007[name]) for name in ("vcmax", "vpmax", "jmax"))
    elif response == "caemmerer2021":
        constants = CAEMMERER_2021_ACTIVATION
        vcmax = arrhenius(temperature_c, constants["vcmax_activation_energy"])
        vpmax = arrhenius(temperature_c, constants["vpmax_activation_energy"])
        jmax = gaussian_response(temperature_c, params["jmax_optimum_c"], params["jmax_width_c"])
    else:
        raise ValueError(f"unknown C4 capacity temperature response {response!r}; valid: massad2007, caemmerer2021")
    if params["chilling_response"] == "collatz1992":
        chill = chilling_factor(temperature_c, params["chilling_temperature_c"])
        vcmax, vpmax = vcmax * chill, vpmax * chill
    return vcmax, vpmax, jmax


CAEMMERER_2021_ACTIVATION = {
    "vcmax_activation_energy": 78000.0,
    "vpmax_activation_energy": 50100.0,
    "rd_activation_energy": 66400.0,
}
"""Activation energies [J mol-1] of the C4 capacities, von Caemmerer (2021) Table 1."""


class C4Rates(NamedTuple):
    """C4 results [µmol m-2 s-1], limitation code, bundle-sheath CO2 [Pa] and leakiness [-]."""

    net: object
    gross: object
    photorespiration: object
    limitation: object
    bundle_sheath_co2_pa: object
    leakiness: object


def collatz_temperature_terms(temperature_c, params) -> tuple:
    """Temperature terms of the Collatz et al. (1992) C4 leaf (module docstring).

    Returns (Vt [µmol m-2 s-1], Rd,t [µmol m-2 s-1], kt per Pa of CO2 [µmol m-2 s-1 Pa-1]) at leaf
    temperature ``temperature_c`` [°C] for a resolved C4 mapping with ``model == "collatz1992"``:
    Vt = Vmax Q10^((T−25)/10) / [(1 + e^(0.3(Tlow − T)))(1 + e^(0.3(T − Thigh)))],
    Rd,t = Rd Q10^((T−25)/10) / (1 + e^(1.3(T − Tresp))), kt = k Q10^((T−25)/10) · 1e3 / 101.325
    (k [mol m-2 s-1] times the CO2 mole fraction at standard pressure, so that kt · C [Pa] is in µmol m-2 s-1).
    """
    q10 = q10_response(temperature_c, params["q10"])
    enzyme = params["vmax25"] * q10 / ((1.0 + ops.exp(0.3 * (params["low_temperature_c"] - temperature_c)))
                                       * (1.0 + ops.exp(0.3 * (temperature_c - params["high_temperature_c"]))))
    respiration = params["rd25"] * q10 / (
        1.0 + ops.exp(1.3 * (temperature_c - params["respiration_high_temperature_c"])))
    return (enzyme, respiration, params["k25"] * q10 * (1e3 / STANDARD_PRESSURE_KPA))


def collatz_constants(params) -> tuple:
    """(α, θ, β) of a resolved Collatz (1992) C4 mapping."""
    return (float(params["alpha"]), float(params["theta"]), float(params["beta"]))


@equation
def collatz_leaf_rates(terms, constants, absorbed_par, co2_pa, o2_pa, capacity_scale):
    """Collatz et al. (1992) C4 leaf from :func:`collatz_temperature_terms` and :func:`collatz_constants`:
    absorbed PAR [µmol m-2 s-1], intercellular CO2 [Pa] (O2 [Pa] unused: the model has no
    photorespiration), ``capacity_scale`` [-] on Vmax. Returns
    :class:`~suitability.physiology.models.LeafRates`."""
    enzyme = terms[0] * capacity_scale
    light = constants[0] * absorbed_par
    co2_limited = terms[2] * co2_pa
    enzyme_light = non_rectangular_hyperbola(enzyme, light, constants[1])
    gross = non_rectangular_hyperbola(enzyme_light, co2_limited, constants[2])
    limitation = ops.where((co2_limited < enzyme) & (co2_limited < light), 3, ops.where(light < enzyme, 2, 1))
    return LeafRates(gross - terms[1], gross, 0.0 * gross, limitation, ops.nan, ops.nan)


def collatz_c4_rates(temperature_c, absorbed_par, co2_pa, params, capacity_scale=1.0) -> C4Rates:
    """Collatz et al. (1992) C4 leaf (module docstring).

    Parameters
    ----------
    temperature_c : leaf temperature [°C]
    absorbed_par : absorbed PAR [µmol m-2 s-1]
    co2_pa : intercellular CO2 partial pressure [Pa]
    params : resolved C4 mapping with ``model == "collatz1992"``
    capacity_scale : factor on Vmax (non-stomatal water stress) [-]
    """
    rates = collatz_leaf_rates(collatz_temperature_terms(temperature_c, params), collatz_constants(params),
                               absorbed_par, co2_pa, 0.0, capacity_scale)
    nan = rates.gross * ops.nan
    return C4Rates(rates.net, rates.gross, rates.photorespiration, rates.limitation, nan, nan)


def collatz_quantum_yield(temperature_c, co2_pa, o2_pa, params):
    """Collatz et al. (1992) C4 quantum yield: α, independent of temperature, CO2 and O2 [mol mol-1]."""
    return params["alpha"] + 0.0 * (temperature_c + co2_pa + o2_pa)


@equation
def _smaller_root_monic(b, c):
    # Smaller root of A² + bA + c = 0 as 2c / (−b + √(b² − 4c)) (no cancellation when c is small). The
    # denominator is twice the larger root, which may be negative (darkness, low Cm); where it is 0 the
    # smaller root is −b.
    denominator = ops.sqrt(ops.maximum(b * b - 4.0 * c, 0.0)) - b
    nonzero = denominator != 0
    return ops.where(nonzero, 2.0 * c / ops.where(nonzero, denominator, 1.0), -b)


def caemmerer_temperature_terms(temperature_c, params) -> tuple:
    """Temperature terms of the von Caemmerer (2000) C4 leaf (module docstring).

    Returns (Kc [Pa], Ko [Pa], γ* per Pa of O2 [-], Kp [Pa], Vcmax, Vpmax, Vpr, Rd, Jmax [µmol m-2 s-1]) at
    leaf temperature ``temperature_c`` [°C] for a resolved C4 mapping with ``model == "vc2000"``.
    """
    kc, ko, gamma_per_o2 = rubisco_constants(params["kinetics"], temperature_c, 1.0)  # Γ* = γ* Om
    pepc = PEPC_KINETICS[params["kinetics"]]
    vc_factor, vp_factor, j_factor = caemmerer_capacity_factors(temperature_c, params)
    return (kc, ko, gamma_per_o2,
            pepc["kp25_pa"] * arrhenius(temperature_c, pepc["kp_activation_energy"]),
            params["vcmax25"] * vc_factor,
            params["vpmax25"] * vp_factor,
            params["vpr25"] * vp_factor,
            params["rd25"] * arrhenius(temperature_c, CAEMMERER_2021_ACTIVATION["rd_activation_energy"]),
            params["jmax25"] * j_factor)


def caemmerer_constants(params) -> tuple:
    """(θ, f, gbs [µmol m-2 s-1 Pa-1], x, Rm/Rd) of a resolved von Caemmerer (2000) C4 mapping."""
    # gbs [mol m-2 s-1 bar-1] -> [µmol m-2 s-1 Pa-1]: 1e6 µmol/mol over 1e5 Pa/bar.
    return (float(params["theta"]), float(params["spectral_correction"]), float(params["gbs"]) * 10.0,
            float(params["x"]), float(params["rm_fraction"]))


@equation
def caemmerer_leaf_rates(terms, constants, absorbed_par, co2_pa, o2_pa, capacity_scale):
    """von Caemmerer (2000) C4 leaf from :func:`caemmerer_temperature_terms` and :func:`caemmerer_constants`:
    absorbed PAR [µmol m-2 s-1], mesophyll CO2 and O2 [Pa], ``capacity_scale`` [-] on Vcmax and Vpmax.
    Returns :class:`~suitability.physiology.models.LeafRates` (equations in the module docstring)."""
    kc = terms[0]
    ko = terms[1]
    gamma_star = terms[2] * o2_pa
    kp = terms[3]
    vcmax = terms[4] * capacity_scale
    vpmax = terms[5] * capacity_scale
    vpr = terms[6]
    rd = terms[7]
    jmax = terms[8]
    rm = constants[4] * rd
    gbs = constants[2]
    x = constants[3]
    electron_transport = electron_transport_rate(absorbed_par, jmax, constants[0], constants[1])
    km = effective_michaelis_constant(kc, ko, o2_pa)

    pepc_co2_limited = co2_pa * vpmax / (co2_pa + kp)
    vp_enzyme = ops.minimum(pepc_co2_limited, vpr)
    mesophyll_supply = vp_enzyme - rm + gbs * co2_pa
    enzyme_limited = _smaller_root_monic(
        -(mesophyll_supply + vcmax - rd + gbs * km),
        (vcmax - rd) * mesophyll_supply - (vcmax * gbs * gamma_star + rd * gbs * km),
    )
    vp_light = x * electron_transport / 2.0
    bundle_sheath_electron = (1.0 - x) * electron_transport / 3.0
    light_supply = vp_light - rm + gbs * co2_pa
    light_limited = _smaller_root_monic(
        -(light_supply + bundle_sheath_electron - rd + 7.0 * gbs * gamma_star / 3.0),
        (bundle_sheath_electron - rd) * light_supply - gbs * gamma_star * (bundle_sheath_electron + 7.0 * rd / 3.0),
    )

    is_light_limited = light_limited < enzyme_limited
    net = ops.minimum(enzyme_limited, light_limited)
    vp = ops.where(is_light_limited, vp_light, vp_enzyme)
    leak = vp - net - rm
    bundle_sheath_co2 = co2_pa + leak / gbs
    light_denominator = 3.0 * bundle_sheath_co2 + 7.0 * gamma_star
    photorespiration = ops.where(
        is_light_limited,
        bundle_sheath_electron * 3.0 * gamma_star / ops.where(light_denominator > 0, light_denominator, 1.0),
        vcmax * gamma_star / (bundle_sheath_co2 + km),
    )
    co2_limited = (pepc_co2_limited < vpr) & (mesophyll_supply < vcmax - rd)
    limitation = ops.where(is_light_limited, 2, ops.where(co2_limited, 3, 1))
    # Leakiness is undefined without PEP carboxylation (darkness): NaN there.
    leakiness = ops.where(vp > 0, leak / ops.where(vp > 0, vp, 1.0), ops.nan)
    return LeafRates(net, net + rd, photorespiration, limitation, bundle_sheath_co2, leakiness)


def caemmerer_c4_rates(temperature_c, absorbed_par, co2_pa, o2_pa, params, capacity_scale=1.0) -> C4Rates:
    """von Caemmerer (2000) C4 leaf with bundle-sheath leakiness (module docstring).

    Parameters
    ----------
    temperature_c : leaf temperature [°C]
    absorbed_par : absorbed PAR [µmol m-2 s-1]
    co2_pa : mesophyll (= intercellular) CO2 partial pressure [Pa]
    o2_pa : mesophyll O2 partial pressure [Pa]
    params : resolved C4 mapping with ``model == "vc2000"``
    capacity_scale : factor on Vcmax and Vpmax (non-stomatal water stress) [-]
    """
    return C4Rates(*caemmerer_leaf_rates(caemmerer_temperature_terms(temperature_c, params),
                                         caemmerer_constants(params), absorbed_par, co2_pa, o2_pa, capacity_scale))


#: Absorbed PAR between which the von Caemmerer C4 light response is differenced for its quantum yield
#: [µmol m-2 s-1]: the linear range over which quantum yields are measured (Ehleringer & Björkman 1977).
QUANTUM_YIELD_PAR_RANGE = (50.0, 150.0)


def caemmerer_quantum_yield(temperature_c, co2_pa, o2_pa, params):
    """von Caemmerer (2000) C4 quantum yield: the slope of gross assimilation between the absorbed PAR of
    :data:`QUANTUM_YIELD_PAR_RANGE` [mol CO2 (mol absorbed photons)-1]; temperature [°C], CO2, O2 [Pa]."""
    low, high = QUANTUM_YIELD_PAR_RANGE
    gross_low = caemmerer_c4_rates(temperature_c, low, co2_pa, o2_pa, params).gross
    gross_high = caemmerer_c4_rates(temperature_c, high, co2_pa, o2_pa, params).gross
    return (gross_high - gross_low) / (high - low)


def c4_rates(temperature_c, absorbed_par, co2_pa, o2_pa, params, capacity_scale=1.0) -> C4Rates:
    """C4 leaf rates with the registered model named by ``params["model"]``."""
    from .models import leaf_model

    model = leaf_model(params["model"], "C4")
    return C4Rates(*model.rates(model.temperature_terms(temperature_c, params), model.constants(params),
                                absorbed_par, co2_pa, o2_pa, capacity_scale))


COLLATZ1992 = register_leaf_model(LeafModel(
    name="collatz1992", pathway="C4", temperature_terms=collatz_temperature_terms, constants=collatz_constants,
    rates=collatz_leaf_rates, quantum_yield=collatz_quantum_yield,
    limitation_codes={0: "invalid input", 1: "enzyme (Rubisco / PEP regeneration)", 2: "light",
                      3: "CO2 (PEP carboxylase)"},
))
VC2000 = register_leaf_model(LeafModel(
    name="vc2000", pathway="C4", temperature_terms=caemmerer_temperature_terms, constants=caemmerer_constants,
    rates=caemmerer_leaf_rates, quantum_yield=caemmerer_quantum_yield,
    limitation_codes={0: "invalid input", 1: "enzyme (Rubisco / PEP regeneration)", 2: "light",
                      3: "CO2 (PEP carboxylase)"},
))
