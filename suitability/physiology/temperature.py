"""Temperature response functions.

Every response here is *normalised*: it returns the factor by which a rate or constant at 25 °C is
multiplied, so ``k(T) = k25 * response(T)``. All functions are pure numpy broadcasting (ufuncs and
operators only), so they work unchanged on scalars, numpy arrays, xarray DataArrays and dask arrays.

References
----------
- Normalised Arrhenius form: Medlyn et al. (2002) Plant Cell Environ 25:1167, eq. 16
  (doi:10.1046/j.1365-3040.2002.00891.x); Bernacchi et al. (2001) Plant Cell Environ 24:253.
- Peaked Arrhenius: Johnson, Eyring & Williams (1942) J Cell Comp Physiol 20:247; Medlyn et al. (2002)
  eqs. 17-18 (form and optimum).
- Q10: the classic van 't Hoff form, as used by Collatz et al. (1991) Agric For Meteorol 54:107.
"""

from __future__ import annotations

import numpy as np

from .array_ops import is_xarray as _is_xarray  # noqa: F401  (re-exported)
from .array_ops import weak_scalar, where  # noqa: F401  (re-exported)

R_GAS = 8.314
"""Universal gas constant [J mol-1 K-1], the value used by Bernacchi et al. (2001) and Medlyn et al. (2002)."""

KELVIN_OFFSET = 273.15
"""0 °C in kelvin [K]."""

REFERENCE_TEMPERATURE_K = 298.15
"""25 °C, the reference temperature of all normalised responses [K]."""


def arrhenius(temperature_c, activation_energy):
    """Normalised Arrhenius factor, 1 at 25 °C.

    f(T) = exp[Ea (Tk - 298.15) / (298.15 R Tk)]   (Medlyn et al. 2002, eq. 16; Bernacchi et al. 2001)

    Parameters
    ----------
    temperature_c : leaf temperature [°C]
    activation_energy : Ea [J mol-1]
    """
    tk = temperature_c + KELVIN_OFFSET
    return np.exp(activation_energy * (tk - REFERENCE_TEMPERATURE_K) / (REFERENCE_TEMPERATURE_K * R_GAS * tk))


def peaked_arrhenius(temperature_c, activation_energy, deactivation_energy, entropy):
    """Normalised peaked Arrhenius factor, 1 at 25 °C.

    f(T) = fArr(T) · [1 + exp((298.15 ΔS − Hd)/(298.15 R))] / [1 + exp((Tk ΔS − Hd)/(R Tk))]

    (Johnson et al. 1942; Medlyn et al. 2002, eq. 17.)

    Parameters
    ----------
    temperature_c : leaf temperature [°C]
    activation_energy : Ha [J mol-1]
    deactivation_energy : Hd [J mol-1]
    entropy : ΔS [J mol-1 K-1]
    """
    tk = temperature_c + KELVIN_OFFSET
    at_reference = weak_scalar(1.0 + np.exp(
        (REFERENCE_TEMPERATURE_K * entropy - deactivation_energy) / (REFERENCE_TEMPERATURE_K * R_GAS)
    ))
    at_temperature = 1.0 + np.exp((tk * entropy - deactivation_energy) / (R_GAS * tk))
    return arrhenius(temperature_c, activation_energy) * at_reference / at_temperature


def peaked_arrhenius_optimum_c(activation_energy, deactivation_energy, entropy):
    """Temperature at which the peaked Arrhenius response is largest [°C].

    Topt = Hd / (ΔS − R ln(Ha / (Hd − Ha)))   (Medlyn et al. 2002, eq. 18)

    Parameters
    ----------
    activation_energy : Ha [J mol-1]
    deactivation_energy : Hd [J mol-1]
    entropy : ΔS [J mol-1 K-1]
    """
    ratio = activation_energy / (deactivation_energy - activation_energy)
    return deactivation_energy / (entropy - R_GAS * np.log(ratio)) - KELVIN_OFFSET


def q10_response(temperature_c, q10, reference_c=25.0):
    """Q10 factor, 1 at the reference temperature.

    f(T) = Q10^((T − Tref)/10)

    Parameters
    ----------
    temperature_c : leaf temperature [°C]
    q10 : factor per 10 °C [-]
    reference_c : reference temperature [°C]
    """
    return q10 ** ((temperature_c - reference_c) / 10.0)


def gaussian_response(temperature_c, optimum_c, width_c):
    """Gaussian temperature factor normalised to 1 at 25 °C.

    f(T) = exp(−((T − To)/Ω)²) / exp(−((25 − To)/Ω)²)

    The form von Caemmerer (2021, J Exp Bot 72:6003) uses for C4 electron transport, here divided by its
    value at 25 °C so that a 25 °C capacity can be scaled with it.

    Parameters
    ----------
    temperature_c : leaf temperature [°C]
    optimum_c : To [°C]
    width_c : Ω [°C]
    """
    return np.exp(((25.0 - optimum_c) / width_c) ** 2 - ((temperature_c - optimum_c) / width_c) ** 2)
