"""``leaf_assimilation``: one entry point for C3 and C4 leaves, with stomata and input checking.

Steps: resolve the parameter set; Ci/Ca from the stomatal model (``stomata``); CO2 and O2 partial
pressures = mole fraction × air pressure (``rubisco``); the C3 (``c3``) or C4 (``c4``) leaf model.

Invalid input elements give NaN in every float field (and limitation code 0), never an exception and
never a clamp: leaf temperature outside −60..60 °C, negative or infinite absorbed PAR, CO2 <= 0, water
availability outside 0..1, O2 outside 0..100 %, air pressure <= 0, negative VPD, or NaN anywhere.
Invalid elements are replaced by harmless values before the arithmetic, so no floating-point warnings
arise from them (also under dask, where ``np.errstate`` would not reach the computation).

Works elementwise on scalars, numpy arrays (broadcast together), xarray DataArrays and dask arrays;
dask-backed inputs stay lazy; results are of the same kind (numpy scalars for scalar input).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from . import c3, c4  # noqa: F401  (registers the leaf models)
from .array_ops import is_xarray as _is_xarray
from .array_ops import where
from .atmosphere import co2_partial_pressure_pa, o2_partial_pressure_pa
from .models import LEAF_MODELS, leaf_model
from .params import DEFAULT_SETS, normalise_pathway, resolve_params
from .stomata import capacity_scale, intercellular_co2_ratio

LIMITATION_CODES = {pathway: LEAF_MODELS[resolve_params(pathway, name)["model"]].limitation_codes
                    for pathway, name in DEFAULT_SETS.items()}
"""Meaning of ``LeafAssimilation.limitation`` per pathway (of the default sets' models; every model's own
codes are in its registry entry, :data:`suitability.physiology.models.LEAF_MODELS`)."""


@dataclass(frozen=True)
class LeafAssimilation:
    """Leaf CO2 exchange, elementwise over the broadcast inputs.

    Attributes
    ----------
    net : net assimilation A = gross − Rd [µmol m-2 s-1]
    gross : gross assimilation, carboxylation less photorespiratory release (A + Rd) [µmol m-2 s-1]
    photorespiration : CO2 released by photorespiration, 0.5 vo [µmol m-2 s-1] (0 in Collatz 1992 C4)
    limitation : int8 code, see ``LIMITATION_CODES`` (C3: 1 Rubisco, 2 electron transport, 3 TPU;
        C4: 1 enzyme, 2 light, 3 CO2/PEPc; 0 invalid input)
    intercellular_co2 : Ci [µmol mol-1]
    bundle_sheath_co2 : C4 bundle-sheath CO2 (partial pressure over air pressure) [µmol mol-1];
        NaN for C3 and for the Collatz (1992) model
    leakiness : C4 bundle-sheath leakiness φ [-]; NaN for C3, Collatz (1992), and where no PEP
        carboxylation occurs (darkness)
    """

    net: object
    gross: object
    photorespiration: object
    limitation: object
    intercellular_co2: object
    bundle_sheath_co2: object
    leakiness: object


def _sanitise(inputs):
    """Inputs with invalid elements replaced by defaults, and the validity masks of non-scalar inputs.

    ``inputs`` holds tuples (value, lower, lower_inclusive, upper, upper_inclusive, default). A valid
    scalar adds no mask; an invalid scalar adds ``False``.
    """
    masks, clean = [], []
    for value, lower, lower_inclusive, upper, upper_inclusive, default in inputs:
        if isinstance(value, (list, tuple)):
            value = np.asarray(value, dtype=float)
        ok = (value >= lower if lower_inclusive else value > lower) & (
            value <= upper if upper_inclusive else value < upper
        )
        if not _is_xarray(value) and np.ndim(value) == 0 and not hasattr(value, "dask"):
            if bool(ok):
                clean.append(value)
            else:
                masks.append(False)
                clean.append(default)
        else:
            masks.append(ok)
            clean.append(where(ok, value, default))
    return clean, masks


def _finish(value, valid, fill):
    if valid is not True:
        value = where(valid, value, fill)
    if isinstance(value, np.ndarray) and value.ndim == 0:
        return value[()]
    return value


def leaf_assimilation(pathway, temperature_c, absorbed_par, co2_ppm, *, o2_percent=20.95, pressure_kpa=101.325,
                      vpd_kpa=1.0, water_availability=1.0, params=None,
                      growth_temperature_c=None) -> LeafAssimilation:
    """Net and gross leaf assimilation of a C3 or C4 leaf.

    Parameters
    ----------
    pathway : "C3" or "C4" (any case)
    temperature_c : leaf temperature [°C]
    absorbed_par : absorbed photosynthetically active photon flux density [µmol m-2 s-1]
    co2_ppm : ambient CO2 mole fraction [µmol mol-1]
    o2_percent : O2 mole fraction [%]
    pressure_kpa : air pressure [kPa]
    vpd_kpa : vapour pressure deficit [kPa]
    water_availability : W [-], 0..1: only with ``water_stress_on_vcmax`` does it act on a single leaf (it
        scales the capacities); the soil's water supply limits the canopy's day (``water``, ``canopy``)
    params : None | set name | mapping (see ``resolve_params``)
    growth_temperature_c : growth temperature Tg [°C] of models that acclimate (C3 FvCB: Kattge & Knorr
        2007, ``c3``); None = the parameter set's ``growth_temperature_c``; NaN gives NaN

    Equations: ``c3`` (FvCB), ``c4`` (Collatz 1992 or von Caemmerer 2000), ``stomata`` (Medlyn 2011).
    """
    pathway = normalise_pathway(pathway)
    p = resolve_params(pathway, params)
    inf = np.inf
    with np.errstate(all="ignore"):
        (temperature, par, co2, water, o2, pressure, vpd), masks = _sanitise([
            (temperature_c, -60.0, True, 60.0, True, 25.0),
            (absorbed_par, 0.0, True, inf, False, 0.0),
            (co2_ppm, 0.0, False, inf, False, 400.0),
            (water_availability, 0.0, True, 1.0, True, 1.0),
            (o2_percent, 0.0, True, 100.0, True, 20.95),
            (pressure_kpa, 0.0, False, inf, False, 101.325),
            (vpd_kpa, 0.0, True, inf, False, 1.0),
        ])
        valid = True
        if any(mask is False for mask in masks):
            valid = False
        else:
            for mask in masks:
                valid = mask if valid is True else valid & mask

        ci_ppm = co2 * intercellular_co2_ratio(vpd, p)
        co2_pa = co2_partial_pressure_pa(ci_ppm, pressure)
        o2_pa = o2_partial_pressure_pa(o2, pressure)
        scale = capacity_scale(water, p)
        model = leaf_model(p["model"], pathway)
        constants = model.constants(p)
        growth = p.get("growth_temperature_c", np.nan) if growth_temperature_c is None else growth_temperature_c
        terms = model.acclimate(model.temperature_terms(temperature, p), constants, growth)
        rates = model.rates(terms, constants, par, co2_pa, o2_pa, scale)
        broadcast = 0.0 * rates.net  # models without bundle-sheath terms return scalar NaN
        bundle_sheath = broadcast + rates.bundle_sheath_co2_pa / (pressure * 1e-3)
        leakiness = broadcast + rates.leakiness
        limitation = _finish(rates.limitation, valid, 0)
        return LeafAssimilation(
            net=_finish(rates.net, valid, np.nan),
            gross=_finish(rates.gross, valid, np.nan),
            photorespiration=_finish(rates.photorespiration, valid, np.nan),
            limitation=limitation.astype(np.int8) if hasattr(limitation, "astype") else np.int8(limitation),
            intercellular_co2=_finish(ci_ppm + 0.0 * rates.net, valid, np.nan),
            bundle_sheath_co2=_finish(bundle_sheath, valid, np.nan),
            leakiness=_finish(leakiness, valid, np.nan),
        )
