"""C3 leaf photosynthesis: the Farquhar, von Caemmerer & Berry (1980) model.

Equations (von Caemmerer 2000, Biochemical models of leaf photosynthesis, ch. 2; C, O, Kc, Ko, Γ* as
partial pressures [Pa], see ``rubisco``):

- Rubisco-limited carboxylation  Wc = Vcmax C / (C + Kc (1 + O/Ko))
- electron-transport-limited     Wj = J C / (4 C + 8 Γ*)
- vc = min(Wc, Wj); vo = 2 Γ* vc / C;  A = vc − 0.5 vo − Rd = vc (1 − Γ*/C) − Rd
- triose-phosphate-use limit, in its standard form A = 3 Tp − Rd (Sharkey 1985 Bot Rev 51:53; von
  Caemmerer 2000 eq. 2.26): gross = 3 Tp, with the carboxylation and photorespiration that go with it,
  vc = 3 Tp C/(C − Γ*) and 0.5 vo = vc Γ*/C = 3 Tp Γ*/(C − Γ*). It limits where 3 Tp is below the gross
  rate of the other two limits, which needs C > Γ* (below Γ* the gross rate is negative and TPU cannot
  limit it). Optional (Tp unlimited by default).
- J is the smaller root of θ J² − (I2 + Jmax) J + I2 Jmax = 0 with I2 = absorbed_par (1 − f)/2
  (von Caemmerer 2000 eq. 2.14; the input is ABSORBED PAR, so leaf absorptance is not applied again).

Outputs: ``gross`` = vc − 0.5 vo = A + Rd; ``photorespiration`` = 0.5 vo, the CO2 released by
photorespiration; so the share of gross carboxylation lost to photorespiration is
photorespiration / (gross + photorespiration) = Γ*/C.

Limitation codes: 1 Rubisco (Wc), 2 electron transport (Wj), 3 TPU (gross = 3 Tp).

Capacity temperature responses (``vcmax_temperature_response`` parameter):
- "peaked": Kattge & Knorr (2007) Plant Cell Environ 30:1176 (doi:10.1111/j.1365-3040.2007.01690.x),
  Vcmax Ha 71513, Hd 200000, ΔS = 668.39 − 1.07 Tg; Jmax Ha 49884, Hd 200000, ΔS = 659.70 − 0.75 Tg
  (J mol-1, J mol-1 K-1, Tg growth temperature in °C);
- "arrhenius": Bernacchi et al. (2001) Vcmax Ea 65.33 kJ mol-1; Bernacchi et al. (2003) Plant Cell
  Environ 26:1419 J Ea 43.5 kJ mol-1, applied to Jmax;
- "collatz1991": Collatz et al. (1991) Vmax = Vmax25 2.4^((T−25)/10) / (1 + exp((S Tk − H)/(R Tk))),
  S 710 J mol-1 K-1, H 220 kJ mol-1 [from memory]; this form is not normalised (0.966 at 25 °C), as published.
Acclimation to growth temperature (Kattge & Knorr 2007, their eqs. for ΔS(Tg) and Jmax25/Vcmax25 =
2.59 − 0.035 Tg): the growth temperature Tg [°C] may differ from cell to cell and month to month
(``growth_temperature_c`` of :func:`fvcb_acclimated_terms`; the parameter set's ``growth_temperature_c``
when none is given). Kattge & Knorr took Tg as the mean air temperature of the 30 days before the
measurement (from memory); their data span growth temperatures of about 11-35 °C (from memory), and Tg
outside that range is held at its nearest end (:data:`GROWTH_TEMPERATURE_RANGE_C`), as the CLM5 technical
note does (Lawrence et al. 2018, eqs. 9.15-9.16: "acclimation is restricted" to 11-35 °C). Tg changes ΔS of
Vcmax and Jmax ("peaked" only), and Jmax25 where the set derives it from Vcmax25 (``jmax25: None``).
The peaked responses are written as :func:`~.temperature.peaked_given`: the leaf temperature enters
through Arrhenius factors (tabulated by the compiled engine), Tg through ΔS only.
Rd: Arrhenius Ea 46.39 kJ mol-1 (Bernacchi et al. 2001), or for "collatz1991"
Rd = Rd25 2^((T−25)/10) / (1 + exp(1.3 (T − 55))) (Collatz et al. 1991 [from memory]). Tp follows Vcmax.
"""

