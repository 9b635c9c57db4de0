"""What ``suitability parameters`` shows: the registered parameter sets (plant types), every value with
its unit and meaning, and where the set comes from.

Values are read from the registry (:data:`suitability.physiology.params.PARAMETER_SETS` through
:func:`~suitability.physiology.params.resolve_params`, so derived values are shown as the model uses
them); this module adds only the words: the unit and meaning of each key, and how a value the set leaves
empty is derived (as documented in ``physiology/params.py``). A key of a newly registered set without an
entry here is shown with "?" as unit (and a test lists it).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

#: key -> (unit, meaning). Units as in the docstring of suitability/physiology/params.py.
PARAMETER_KEYS: dict[str, tuple[str, str]] = {
    "source": ("", "where the values of the set come from"),
    "model": ("", "leaf model (registered in physiology/models.py)"),
    "kinetics": ("", "set of Rubisco / PEPC kinetic constants and their temperature responses"),
    "vcmax25": ("µmol m-2 s-1", "maximum Rubisco carboxylation rate at 25 °C"),
    "jmax25": ("µmol m-2 s-1", "maximum electron transport rate at 25 °C"),
    "rd25": ("µmol m-2 s-1", "leaf (day) respiration at 25 °C"),
    "tpu25": ("µmol m-2 s-1", "triose-phosphate use limit at 25 °C (inf: no limit)"),
    "vcmax_temperature_response": ("", "temperature response of Vcmax and Jmax"),
    "growth_temperature_c": ("°C", "growth temperature of the Kattge & Knorr (2007) acclimation where no per-cell "
                                   "one is used (physiology.growth_temperature: parameter_set)"),
    "jmax_ratio_factor": ("-", "factor on the derived Jmax25/Vcmax25 ratio (1; parameter draws vary it)"),
    "theta": ("-", "curvature of the light response"),
    "spectral_correction": ("-", "f, share of absorbed light not used by the photosystems"),
    "stomatal_model": ("", "how intercellular CO2 is found: medlyn (Medlyn et al. 2011) or fixed Ci/Ca"),
    "g1": ("kPa^0.5", "slope of the Medlyn et al. (2011) stomatal model"),
    "ci_ratio": ("-", "Ci/Ca when stomatal_model is fixed"),
    "water_stress_on_vcmax": ("", "also scale the carboxylation capacities by water availability"),
    "vmax25": ("µmol m-2 s-1", "maximum Rubisco capacity at 25 °C (Collatz et al. 1992)"),
    "alpha": ("mol mol-1", "quantum yield per absorbed photon"),
    "k25": ("mol m-2 s-1", "initial slope of the CO2 response (PEP carboxylase) at 25 °C"),
    "beta": ("-", "curvature between the light/Rubisco and CO2 limits"),
    "q10": ("-", "Q10 of Vmax, k and Rd"),
    "low_temperature_c": ("°C", "low-temperature inhibition point of Vmax"),
    "high_temperature_c": ("°C", "high-temperature inhibition point of Vmax"),
    "respiration_high_temperature_c": ("°C", "high-temperature inhibition point of respiration"),
    "vpmax25": ("µmol m-2 s-1", "maximum PEP carboxylation rate at 25 °C"),
    "vpr25": ("µmol m-2 s-1", "PEP regeneration rate"),
    "rm_fraction": ("-", "mesophyll share of leaf respiration (Rm/Rd)"),
    "gbs": ("mol m-2 s-1 bar-1", "bundle-sheath conductance to CO2"),
    "x": ("-", "share of electron transport used by the C4 cycle"),
    "jmax_optimum_c": ("°C", "optimum temperature of Jmax"),
    "jmax_width_c": ("°C", "width of the Jmax temperature response"),
    "capacity_temperature_response": ("", "temperature response of the C4 capacities: massad2007 (peaked, "
                                          "Massad et al. 2007) or caemmerer2021 (von Caemmerer 2021)"),
    "chilling_response": ("", "low-temperature limit of the C4 capacities: collatz1992 or none"),
    "chilling_temperature_c": ("°C", "low-temperature inhibition point of the C4 capacities (Collatz et al. 1992)"),
}

#: (pathway, key) -> how the value is derived when the set leaves it empty (physiology/params.py, _derive).
DERIVED = {
    ("C3", "jmax25"): "derived: (2.59 - 0.035 Tg) x vcmax25 (Kattge & Knorr 2007), shown at Tg = "
                      "growth_temperature_c; follows each cell's Tg under acclimation",
    ("C3", "rd25"): "derived: 0.015 x vcmax25 (Collatz et al. 1991)",
    ("C3", "tpu25"): "derived: no TPU limit",
    ("C4", "rd25"): "derived: 0.01 x vcmax25 (from memory, see physiology/params.py)",
}


@dataclass(frozen=True)
class ParameterValue:
    """One row of a set: key, value as the model uses it, unit, meaning, and a note (derived values)."""

    key: str
    value: Any
    unit: str
    meaning: str
    note: str = ""


def parameter_sets() -> list[dict[str, Any]]:
    """Every registered set: pathway, name, model, whether it is the pathway's default, and its source."""
    from .physiology.params import DEFAULT_SETS, PARAMETER_SETS

    rows = []
    for pathway, sets in PARAMETER_SETS.items():
        for name, values in sets.items():
            rows.append({"pathway": pathway, "name": name, "model": values.get("model", ""),
                         "default": DEFAULT_SETS.get(pathway) == name, "source": values.get("source", "")})
    return rows


def find_set(name: str) -> tuple[str, str]:
    """(pathway, name) of the set called ``name``; ValueError listing the valid names."""
    from .physiology.params import PARAMETER_SETS

    found = [(pathway, name) for pathway, sets in PARAMETER_SETS.items() if name in sets]
    if not found:
        valid = ", ".join(f"{p} {n}" for p, sets in PARAMETER_SETS.items() for n in sets)
        raise ValueError(f"no parameter set {name!r}; sets: {valid}")
    return found[0]


def describe_set(name: str) -> tuple[str, list[ParameterValue]]:
    """(pathway, rows) of the set ``name``: every value as :func:`resolve_params` gives it."""
    from .physiology.params import PARAMETER_SETS, resolve_params

    pathway, name = find_set(name)
    base = PARAMETER_SETS[pathway][name]
    resolved = resolve_params(pathway, name)
    rows = []
    for key, value in resolved.items():
        if key in ("parameter_set",):
            continue
        unit, meaning = PARAMETER_KEYS.get(key, ("?", "(not described in suitability/parameter_info.py)"))
        note = DERIVED.get((pathway, key), "derived") if base.get(key, 0) is None else ""
        rows.append(ParameterValue(key, value, unit, meaning, note))
    return pathway, rows


def format_value(value: Any) -> str:
    """A value as text: numbers with up to 6 significant digits, inf as 'inf'."""
    if isinstance(value, bool) or value is None:
        return str(value).lower()
    if isinstance(value, float):
        return "inf" if math.isinf(value) else f"{value:.6g}"
    return str(value)


__all__ = ["PARAMETER_KEYS", "DERIVED", "ParameterValue", "parameter_sets", "find_set", "describe_set", "format_value"]
