"""Light-limited quantum yields of C3 and C4 leaves, and the leaf quantum-yield crossover temperature.

Two crossovers are named apart in this package: this module's *leaf quantum-yield crossover* (the leaf
temperature where the light-limited quantum yields of the two pathways are equal, Ehleringer & Björkman
1977; Ehleringer, Cerling & Helliker 1997), and the *canopy crossover* (the temperature at which the daily
net assimilation of the two canopies ties, solved with the canopy model). The first is a property of
leaves at low light; the second is what the class maps compare.

C3 (Farquhar et al. 1980; the form of Ehleringer et al. 1997 and Collatz et al. 1998):
    φ3 = φ0 (C − Γ*)/(C + 2Γ*),   φ0 = (1 − f)/8,
the initial slope of FvCB gross assimilation against ABSORBED PAR (I2 = absorbed (1 − f)/2 and
Wj (1 − Γ*/C) = J (C − Γ*)/(4C + 8Γ*)). It falls with temperature (Γ* rises) and rises with CO2 and
with lower O2; it does not depend on air pressure, because C and Γ* scale together.

C4: Collatz et al. (1992): φ4 = α, independent of temperature, CO2 and O2 (as Ehleringer & Björkman
1977 observed). von Caemmerer (2000): the slope of the model's gross assimilation between absorbed PAR
50 and 150 µmol m-2 s-1, the linear range over which quantum yields are measured (Ehleringer &
Björkman 1977); it depends weakly on temperature and O2 through bundle-sheath photorespiration.

Leaf quantum-yield crossover (Ehleringer, Cerling & Helliker 1997 Oecologia 112:285; Collatz, Berry &
Clark 1998 Oecologia 114:441): the leaf temperature where φ3 = φ4. The yields are evaluated at the
canopy's intercellular CO2, Ci = Ca · Ci/Ca, with each pathway's own stomatal model (Medlyn et al. 2011,
Ci/Ca = g1/(g1 + √D), or its fixed ratio) at a stated vapour pressure deficit D (``vpd_kpa``, default
:data:`CANOPY_VPD_KPA`): the leaves of a canopy photosynthesise at that Ci, not at Ca. ``vpd_kpa=None``
gives the former form, Ci = Ca (the low-light limit of a single leaf, whose drawdown vanishes). Found by
bisection on 0-50 °C with a fixed number of steps, elementwise; NaN (and a ``warnings.warn``) where the
yields do not cross in that range.
"""

from __future__ import annotations

import warnings
from typing import Mapping

import numpy as np

from .array_ops import is_xarray as _is_xarray
from .atmosphere import co2_partial_pressure_pa, o2_partial_pressure_pa
from .c4 import QUANTUM_YIELD_PAR_RANGE  # noqa: F401  (re-exported)
from .models import leaf_model
from .params import normalise_pathway, resolve_params
from .stomata import intercellular_co2_ratio

CROSSOVER_RANGE_C = (0.0, 50.0)
"""Leaf temperatures searched for a crossover [°C]."""

CANOPY_VPD_KPA = 1.0
"""Vapour pressure deficit [kPa] at which the canopy's Ci/Ca is taken for the leaf quantum-yield crossover:
about the daytime mean of a humid mid-latitude summer day with the air's vapour pressure e°(Tmin) (FAO-56
eq. 48), e.g. 1.05 kPa for a 17-27 °C day (common practice, no source)."""

BISECTION_STEPS = 36
"""Halvings of the 50 °C search interval: 50 / 2**36 < 1e-9 °C."""

def c3_quantum_yield(temperature_c, co2_ppm, *, o2_percent=20.95, pressure_kpa=101.325, params=None):
    """C3 light-limited quantum yield [mol CO2 (mol absorbed photons)-1]: φ0 (C − Γ*)/(C + 2Γ*).

    Parameters
    ----------
    temperature_c : leaf temperature [°C]
    co2_ppm : CO2 mole fraction at Rubisco (intercellular) [µmol mol-1]
    o2_percent : O2 mole fraction [%]
    pressure_kpa : air pressure [kPa]
    params : C3 parameters (see ``resolve_params``); φ0 = (1 − f)/8 from ``spectral_correction``
    """
    return _quantum_yield("C3", temperature_c, co2_ppm, o2_percent, pressure_kpa, params)


def c4_quantum_yield(temperature_c, co2_ppm, *, o2_percent=20.95, pressure_kpa=101.325, params=None):
    """C4 light-limited quantum yield [mol CO2 (mol absorbed photons)-1] (module docstring).

    Parameters
    ----------
    temperature_c : leaf temperature [°C]
    co2_ppm : mesophyll (intercellular) CO2 mole fraction [µmol mol-1]
    o2_percent : O2 mole fraction [%]
    pressure_kpa : air pressure [kPa]
    params : C4 parameters (see ``resolve_params``)
    """
    return _quantum_yield("C4", temperature_c, co2_ppm, o2_percent, pressure_kpa, params)


def _quantum_yield(pathway, temperature_c, co2_ppm, o2_percent, pressure_kpa, params):
    """The quantum yield of the leaf model the resolved parameters name (its registry entry)."""
    p = resolve_params(pathway, params)
    co2 = co2_partial_pressure_pa(co2_ppm, pressure_kpa)
    o2 = o2_partial_pressure_pa(o2_percent, pressure_kpa)
    return leaf_model(p["model"], pathway).quantum_yield(temperature_c, co2, o2, p)