from __future__ import annotations

import math
from typing import NamedTuple

import numpy as np

from . import array_ops as ops
from .elementwise import equation
from .models import LeafModel, LeafRates, register_leaf_model
from .rubisco import effective_michaelis_constant, effective_michaelis_constant_given_ratio, rubisco_constants
from .temperature import KELVIN_OFFSET, R_GAS, arrhenius, peaked_arrhenius, peaked_given, q10_response

#: A capacity that never limits (an unlimited Jmax or Tp) [µmol m-2 s-1]. A large finite number rather
#: than inf, so that tables of it can be interpolated and no inf - inf can arise.
UNLIMITED_RATE = 1e30

KATTGE_KNORR_2007 = {
    "vcmax_activation_energy": 71513.0,
    "jmax_activation_energy": 49884.0,
    "deactivation_energy": 200000.0,
    "vcmax_entropy_intercept": 668.39,
    "vcmax_entropy_slope": -1.07,
    "jmax_entropy_intercept": 659.70,
    "jmax_entropy_slope": -0.75,
}
# The same numbers as module floats, for the equations (which the compiled engine freezes as constants).
_VCMAX_ENTROPY_INTERCEPT = KATTGE_KNORR_2007["vcmax_entropy_intercept"]
_VCMAX_ENTROPY_SLOPE = KATTGE_KNORR_2007["vcmax_entropy_slope"]
_JMAX_ENTROPY_INTERCEPT = KATTGE_KNORR_2007["jmax_entropy_intercept"]
_JMAX_ENTROPY_SLOPE = KATTGE_KNORR_2007["jmax_entropy_slope"]
_DEACTIVATION_ENERGY = KATTGE_KNORR_2007["deactivation_energy"]
#: Kattge & Knorr (2007): Jmax25/Vcmax25 = 2.59 − 0.035 Tg [-, °C-1].
JMAX_RATIO_INTERCEPT = 2.59
JMAX_RATIO_SLOPE = -0.035
GROWTH_TEMPERATURE_RANGE_C = (11.0, 35.0)
"""Growth temperatures [°C] over which the Kattge & Knorr (2007) acclimation is applied; outside, Tg is
held at the nearest end (module docstring: the range of their data, from memory; the same restriction as
the CLM5 technical note, Lawrence et al. 2018, eqs. 9.15-9.16)."""
_TG_LOW, _TG_HIGH = GROWTH_TEMPERATURE_RANGE_C
BERNACCHI_CAPACITY_ACTIVATION = {"vcmax": 65330.0, "jmax": 43500.0, "rd": 46390.0}
COLLATZ_1991_VMAX = {"q10": 2.4, "entropy": 710.0, "deactivation_energy": 220000.0}


class C3Rates(NamedTuple):
    """FvCB results [µmol m-2 s-1] and the limitation code (1 Rubisco, 2 electron transport, 3 TPU)."""

    net: object
    gross: object
    photorespiration: object
    limitation: object


@equation
def acclimation_temperature(growth_temperature_c):
    """Tg [°C] as the acclimation uses it: held within :data:`GROWTH_TEMPERATURE_RANGE_C` (module docstring).
    NaN stays NaN."""
    return ops.where(growth_temperature_c < _TG_LOW, _TG_LOW,
                     ops.where(growth_temperature_c > _TG_HIGH, _TG_HIGH, growth_temperature_c))


@equation
def kattge_knorr_entropies(growth_temperature_c):
    """ΔS of Vcmax and Jmax [J mol-1 K-1] acclimated to growth temperature Tg [°C] (Kattge & Knorr 2007):
    ΔS = 668.39 − 1.07 Tg (Vcmax), 659.70 − 0.75 Tg (Jmax), Tg held within :data:`GROWTH_TEMPERATURE_RANGE_C`."""
    tg = acclimation_temperature(growth_temperature_c)
    return (_VCMAX_ENTROPY_INTERCEPT + _VCMAX_ENTROPY_SLOPE * tg, _JMAX_ENTROPY_INTERCEPT + _JMAX_ENTROPY_SLOPE * tg)


