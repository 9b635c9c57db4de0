"""Rubisco kinetic constants Kc, Ko and the CO2 compensation point Γ* versus leaf temperature.

Pressure convention
-------------------
All gas quantities in the physiology package are **partial pressures in pascal**:

- the CO2 and O2 the leaf sees are partial pressures, mole fraction × air pressure
  (``co2_partial_pressure_pa``, ``o2_partial_pressure_pa``);
- the Michaelis constants Kc and Ko are partial pressures fixed by the enzyme and the temperature;
  they do **not** change with air pressure. Constants published on a mole-fraction basis (Bernacchi
  et al. 2001, µmol mol-1 and mmol mol-1) are converted at the standard pressure 101.325 kPa at which
  they were measured;
- Γ* = 0.5 O / S_c/o is proportional to the O2 partial pressure, so it is computed from the O2 partial
  pressure actually present, Γ* = Γ*_ref(T) · O / O_ref.

So at a fixed CO2 mole fraction, a leaf at altitude sees less CO2 against the same Kc and C3
assimilation falls with elevation, while Γ*/C (and so the photorespiration share and the light-limited
quantum yield) does not depend on pressure, because CO2 and O2 partial pressures scale together.

Kinetic sets (``KINETIC_SETS``)
-------------------------------
- ``"bernacchi2001"``: Bernacchi et al. (2001) Plant Cell Environ 24:253 (doi:10.1111/j.1365-3040.2001.00668.x),
  intercellular-CO2 basis, normalised Arrhenius: Kc 404.9 µmol mol-1 (Ea 79.43 kJ mol-1), Ko 278.4
  mmol mol-1 (36.38), Γ* 42.75 µmol mol-1 (37.83) at O = 210 mmol mol-1.
- ``"collatz1991"``: Collatz et al. (1991) Agric For Meteorol 54:107 (doi:10.1016/0168-1923(91)90002-8),
  Q10 form: Kc 30 Pa (Q10 2.1), Ko 30 kPa (Q10 1.2), τ 2600 (Q10 0.57), Γ* = O/(2τ).
- ``"caemmerer2000_c4"``: bundle-sheath Rubisco of C4 leaves, 25 °C values of von Caemmerer (2000)
  Biochemical models of leaf photosynthesis, Table 4.1: Kc 650 µbar, Ko 450 mbar, γ* 0.000193, with the
  activation energies of von Caemmerer (2021) below.
- ``"caemmerer2021_c4"``: bundle-sheath Rubisco of C4 leaves for the von Caemmerer (2000) model, 25 °C
  values and activation energies from von Caemmerer (2021) J Exp Bot 72:6003 (doi:10.1093/jxb/erab266):
  Kc 1210 µbar (64.2 kJ mol-1), Ko 292 mbar (10.5), γ* = 0.5/1310 (31.1), Γ* = γ* O.
"""

from __future__ import annotations

from typing import NamedTuple

from .atmosphere import co2_partial_pressure_pa, o2_partial_pressure_pa  # noqa: F401  (re-exported)
from .elementwise import equation
from .temperature import arrhenius, q10_response

STANDARD_PRESSURE_KPA = 101.325
"""Air pressure at which mole-fraction constants are converted to partial pressures [kPa]."""

