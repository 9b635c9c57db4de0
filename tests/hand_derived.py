"""Expectations derived here by hand from published equations, written independently of suitability's code.

Each function names its equation and source; tests import them as oracles. Nothing here imports suitability.
"""

from __future__ import annotations

import math

from scipy.optimize import brentq

R = 8.314  # J mol-1 K-1


def gamma_star_umol_mol(temperature_c: float, o2_percent: float = 20.95) -> float:
    """CO2 compensation point without day respiration, Γ* [µmol mol-1].

    Bernacchi et al. (2001, Plant Cell Environ 24:253, Table 1): 42.75 µmol mol-1 at 25 °C and
    O = 210 mmol mol-1, Ea 37.83 kJ mol-1, normalised Arrhenius form; scaled in proportion to O
    (Γ* = 0.5 O/τ, Farquhar, von Caemmerer & Berry 1980).
    """
    tk = temperature_c + 273.15
    return 42.75 * (o2_percent / 21.0) * math.exp(37830.0 * (tk - 298.15) / (298.15 * R * tk))


def saturation_vapour_pressure_kpa(temperature_c: float) -> float:
    """e°(T) = 0.6108 exp(17.27 T / (T + 237.3)) [kPa] (FAO-56, Allen et al. 1998, eq. 11)."""
    return 0.6108 * math.exp(17.27 * temperature_c / (temperature_c + 237.3))


def crossover_with_collatz_c4(alpha: float, co2_ppm: float, *, spectral_correction: float = 0.32,
                              o2_percent: float = 20.95, c3_ci_ratio: float = 1.0) -> float:
    """Leaf temperature [°C] where the C3 and C4 light-limited quantum yields are equal.

    C3: φ3 = φ0 (C − Γ*)/(C + 2Γ*), φ0 = (1 − f)/8 (Farquhar et al. 1980; the form used by Ehleringer
    et al. 1997 and Collatz et al. 1998), with C = ``c3_ci_ratio`` × the ambient CO2 (1: no drawdown, the
    light-limited limit of one leaf; g1/(g1 + √D): the canopy's Ci, Medlyn et al. 2011).
    C4 (Collatz, Ribas-Carbo & Berry 1992): φ4 = α, independent of temperature and CO2.
    φ3 = α  <=>  Γ* = C (φ0 − α)/(φ0 + 2α); Γ*(T) from :func:`gamma_star_umol_mol`, solved for T with
    scipy's brentq on 0-50 °C. f = 0.32 is the documented default of the bernacchi2001 set.
    """
    phi0 = (1.0 - spectral_correction) / 8.0
    gamma_needed = c3_ci_ratio * co2_ppm * (phi0 - alpha) / (phi0 + 2.0 * alpha)
    return brentq(lambda t: gamma_star_umol_mol(t, o2_percent) - gamma_needed, 0.0, 50.0, xtol=1e-12)