@equation
def jmax_vcmax_ratio(growth_temperature_c):
    """Jmax25/Vcmax25 [-] acclimated to growth temperature Tg [°C]: 2.59 − 0.035 Tg (Kattge & Knorr 2007),
    Tg held within :data:`GROWTH_TEMPERATURE_RANGE_C`."""
    return JMAX_RATIO_INTERCEPT + JMAX_RATIO_SLOPE * acclimation_temperature(growth_temperature_c)


def capacity_temperature_factors(temperature_c, response: str, growth_temperature_c=25.0):
    """Factors (Vcmax, Jmax, Rd) relative to their 25 °C values for one response name (module docstring).

    Parameters
    ----------
    temperature_c : leaf temperature [°C]
    response : "peaked" | "arrhenius" | "collatz1991"
    growth_temperature_c : Tg for "peaked" [°C]
    """
    if response == "peaked":
        vcmax_entropy, jmax_entropy = kattge_knorr_entropies(growth_temperature_c)
        kk = KATTGE_KNORR_2007
        vcmax = peaked_arrhenius(temperature_c, kk["vcmax_activation_energy"], kk["deactivation_energy"], vcmax_entropy)
        jmax = peaked_arrhenius(temperature_c, kk["jmax_activation_energy"], kk["deactivation_energy"], jmax_entropy)
        return vcmax, jmax, arrhenius(temperature_c, BERNACCHI_CAPACITY_ACTIVATION["rd"])
    if response == "arrhenius":
        ea = BERNACCHI_CAPACITY_ACTIVATION
        return (
            arrhenius(temperature_c, ea["vcmax"]),
            arrhenius(temperature_c, ea["jmax"]),
            arrhenius(temperature_c, ea["rd"]),
        )
    if response == "collatz1991":
        c91 = COLLATZ_1991_VMAX
        tk = temperature_c + KELVIN_OFFSET
        vcmax = q10_response(temperature_c, c91["q10"]) / (
            1.0 + np.exp((c91["entropy"] * tk - c91["deactivation_energy"]) / (R_GAS * tk))
        )
        rd = q10_response(temperature_c, 2.0) / (1.0 + np.exp(1.3 * (temperature_c - 55.0)))
        return vcmax, vcmax, rd
    raise ValueError(f"unknown Vcmax temperature response {response!r}; valid: peaked, arrhenius, collatz1991")


@equation
def non_rectangular_hyperbola(rate_a, rate_b, curvature):
    """Smaller root of θ x² − (a + b) x + a b = 0: a smooth co-limitation of two rates [units of a, b].

    Written as x = 2ab / (a + b + √((a + b)² − 4θab)), which has no cancellation at low light and no
    division by θ: θ = 0 gives the rectangular hyperbola ab/(a + b), θ = 1 the minimum of a and b;
    0 when both rates are 0.
    """
    total = rate_a + rate_b
    product = rate_a * rate_b
    # Rounding can push the discriminant a hair below zero when θ = 1 and a = b.
    denominator = total + ops.sqrt(ops.maximum(total * total - 4.0 * curvature * product, 0.0))
    # Both rates zero (darkness with closed stomata) is 0/0: the co-limited rate is then 0.
    return ops.where(denominator > 0, 2.0 * product / ops.where(denominator > 0, denominator, 1.0), 0.0)


@equation
def electron_transport_rate(absorbed_par, jmax, theta, spectral_correction):
    """Potential electron transport rate J [µmol m-2 s-1], non-rectangular hyperbola.

    J = smaller root of θ J² − (I2 + Jmax) J + I2 Jmax = 0,  I2 = absorbed_par (1 − f)/2
    (von Caemmerer 2000 eq. 2.14). ``jmax`` >= :data:`UNLIMITED_RATE` (or inf) means no saturation (J = I2).

    Parameters
    ----------
    absorbed_par : absorbed PAR photon flux density [µmol m-2 s-1]
    jmax : maximum electron transport rate [µmol m-2 s-1]
    theta : curvature θ [-]
    spectral_correction : f [-]
    """
    i2 = absorbed_par * (1.0 - spectral_correction) / 2.0
    unlimited = jmax >= UNLIMITED_RATE
    return ops.where(unlimited, i2, non_rectangular_hyperbola(i2, ops.where(unlimited, 1.0, jmax), theta))