def _pathway_params(params) -> tuple[Mapping, Mapping]:
    if params is None:
        return resolve_params("C3"), resolve_params("C4")
    if not isinstance(params, Mapping):
        raise ValueError("crossover params must be None or a mapping {'C3': ..., 'C4': ...}")
    by_pathway = {}
    for key, value in params.items():
        try:
            by_pathway[normalise_pathway(key)] = value
        except ValueError:
            raise ValueError(f"crossover params key {key!r} is not a pathway; valid: C3, C4") from None
    return resolve_params("C3", by_pathway.get("C3")), resolve_params("C4", by_pathway.get("C4"))


def _crossover_kernel(co2_ppm, o2_percent, pressure_kpa, vpd_kpa=np.nan, *, c3_params, c4_params, at_ambient):
    """Bisection on numpy arrays (module docstring); emits the warning for elements without a crossover.

    ``at_ambient``: Ci = Ca (``vpd_kpa`` unused); else each pathway's Ci/Ca at ``vpd_kpa``."""
    co2_ppm, o2_percent, pressure_kpa, vpd_kpa = np.broadcast_arrays(
        np.asarray(co2_ppm, dtype=float), np.asarray(o2_percent, dtype=float), np.asarray(pressure_kpa, dtype=float),
        np.asarray(vpd_kpa, dtype=float),
    )
    with np.errstate(all="ignore"):
        valid = (
            (co2_ppm > 0) & np.isfinite(co2_ppm) & (o2_percent >= 0) & (o2_percent <= 100)
            & (pressure_kpa > 0) & np.isfinite(pressure_kpa)
        )
        if not at_ambient:
            valid &= (vpd_kpa >= 0) & np.isfinite(vpd_kpa)
        co2 = np.where(valid, co2_ppm, 400.0)
        o2 = np.where(valid, o2_percent, 20.95)
        pressure = np.where(valid, pressure_kpa, 101.325)
        if at_ambient:
            c3_co2 = c4_co2 = co2
        else:
            vpd = np.where(valid, vpd_kpa, 1.0)
            c3_co2 = co2 * intercellular_co2_ratio(vpd, c3_params)
            c4_co2 = co2 * intercellular_co2_ratio(vpd, c4_params)

        def difference(temperature_c):
            kwargs = {"o2_percent": o2, "pressure_kpa": pressure}
            return (c3_quantum_yield(temperature_c, c3_co2, params=c3_params, **kwargs)
                    - c4_quantum_yield(temperature_c, c4_co2, params=c4_params, **kwargs))

        low = np.full(co2.shape, CROSSOVER_RANGE_C[0])
        high = np.full(co2.shape, CROSSOVER_RANGE_C[1])
        low_positive = difference(low) > 0
        crosses = low_positive != (difference(high) > 0)
        for _ in range(BISECTION_STEPS):
            middle = 0.5 * (low + high)
            same_side_as_low = (difference(middle) > 0) == low_positive
            low = np.where(same_side_as_low, middle, low)
            high = np.where(same_side_as_low, high, middle)
        found = valid & crosses
    missing = int(np.count_nonzero(valid & ~crosses))
    if missing:
        warnings.warn(
            f"no C3/C4 quantum-yield crossover between {CROSSOVER_RANGE_C[0]:g} and {CROSSOVER_RANGE_C[1]:g} °C "
            f"for {missing} of {valid.size} elements; NaN returned there",
            RuntimeWarning,
            stacklevel=3,
        )
    return np.where(found, 0.5 * (low + high), np.nan)


def quantum_yield_crossover(co2_ppm, *, o2_percent=20.95, pressure_kpa=101.325, params=None,
                          vpd_kpa=CANOPY_VPD_KPA):
    """The leaf quantum-yield crossover: the leaf temperature [°C] at which the C3 and C4 light-limited
    quantum yields are equal, at the canopy's Ci/Ca (module docstring). Not the canopy crossover (the tie of
    the two canopies' daily net assimilation).

    Parameters
    ----------
    co2_ppm : ambient CO2 mole fraction [µmol mol-1]
    o2_percent : O2 mole fraction [%]
    pressure_kpa : air pressure [kPa]
    params : None (default sets of both pathways) or a mapping ``{"C3": spec, "C4": spec}``, each spec
        anything ``resolve_params`` accepts; a missing pathway takes its default set
    vpd_kpa : vapour pressure deficit [kPa] setting each pathway's Ci/Ca (its stomatal model, well watered);
        default :data:`CANOPY_VPD_KPA`; None evaluates the yields at Ci = Ca

    Elementwise; NaN where an input is invalid (CO2 <= 0, O2 outside 0..100 %, pressure <= 0, VPD < 0, NaN)
    or where no crossover exists in 0-50 °C (then also a ``RuntimeWarning``; for dask-backed inputs it is
    issued when the result is computed). Equation: φ3(T, Ci3) = φ4(T, Ci4), see the module docstring.
    """
    c3_params, c4_params = _pathway_params(params)
    kwargs = {"c3_params": c3_params, "c4_params": c4_params, "at_ambient": vpd_kpa is None}
    args = (co2_ppm, o2_percent, pressure_kpa) if vpd_kpa is None else (co2_ppm, o2_percent, pressure_kpa, vpd_kpa)
    if any(_is_xarray(a) for a in args):
        import xarray as xr

        return xr.apply_ufunc(_crossover_kernel, *args, kwargs=kwargs, dask="parallelized", output_dtypes=[float])
    if any(hasattr(a, "dask") for a in args):
        import dask.array as da

        blocks = da.broadcast_arrays(*[da.asarray(a, dtype=float) for a in args])
        return da.map_blocks(_crossover_kernel, *blocks, dtype=float, **kwargs)
    result = _crossover_kernel(*args, **kwargs)
    return result[()] if result.ndim == 0 else result


__all__ = ["CANOPY_VPD_KPA", "c3_quantum_yield", "c4_quantum_yield", "quantum_yield_crossover"]
