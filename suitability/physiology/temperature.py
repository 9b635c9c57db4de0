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

from . import array_ops as ops
from .array_ops import is_xarray as _is_xarray  # noqa: F401  (re-exported)
from .array_ops import weak_scalar, where  # noqa: F401  (re-exported)
from .elementwise import equation

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


@equation
def reference_deactivation(entropy, deactivation_energy):
    """The deactivation term of the peaked response at 25 °C, exp((298.15 ΔS − Hd)/(298.15 R)) [-].

    It depends on the entropy ΔS [J mol-1 K-1] (which acclimates to the growth temperature, Kattge &
    Knorr 2007) and Hd [J mol-1], not on the leaf temperature.
    """
    return ops.exp((REFERENCE_TEMPERATURE_K * entropy - deactivation_energy) / (REFERENCE_TEMPERATURE_K * R_GAS))


@equation
def peaked_given(arrhenius_factor, deactivation_factor, entropy, deactivation_energy):
    """Normalised peaked factor from its leaf-temperature parts, 1 at 25 °C [-].

    f = fArr(T; Ha) · (1 + k25) / (1 + k25 · fArr(T; Hd)),  k25 = exp((298.15 ΔS − Hd)/(298.15 R))

    which is Medlyn et al. (2002) eq. 17 rearranged: exp((Tk ΔS − Hd)/(R Tk)) = k25 · fArr(T; Hd), with
    fArr the normalised Arrhenius factor (:func:`arrhenius`). The leaf temperature enters only through
    the two Arrhenius factors (tabulated by the compiled engine), the entropy ΔS only through k25, so ΔS
    may differ from cell to cell (growth temperature, Kattge & Knorr 2007).

    Parameters
    ----------
    arrhenius_factor : fArr(T; Ha) [-]
    deactivation_factor : fArr(T; Hd) [-]
    entropy : ΔS [J mol-1 K-1]
    deactivation_energy : Hd [J mol-1]
    """
    # A numpy float64 scalar (from a scalar ΔS) would upcast float32 arrays (NEP 50): kept weak.
    at_reference = ops.weak_scalar(reference_deactivation(entropy, deactivation_energy))
    return arrhenius_factor * (1.0 + at_reference) / (1.0 + at_reference * deactivation_factor)


def peaked_arrhenius(temperature_c, activation_energy, deactivation_energy, entropy):
    """Normalised peaked Arrhenius factor, 1 at 25 °C.

    f(T) = fArr(T) · [1 + exp((298.15 ΔS − Hd)/(298.15 R))] / [1 + exp((Tk ΔS − Hd)/(R Tk))]

    (Johnson et al. 1942; Medlyn et al. 2002, eq. 17), computed as :func:`peaked_given` of its parts.

    Parameters
    ----------
    temperature_c : leaf temperature [°C]
    activation_energy : Ha [J mol-1]
    deactivation_energy : Hd [J mol-1]
    entropy : ΔS [J mol-1 K-1]
    """
    return peaked_given(arrhenius(temperature_c, activation_energy), arrhenius(temperature_c, deactivation_energy),
                        weak_scalar(entropy), deactivation_energy)


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