@equation
def oxygenation_ratio(co2_pa, gamma_star_pa):
    """vo/vc = 2 Γ*/C [-] (Farquhar et al. 1980). C and Γ* in the same units (Pa here)."""
    return 2.0 * gamma_star_pa / co2_pa


@equation
def photorespiration_share(co2_pa, gamma_star_pa):
    """Share of gross carboxylation released by photorespiration, 0.5 vo/vc = Γ*/C [-]."""
    return gamma_star_pa / co2_pa


def fvcb_rates(co2_pa, o2_pa, absorbed_par, *, vcmax, jmax, tpu, rd, kc, ko, gamma_star, theta,
               spectral_correction) -> C3Rates:
    """FvCB net and gross assimilation, photorespiration [µmol m-2 s-1] and limitation from capacities.

    Parameters
    ----------
    co2_pa, o2_pa : CO2 and O2 partial pressures at Rubisco [Pa]
    absorbed_par : absorbed PAR [µmol m-2 s-1]
    vcmax, jmax, tpu, rd : capacities and day respiration at leaf temperature [µmol m-2 s-1]; jmax or tpu
        >= :data:`UNLIMITED_RATE` (or inf) never limit
    kc, ko, gamma_star : Rubisco constants [Pa]
    theta, spectral_correction : J curvature and f [-]

    The keyword form of :func:`fvcb`.
    """
    return fvcb(co2_pa, o2_pa, absorbed_par, vcmax, jmax, tpu, rd, kc, ko, gamma_star, theta, spectral_correction)


@equation
def fvcb(co2_pa, o2_pa, absorbed_par, vcmax, jmax, tpu, rd, kc, ko, gamma_star, theta, spectral_correction):
    """FvCB rates (:func:`fvcb_rates`, positional arguments in the same units) as :class:`C3Rates`.

    Each limiting rate is written vc = ρ C with ρ = Vcmax/(C + Km), J/(4C + 8Γ*) or, for TPU in its
    standard form (gross = 3 Tp, module docstring), 3 Tp/(C − Γ*); the smallest ρ limits, gross =
    ρ (C − Γ*) and photorespiration = ρ Γ*, which stays finite at C = 0. TPU can limit only where C > Γ*.
    """
    return fvcb_given_km(co2_pa, absorbed_par, vcmax, jmax, tpu, rd, effective_michaelis_constant(kc, ko, o2_pa),
                         gamma_star, theta, spectral_correction)


@equation
def fvcb_given_km(co2_pa, absorbed_par, vcmax, jmax, tpu, rd, km, gamma_star, theta, spectral_correction):
    """:func:`fvcb` with the effective Michaelis constant Km = Kc (1 + O/Ko) [Pa] given (O2 enters only
    through it and Γ*); other arguments as there. Returns :class:`C3Rates`."""
    electron_transport = electron_transport_rate(absorbed_par, jmax, theta, spectral_correction)
    light_denominator = 4.0 * co2_pa + 8.0 * gamma_star
    excess_co2 = co2_pa - gamma_star
    # Divisions are guarded rather than left to produce inf/NaN: under dask, np.errstate does not reach
    # the computation and the warnings would surface. C = Γ* = 0 (no CO2, no O2) leaves Rubisco limiting.
    # The inverses depend on CO2 and temperature only: a caller evaluating several leaves at one moment
    # (sunlit, shaded) computes them once after inlining, and the compiled form shares one division.
    positive = light_denominator > 0
    inverse_michaelis, inverse_light_denominator, inverse_excess = ops.reciprocals(
        co2_pa + km, ops.where(positive, light_denominator, 1.0), ops.where(excess_co2 > 0, excess_co2, 1.0))
    rate_rubisco = vcmax * inverse_michaelis
    rate_light = ops.where(positive, electron_transport * inverse_light_denominator, ops.inf)
    light_limited = rate_light < rate_rubisco
    rate = ops.minimum(rate_rubisco, rate_light)
    # TPU (gross = 3 Tp, Sharkey 1985) limits where 3 Tp < ρ (C − Γ*), i.e. where 3 Tp/(C − Γ*) < ρ, which
    # needs C > Γ*; written without dividing by a C − Γ* that may be 0 or negative.
    tpu_limited = (tpu < UNLIMITED_RATE) & (excess_co2 > 0) & (3.0 * tpu < rate * excess_co2)
    rate = ops.where(tpu_limited, 3.0 * tpu * inverse_excess, rate)
    limitation = ops.where(tpu_limited, 3, ops.where(light_limited, 2, 1))
    gross = rate * excess_co2
    return C3Rates(gross - rd, gross, rate * gamma_star, limitation)