KINETIC_SETS = {
    "bernacchi2001": {
        "form": "arrhenius",
        "kc25_pa": 404.9e-6 * STANDARD_PRESSURE_KPA * 1e3,
        "kc_activation_energy": 79430.0,
        "ko25_pa": 278.4e-3 * STANDARD_PRESSURE_KPA * 1e3,
        "ko_activation_energy": 36380.0,
        "gamma_star25_pa": 42.75e-6 * STANDARD_PRESSURE_KPA * 1e3,
        "gamma_star_activation_energy": 37830.0,
        "o2_reference_pa": 210e-3 * STANDARD_PRESSURE_KPA * 1e3,
        "source": "Bernacchi et al. (2001) Plant Cell Environ 24:253, Table 1 (Ci basis)",
    },
    "collatz1991": {
        "form": "q10",
        "kc25_pa": 30.0,
        "kc_q10": 2.1,
        "ko25_pa": 30.0e3,
        "ko_q10": 1.2,
        "tau25": 2600.0,
        "tau_q10": 0.57,
        "source": "Collatz et al. (1991) Agric For Meteorol 54:107, Table A1",
    },
    "caemmerer2000_c4": {
        "form": "arrhenius_gamma",
        "kc25_pa": 650e-6 * 1e5,
        "kc_activation_energy": 64200.0,
        "ko25_pa": 450e-3 * 1e5,
        "ko_activation_energy": 10500.0,
        "gamma25": 0.000193,
        "gamma_activation_energy": 31100.0,
        "source": "von Caemmerer (2000) Table 4.1 values at 25 °C; activation energies of von Caemmerer (2021)",
    },
    "caemmerer2021_c4": {
        "form": "arrhenius_gamma",
        "kc25_pa": 1210e-6 * 1e5,
        "kc_activation_energy": 64200.0,
        "ko25_pa": 292e-3 * 1e5,
        "ko_activation_energy": 10500.0,
        "gamma25": 0.5 / 1310.0,
        "gamma_activation_energy": 31100.0,
        "source": "von Caemmerer (2021) J Exp Bot 72:6003, Table 1 (C4 bundle-sheath Rubisco)",
    },
}


class RubiscoConstants(NamedTuple):
    """Kc, Ko and Γ* at one leaf temperature and O2 partial pressure, all in Pa."""

    kc: object
    ko: object
    gamma_star: object


@equation
def effective_michaelis_constant(kc, ko, o2):
    """Km = Kc (1 + O/Ko), the Michaelis constant for CO2 in the presence of O2 [units of kc].

    Farquhar, von Caemmerer & Berry (1980) Planta 149:78. ``o2`` in the units of ``ko``.
    """
    return effective_michaelis_constant_given_ratio(kc, kc / ko, o2)


@equation
def effective_michaelis_constant_given_ratio(kc, kc_over_ko, o2):
    """Km = Kc + O · Kc/Ko (= Kc (1 + O/Ko), :func:`effective_michaelis_constant`) [units of kc], from Kc
    and the ratio Kc/Ko [-]; both depend on temperature only, so a compiled caller tabulates them and
    needs no division here. ``o2`` in the units of Ko.

    Farquhar, von Caemmerer & Berry (1980) Planta 149:78.
    """
    return kc + o2 * kc_over_ko


def rubisco_constants(kinetics: str, temperature_c, o2_pa) -> RubiscoConstants:
    """Kc, Ko and Γ* [Pa] at leaf temperature ``temperature_c`` [°C] and O2 partial pressure ``o2_pa`` [Pa].

    ``kinetics`` names an entry of ``KINETIC_SETS`` (see the module docstring for equations and sources):

    - Arrhenius sets: k(T) = k25 · exp[Ea (Tk − 298.15)/(298.15 R Tk)]; Γ* = Γ*25 f(T) · O/O_ref
      (Bernacchi 2001) or Γ* = γ*25 f(T) · O (von Caemmerer 2021);
    - Q10 set: k(T) = k25 · Q10^((T − 25)/10); Γ* = O / (2 τ(T)) (Collatz 1991).
    """
    try:
        constants = KINETIC_SETS[kinetics]
    except KeyError:
        raise ValueError(
            f"unknown Rubisco kinetic set {kinetics!r}; valid: {', '.join(sorted(KINETIC_SETS))}"
        ) from None
    form = constants["form"]
    if form == "q10":
        kc = constants["kc25_pa"] * q10_response(temperature_c, constants["kc_q10"])
        ko = constants["ko25_pa"] * q10_response(temperature_c, constants["ko_q10"])
        tau = constants["tau25"] * q10_response(temperature_c, constants["tau_q10"])
        return RubiscoConstants(kc, ko, o2_pa / (2.0 * tau))
    kc = constants["kc25_pa"] * arrhenius(temperature_c, constants["kc_activation_energy"])
    ko = constants["ko25_pa"] * arrhenius(temperature_c, constants["ko_activation_energy"])
    if form == "arrhenius":
        gamma_star = (
            constants["gamma_star25_pa"]
            * arrhenius(temperature_c, constants["gamma_star_activation_energy"])
            * (o2_pa / constants["o2_reference_pa"])
        )
    else:
        gamma_star = constants["gamma25"] * arrhenius(temperature_c, constants["gamma_activation_energy"]) * o2_pa
    return RubiscoConstants(kc, ko, gamma_star)