def fvcb_temperature_terms(temperature_c, params) -> tuple:
    """Leaf-temperature terms of the FvCB model for the compiled engine's tables and the numpy engine.

    Returns (Kc [Pa], Kc/Ko [-], Γ* per Pa of O2 [-], Vcmax, Jmax, Tp [µmol m-2 s-1] before acclimation,
    Rd [µmol m-2 s-1], fArr(T; Hd) [-]) at leaf temperature ``temperature_c`` [°C] for a resolved C3 mapping.
    Kc/Ko rather than Ko: Km = Kc + O · Kc/Ko then needs no division per leaf.
    "Before acclimation": for the "peaked" response Vcmax25 · fArr(T; Ha) and Jmax25 · fArr(T; Ha) with the
    set's own Jmax25, to be completed by :func:`fvcb_acclimated_terms` for a growth temperature; for the other
    responses the full values (and fArr(T; Hd) = 0). An unlimited Jmax or Tp is :data:`UNLIMITED_RATE`.
    """
    kc, ko, gamma_per_o2 = rubisco_constants(params["kinetics"], temperature_c, 1.0)  # Γ* ∝ O: at O = 1 Pa
    response = params["vcmax_temperature_response"]
    if response == "peaked":
        kk = KATTGE_KNORR_2007
        vcmax_factor = arrhenius(temperature_c, kk["vcmax_activation_energy"])
        jmax_factor = arrhenius(temperature_c, kk["jmax_activation_energy"])
        rd_factor = arrhenius(temperature_c, BERNACCHI_CAPACITY_ACTIVATION["rd"])
        deactivation = arrhenius(temperature_c, kk["deactivation_energy"])
    else:
        vcmax_factor, jmax_factor, rd_factor = capacity_temperature_factors(temperature_c, response)
        deactivation = 0.0 * temperature_c
    jmax = UNLIMITED_RATE if math.isinf(params["jmax25"]) else params["jmax25"] * jmax_factor
    tpu = UNLIMITED_RATE if math.isinf(params["tpu25"]) else params["tpu25"] * vcmax_factor  # Tp follows Vcmax
    return (kc, kc / ko, gamma_per_o2, params["vcmax25"] * vcmax_factor, jmax, tpu, params["rd25"] * rd_factor,
            deactivation)


def fvcb_constants(params) -> tuple:
    """(θ, f, 1 if the response is "peaked" else 0, 1 if Jmax25 follows Tg else 0, the set's Tg [°C]) of a
    resolved C3 mapping. Jmax25 follows Tg where the set derives it (``jmax25: None``, Kattge & Knorr 2007)."""
    from .params import jmax25_is_derived  # params imports the leaf models' registry, not this module

    return (float(params["theta"]), float(params["spectral_correction"]),
            1.0 if params["vcmax_temperature_response"] == "peaked" else 0.0,
            1.0 if jmax25_is_derived(params) else 0.0, float(params["growth_temperature_c"]))


@equation
def fvcb_acclimated_terms(terms, constants, growth_temperature_c):
    """The FvCB terms (:func:`fvcb_temperature_terms`) completed for growth temperature Tg [°C].

    "peaked": Vcmax = terms[3] · peaked_given(1, fArr(T; Hd), ΔSv(Tg), Hd), Jmax alike with ΔSj(Tg), Tp
    follows Vcmax (:func:`~.temperature.peaked_given`, :func:`kattge_knorr_entropies`); where Jmax25 is
    derived, it is scaled by (2.59 − 0.035 Tg)/(2.59 − 0.035 Tg_set) (:func:`jmax_vcmax_ratio`).
    Returns the first seven terms as :func:`fvcb_leaf_rates` reads them (Kc, Kc/Ko and Γ* per Pa of O2
    unchanged: Rubisco kinetics do not acclimate here).
    """
    peaked = constants[2] > 0.5
    vcmax_entropy, jmax_entropy = kattge_knorr_entropies(growth_temperature_c)
    vcmax_factor = ops.where(peaked, peaked_given(1.0, terms[7], vcmax_entropy, _DEACTIVATION_ENERGY), 1.0)
    jmax_factor = ops.where(peaked, peaked_given(1.0, terms[7], jmax_entropy, _DEACTIVATION_ENERGY), 1.0)
    jmax_scale = ops.where(constants[3] > 0.5,
                           jmax_vcmax_ratio(growth_temperature_c) / jmax_vcmax_ratio(constants[4]), 1.0)
    jmax = ops.where(terms[4] >= UNLIMITED_RATE, terms[4], terms[4] * (jmax_scale * jmax_factor))
    tpu = ops.where(terms[5] >= UNLIMITED_RATE, terms[5], terms[5] * vcmax_factor)
    return (terms[0], terms[1], terms[2], terms[3] * vcmax_factor, jmax, tpu, terms[6])


@equation
def fvcb_leaf_rates(terms, constants, absorbed_par, co2_pa, o2_pa, capacity_scale):
    """The FvCB leaf from its temperature terms (:func:`fvcb_temperature_terms`) and constants
    (:func:`fvcb_constants`): absorbed PAR [µmol m-2 s-1], CO2 and O2 at Rubisco [Pa], ``capacity_scale``
    [-] on Vcmax. Returns :class:`~suitability.physiology.models.LeafRates`."""
    rates = fvcb_given_km(co2_pa, absorbed_par, terms[3] * capacity_scale, terms[4], terms[5], terms[6],
                          effective_michaelis_constant_given_ratio(terms[0], terms[1], o2_pa), terms[2] * o2_pa,
                          constants[0], constants[1])
    return LeafRates(rates.net, rates.gross, rates.photorespiration, rates.limitation, ops.nan, ops.nan)


def c3_assimilation(temperature_c, absorbed_par, co2_pa, o2_pa, params, capacity_scale=1.0,
                    growth_temperature_c=None) -> C3Rates:
    """C3 leaf rates at leaf temperature with the capacities of a resolved C3 parameter mapping.

    Parameters
    ----------
    temperature_c : leaf temperature [°C]
    absorbed_par : absorbed PAR [µmol m-2 s-1]
    co2_pa, o2_pa : intercellular CO2 and O2 partial pressures [Pa]
    params : mapping from ``resolve_params("C3", ...)``
    capacity_scale : factor on Vcmax (non-stomatal water stress) [-]
    growth_temperature_c : Tg [°C] of the acclimation (module docstring); None = the set's own
    """
    constants = fvcb_constants(params)
    growth = params["growth_temperature_c"] if growth_temperature_c is None else growth_temperature_c
    terms = fvcb_acclimated_terms(fvcb_temperature_terms(temperature_c, params), constants, growth)
    rates = fvcb_leaf_rates(terms, constants, absorbed_par, co2_pa, o2_pa, capacity_scale)
    return C3Rates(rates.net, rates.gross, rates.photorespiration, rates.limitation)


def fvcb_quantum_yield(temperature_c, co2_pa, o2_pa, params):
    """C3 light-limited quantum yield φ0 (C − Γ*)/(C + 2Γ*), φ0 = (1 − f)/8 [mol CO2 (mol absorbed photons)-1].

    The initial slope of FvCB gross assimilation against absorbed PAR (Farquhar et al. 1980; the form of
    Ehleringer et al. 1997 and Collatz et al. 1998). temperature_c [°C]; co2_pa, o2_pa at Rubisco [Pa].
    """
    gamma_star = rubisco_constants(params["kinetics"], temperature_c, o2_pa).gamma_star
    return (1.0 - params["spectral_correction"]) / 8.0 * (co2_pa - gamma_star) / (co2_pa + 2.0 * gamma_star)


FVCB = register_leaf_model(LeafModel(
    name="fvcb", pathway="C3", temperature_terms=fvcb_temperature_terms, constants=fvcb_constants,
    rates=fvcb_leaf_rates, quantum_yield=fvcb_quantum_yield, acclimated_terms=fvcb_acclimated_terms,
    limitation_codes={0: "invalid input", 1: "Rubisco", 2: "electron transport", 3: "triose-phosphate use"},
))
