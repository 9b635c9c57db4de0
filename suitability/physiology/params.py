"""Named parameter sets for the C3 and C4 leaf models, and ``resolve_params``.

``PARAMETER_SETS = {"C3": {name: mapping}, "C4": {name: mapping}}``. Every set is a flat mapping; its
``"source"`` entry names where the values come from, and the comments below give each value's source.
Tags: [P] published value, [M] recalled from memory (published, not verified here), [CP] common practice
with no single source, [C] calibrated here (how is stated).

Light use
---------
The leaf models take ABSORBED PAR. In the FvCB-type models the PSII photon flux is
I2 = absorbed_par · (1 − f)/2, so the light-limited quantum yield without photorespiration is
φ0 = (1 − f)/8 mol CO2 (mol absorbed photons)-1. von Caemmerer (2000) uses f = 0.15 (φ0 = 0.106), which
puts C3 yields 25 % above measured ones. For a fair C3-C4 comparison both pathways are tied to the same
measurements: f = 0.32 [C] makes the C3 yield in air at 30 °C and 330 ppm equal to 0.053, the C3-grass
value of Ehleringer & Pearcy (1983, Plant Physiol 73:555), with Bernacchi (2001) Γ* and CO2 at Rubisco =
ambient (the low-light limit). The same f is used in the von Caemmerer C4 model (f is a property of the
leaf's light harvesting, not of the pathway); its C4 yield then follows from the model (about 0.06).
For the Collatz (1992) C4 model the yield is its parameter α. Collatz et al. fitted α = 0.04; the
paper's abstract names the absorbed quantum flux as the model's light input [P: abstract seen], so 0.04
is taken per ABSORBED photon in the ``c4_tropical_grass`` set (the published model as fitted). The
``collatz1992`` set instead uses α = 0.0625, the mean of Ehleringer & Pearcy's (1983) NADP-ME (0.065) and
NAD-ME (0.060) C4 grass yields [P], so that both pathways' light-limited yields come from the same
measurements.

Plant-type sets and the default pair
------------------------------------
``c3_temperate_grass``, ``c3_cereal`` (FvCB; Vcmax25 of C3 herbaceous plants and C3 crops, Kattge et al.
2009 [from memory]; g1 of Lin et al. 2015 [P]), ``c4_tropical_grass`` (Collatz et al. 1992 as published)
and ``c4_cereal`` (maize: von Caemmerer 2000 with the Massad et al. 2007 temperature responses). The
default pair (:data:`DEFAULT_SETS`) is the grass pair. Calibration check (tests/physiology/
test_calibration.py), daily net canopy tie on a sunny mid-latitude summer day (22 MJ m-2, LAI 3, 10 °C
range, 40° N, day 196): at 280/350/420/560/700 ppm 16.4/20.2/23.1/25.6/29.9 °C with C3 acclimated to the
daily mean (Kattge & Knorr 2007; the model's default, the month's mean air temperature per cell),
14.2/16.7/22.1/25.7/29.8 °C with Tg fixed at 25 °C; Collatz, Berry & Clark (1998) put the boundary near
22 °C (20-24) at ~350 ppm. No value was tuned to reach that band.
The older ``bernacchi2001``/``collatz1992`` pair ties at 11.3/11.9/12.5/13.3/14.0 °C (Tg 25 °C; not re-measured).

Keys common to both pathways
----------------------------
``model`` (which leaf model), ``stomatal_model`` ("medlyn" | "fixed"), ``g1`` [kPa^0.5] (Medlyn et al.
2011 slope; Lin et al. 2015 Nature Clim Change 5:459 values for grasses [P]: C3 5.25, C4 1.62; crops
C3 5.79, C4 1.79), ``ci_ratio`` [-] (Ci/Ca when ``stomatal_model`` is "fixed": 0.7 C3, 0.4 C4 [CP]),
``water_stress_on_vcmax`` (bool: also scale the carboxylation capacities by water availability,
a non-stomatal limitation; default False).

C3 keys (FvCB, ``c3.py``)
-------------------------
``kinetics`` (a ``rubisco.KINETIC_SETS`` name), ``vcmax25``, ``jmax25``, ``rd25``, ``tpu25``
[µmol m-2 s-1 at 25 °C; ``None`` in a set means derived: jmax25 = (2.59 − 0.035 Tg) vcmax25 (Kattge &
Knorr 2007), rd25 = 0.015 vcmax25 (Collatz et al. 1991; widely used), tpu25 = no TPU limit (inf)],
``vcmax_temperature_response`` ("peaked" Kattge & Knorr 2007 with growth temperature; "arrhenius"
Bernacchi et al. 2001 for Vcmax (Ea 65.33 kJ mol-1) and Bernacchi et al. 2003 for J (43.5); "collatz1991"
Q10 2.4 with a high-temperature term), ``growth_temperature_c`` [°C] (Tg of Kattge & Knorr where no
per-cell growth temperature is given, i.e. with ``physiology.growth_temperature: parameter_set``; 25 °C [CP]),
``jmax_ratio_factor`` [-] (a factor on the derived Jmax25/Vcmax25 ratio, 1 in every set; the parameter draws
vary it, so that a drawn Jmax still follows each cell's growth temperature), ``theta`` [-] (curvature of J, 0.7, von Caemmerer 2000 eq. 2.14 [M default]), ``spectral_correction``
[-] (f above).

C4 keys
-------
Collatz et al. (1992) Aust J Plant Physiol 19:519: ``vmax25``, ``alpha``, ``k25`` [mol m-2 s-1],
``theta``, ``beta``, ``rd25``, ``q10`` (of Vmax, k and Rd; 2.0 as printed in the equations [P form]),
``low_temperature_c``/``high_temperature_c`` (13 and 36 °C of the Vmax inhibition terms) and
``respiration_high_temperature_c`` (55 °C).
von Caemmerer (2000), ch. 4: ``kinetics`` ("caemmerer2000_c4": Table 4.1 25 °C constants, default;
"caemmerer2021_c4": von Caemmerer 2021 constants, which make the model more O2-sensitive),
``vcmax25``, ``vpmax25``, ``vpr25``, ``jmax25``, ``rd25`` (None = 0.01 vcmax25 [M]), ``rm_fraction`` (Rm/Rd, 0.5), ``gbs`` [mol m-2 s-1 bar-1], ``x`` (share of J for the C4
cycle), ``theta``, ``spectral_correction``, ``capacity_temperature_response`` ("massad2007": peaked
maize responses of Massad et al. 2007; "caemmerer2021": Arrhenius Vcmax/Vpmax and Gaussian Jmax with
``jmax_optimum_c``, ``jmax_width_c``), ``chilling_response`` ("collatz1992" | "none") and
``chilling_temperature_c`` (the Collatz et al. 1992 low-temperature term on the enzyme capacities; see
``c4``).

Resolution
----------
``resolve_params(pathway, params)`` returns a read-only mapping with every derived value filled in and a
``"parameter_set"`` entry naming the base set, so resolving a resolved mapping again returns the same.
"""

from __future__ import annotations

import math
from functools import lru_cache
from types import MappingProxyType
from typing import Mapping

from .models import leaf_model

PARAMETER_SETS: dict[str, dict[str, dict]] = {
    "C3": {
        "bernacchi2001": {
            "source": (
                "FvCB (Farquhar et al. 1980) with Bernacchi et al. (2001) Rubisco kinetics; Vcmax/Jmax peaked "
                "responses of Kattge & Knorr (2007); stomata Medlyn et al. (2011) with Lin et al. (2015) "
                "C3-grass g1"
            ),
            "model": "fvcb",
            "kinetics": "bernacchi2001",
            # A typical C3 grass/crop capacity [CP]; Kattge et al. (2009) report ~80-100 for C3 herbs and crops [M].
            "vcmax25": 80.0,
            "jmax25": None,
            "rd25": None,
            "tpu25": None,
            "vcmax_temperature_response": "peaked",
            "growth_temperature_c": 25.0,
            "jmax_ratio_factor": 1.0,  # factor on the derived Jmax25/Vcmax25 (parameter draws vary it)
            "theta": 0.7,
            "spectral_correction": 0.32,
            "stomatal_model": "medlyn",
            "g1": 5.25,
            "ci_ratio": 0.7,
            "water_stress_on_vcmax": False,
        },
        "collatz1991": {
            "source": (
                "FvCB structure with the Collatz et al. (1991) Q10 kinetics and Vmax response; intrinsic "
                "quantum efficiency 0.08 [M] (f = 1 - 8 x 0.08); no electron-transport saturation and an "
                "export limit Vmax/2 (TPU = Vmax/6) as in Collatz et al. (1991)"
            ),
            "model": "fvcb",
            "kinetics": "collatz1991",
            "vcmax25": 80.0,
            "jmax25": math.inf,
            "rd25": None,
            "tpu25": 80.0 / 6.0,
            "vcmax_temperature_response": "collatz1991",
            "growth_temperature_c": 25.0,
            "jmax_ratio_factor": 1.0,  # factor on the derived Jmax25/Vcmax25 (parameter draws vary it)
            "theta": 0.7,
            "spectral_correction": 0.36,
            "stomatal_model": "medlyn",
            "g1": 5.25,
            "ci_ratio": 0.7,
            "water_stress_on_vcmax": False,
        },
        "c3_temperate_grass": {
            "source": (
                "C3 temperate grass: FvCB (Farquhar et al. 1980) with Bernacchi et al. (2001) kinetics; Vcmax25 "
                "of C3 herbaceous plants, Kattge et al. (2009) Global Change Biol 15:976 [from memory]; Jmax, "
                "peaked responses and their acclimation Kattge & Knorr (2007); stomata Medlyn et al. (2011) with "
                "the C3-grass g1 of Lin et al. (2015)"
            ),
            "model": "fvcb",
            "kinetics": "bernacchi2001",  # Bernacchi et al. (2001) Table 1, Ci basis [P]
            # Kattge et al. (2009) Table 3, C3 herbaceous: 78.2 ± 31.1 µmol m-2 s-1 [from memory, not verified].
            "vcmax25": 78.2,
            "jmax25": None,  # (2.59 − 0.035 Tg) Vcmax25, Kattge & Knorr (2007) [P]
            "rd25": None,  # 0.015 Vcmax25 (Collatz et al. 1991; widely used) [P]
            "tpu25": None,  # no TPU limit [CP]: not limiting at the CO2 of the maps (Sharkey 1985, from memory)
            "vcmax_temperature_response": "peaked",  # Kattge & Knorr (2007) [P]
            "growth_temperature_c": 25.0,  # Tg [CP]; the model may set it from each cell's climate
            "jmax_ratio_factor": 1.0,  # factor on the derived Jmax25/Vcmax25 (parameter draws vary it)
            "theta": 0.7,  # von Caemmerer (2000) eq. 2.14 default [M]
            "spectral_correction": 0.32,  # [C] C3-grass yield 0.053 at 30 °C (Ehleringer & Pearcy 1983), see above
            "stomatal_model": "medlyn",
            "g1": 5.25,  # Lin et al. (2015) C3 grass [P]
            "ci_ratio": 0.7,  # [CP], used only with stomatal_model "fixed"
            "water_stress_on_vcmax": False,
        },
        "c3_cereal": {
            "source": (
                "C3 cereal: FvCB (Farquhar et al. 1980) with Bernacchi et al. (2001) kinetics; Vcmax25 of C3 "
                "crops, Kattge et al. (2009) Global Change Biol 15:976 [from memory]; Jmax, peaked responses "
                "and their acclimation Kattge & Knorr (2007); stomata Medlyn et al. (2011) with the C3-crop g1 "
                "of Lin et al. (2015)"
            ),
            "model": "fvcb",
            "kinetics": "bernacchi2001",  # Bernacchi et al. (2001) Table 1, Ci basis [P]
            # Kattge et al. (2009) Table 3, C3 crops: 100.7 ± 36.6 µmol m-2 s-1 [from memory, not verified].
            "vcmax25": 100.7,
            "jmax25": None,  # (2.59 − 0.035 Tg) Vcmax25, Kattge & Knorr (2007) [P]
            "rd25": None,  # 0.015 Vcmax25 (Collatz et al. 1991; widely used) [P]
            "tpu25": None,  # no TPU limit [CP]
            "vcmax_temperature_response": "peaked",  # Kattge & Knorr (2007) [P]
            "growth_temperature_c": 25.0,  # Tg [CP]
            "jmax_ratio_factor": 1.0,  # factor on the derived Jmax25/Vcmax25 (parameter draws vary it)
            "theta": 0.7,  # von Caemmerer (2000) eq. 2.14 default [M]
            "spectral_correction": 0.32,  # [C] as for the C3 grass (Ehleringer & Pearcy 1983 C3 yield 0.053)
            "stomatal_model": "medlyn",
            "g1": 5.79,  # Lin et al. (2015) C3 crop [P]
            "ci_ratio": 0.7,  # [CP]
            "water_stress_on_vcmax": False,
        },
    },
    "C4": {
        "c4_tropical_grass": {
            "source": (
                "C4 tropical grass: Collatz, Ribas-Carbo & Berry (1992) Aust J Plant Physiol 19:519, the model and "
                "its Table 2 values as published, including the fitted quantum yield alpha = 0.04 per absorbed "
                "photon; Medlyn et al. (2011) stomata with the C4-grass g1 of Lin et al. (2015)"
            ),
            "model": "collatz1992",
            # Collatz et al. (1992) Table 2 [P via REFERENCES §3]: fitted to maize leaves; no grass-specific
            # capacity for this model form was verified, so the published fit is kept.
            "vmax25": 39.0,
            # Collatz et al. (1992) fit, per ABSORBED photon: the paper's abstract names the absorbed quantum
            # flux as the model's light input [P: abstract seen]. Below the measured C4-grass yields of
            # Ehleringer & Pearcy (1983), 0.060-0.065 [P]; the "collatz1992" set uses those instead.
            "alpha": 0.04,
            "k25": 0.7,  # Collatz et al. (1992) Table 2 [P]
            "theta": 0.83,  # Collatz et al. (1992) Table 2 [P]
            "beta": 0.93,  # Collatz et al. (1992) Table 2 [P]
            "rd25": 0.8,  # Collatz et al. (1992) Table 2 [P]
            "q10": 2.0,  # Collatz et al. (1992) equations [P form]
            "low_temperature_c": 13.0,  # Collatz et al. (1992) [P form]: the chilling term
            "high_temperature_c": 36.0,  # Collatz et al. (1992) [P form]
            "respiration_high_temperature_c": 55.0,  # Collatz et al. (1992) [P form]
            "stomatal_model": "medlyn",
            "g1": 1.62,  # Lin et al. (2015) C4 grass [P]
            "ci_ratio": 0.4,  # [CP]
            "water_stress_on_vcmax": False,
        },
        "c4_cereal": {
            "source": (
                "C4 cereal (maize): von Caemmerer (2000) ch. 4 C4 model with its Table 4.1 example leaf and "
                "constants; peaked Vcmax, Vpmax, Jmax temperature responses of maize, Massad, Tuzet & Bethenod "
                "(2007) Plant Cell Environ 30:1191; chilling term of Collatz et al. (1992); Medlyn et al. (2011) "
                "stomata with the C4-crop g1 of Lin et al. (2015)"
            ),
            "model": "vc2000",
            "kinetics": "caemmerer2000_c4",  # von Caemmerer (2000) Table 4.1 [P via secondary copies]
            "vcmax25": 60.0,  # von Caemmerer (2000) Table 4.1 example leaf [P via secondary copies]
            "vpmax25": 120.0,  # idem
            "vpr25": 80.0,  # idem
            "jmax25": 400.0,  # idem
            "rd25": None,  # 0.01 Vcmax25 [M]
            "rm_fraction": 0.5,  # Rm = 0.5 Rd, von Caemmerer (2000) [P via secondary copies]
            "gbs": 0.003,  # mol m-2 s-1 bar-1, von Caemmerer (2000) Table 4.1 [P via secondary copies]
            "x": 0.4,  # von Caemmerer (2000) Table 4.1 [P via secondary copies]
            "theta": 0.7,  # von Caemmerer (2000) [M]
            "spectral_correction": 0.32,  # [C] shared with the C3 sets (see above)
            "jmax_optimum_c": 43.0,  # von Caemmerer (2021), used only with "caemmerer2021"
            "jmax_width_c": 26.0,  # idem
            "capacity_temperature_response": "massad2007",  # Massad et al. (2007) maize [P via secondary copies]
            "chilling_response": "collatz1992",  # Collatz et al. (1992) low-temperature term [P form]
            "chilling_temperature_c": 13.0,  # Collatz et al. (1992) [P form]
            "stomatal_model": "medlyn",
            "g1": 1.79,  # Lin et al. (2015) C4 crop [P]
            "ci_ratio": 0.4,  # [CP]
            "water_stress_on_vcmax": False,
        },
        "collatz1992": {
            "source": (
                "Collatz, Ribas-Carbo & Berry (1992) Aust J Plant Physiol 19:519, Table 2 values, except "
                "alpha = 0.0625 per absorbed photon (Ehleringer & Pearcy 1983 C4 grasses); Medlyn et al. "
                "(2011) stomata with Lin et al. (2015) C4-grass g1"
            ),
            "model": "collatz1992",
            "vmax25": 39.0,
            "alpha": 0.0625,
            "k25": 0.7,
            "theta": 0.83,
            "beta": 0.93,
            "rd25": 0.8,
            "q10": 2.0,
            "low_temperature_c": 13.0,
            "high_temperature_c": 36.0,
            "respiration_high_temperature_c": 55.0,
            "stomatal_model": "medlyn",
            "g1": 1.62,
            "ci_ratio": 0.4,
            "water_stress_on_vcmax": False,
        },
        "vc2000": {
            "source": (
                "von Caemmerer (2000) Biochemical models of leaf photosynthesis, ch. 4 (enzyme- and light-"
                "limited C4 model, Table 4.1 example leaf, kinetic constants, gbs, x, Rm = 0.5 Rd); temperature "
                "responses of von Caemmerer (2021) J Exp Bot 72:6003; f shared with the C3 set"
            ),
            "model": "vc2000",
            "kinetics": "caemmerer2000_c4",
            "vcmax25": 60.0,
            "vpmax25": 120.0,
            "vpr25": 80.0,
            "jmax25": 400.0,
            "rd25": None,
            "rm_fraction": 0.5,
            "gbs": 0.003,
            "x": 0.4,
            "theta": 0.7,
            "spectral_correction": 0.32,
            "jmax_optimum_c": 43.0,
            "jmax_width_c": 26.0,
            # Massad, Tuzet & Bethenod (2007) peaked Vcmax, Vpmax, Jmax (maize) [P via two secondary copies].
            "capacity_temperature_response": "massad2007",
            # Collatz et al. (1992) low-temperature term on Vcmax, Vpmax, Vpr, half at 13 °C [P form].
            "chilling_response": "collatz1992",
            "chilling_temperature_c": 13.0,
            "stomatal_model": "medlyn",
            "g1": 1.62,
            "ci_ratio": 0.4,
            "water_stress_on_vcmax": False,
        },
    },
}

DEFAULT_SETS = {"C3": "c3_temperate_grass", "C4": "c4_tropical_grass"}
"""The default pair: the grass pair, as in the published map methods (Collatz, Berry & Clark 1998), which
are about grasses. Its daily-canopy C3/C4 tie is checked in tests/physiology/test_calibration.py."""

_CHOICES = {
    "kinetics": ("bernacchi2001", "collatz1991", "caemmerer2000_c4", "caemmerer2021_c4"),
    "vcmax_temperature_response": ("peaked", "arrhenius", "collatz1991"),
    "stomatal_model": ("medlyn", "fixed"),
    "capacity_temperature_response": ("massad2007", "caemmerer2021"),
    "chilling_response": ("collatz1992", "none"),
}
_OPTIONAL_NUMBERS = {"jmax25", "rd25", "tpu25"}
_FRACTIONS = {"theta", "beta", "spectral_correction", "ci_ratio", "x", "rm_fraction"}
_SIGNED = {"growth_temperature_c", "low_temperature_c", "high_temperature_c",
           "respiration_high_temperature_c", "jmax_optimum_c", "chilling_temperature_c"}


def register_parameter_set(pathway: str, name: str, values: Mapping) -> None:
    """Add the parameter set ``name`` of ``pathway`` to :data:`PARAMETER_SETS` (a name may be added once).

    ``values`` holds every key the set's model reads, a ``"model"`` naming a registered leaf model
    (:mod:`.models`) and a ``"source"`` naming where the values come from. It is checked by resolving it.
    """
    pathway = normalise_pathway(pathway)
    if name in PARAMETER_SETS[pathway]:
        raise ValueError(f"{pathway} parameter set {name!r} exists already")
    if not isinstance(values.get("source"), str) or not values["source"].strip():
        raise ValueError(f"{pathway} parameter set {name!r} must name its source")
    PARAMETER_SETS[pathway][name] = dict(values)
    _resolve_cached.cache_clear()
    try:
        resolve_params(pathway, name)
    except ValueError:
        del PARAMETER_SETS[pathway][name]
        raise


def normalise_pathway(pathway) -> str:
    """'C3' or 'C4' from any capitalisation; ValueError otherwise."""
    name = str(pathway).strip().upper()
    if name not in PARAMETER_SETS:
        raise ValueError(f"unknown pathway {pathway!r}; valid: C3, C4")
    return name


def _check_value(pathway: str, key: str, value, default):
    where = f"{pathway} parameter {key!r}"
    if key == "source":
        if not isinstance(value, str):
            raise ValueError(f"{where} must be a string")
        return value
    if key == "model":
        return leaf_model(value, pathway).name  # ValueError listing the registered models of the pathway
    if key in _CHOICES:
        if value not in _CHOICES[key]:
            raise ValueError(f"{where} = {value!r}; valid: {', '.join(_CHOICES[key])}")
        return value
    if isinstance(default, bool):
        if not isinstance(value, bool):
            raise ValueError(f"{where} must be true or false, got {value!r}")
        return value
    if value is None and key in _OPTIONAL_NUMBERS:
        return None
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise ValueError(f"{where} must be a number, got {value!r}")
    value = float(value)
    if math.isnan(value) or (math.isinf(value) and key not in {"jmax25", "tpu25"}):
        raise ValueError(f"{where} must be finite, got {value!r}")
    if key == "gbs" and value <= 0:
        raise ValueError(f"{where} must be > 0, got {value!r}")
    if key not in _SIGNED and value < 0:
        raise ValueError(f"{where} must be >= 0, got {value!r}")
    if key in _FRACTIONS and value > 1:
        raise ValueError(f"{where} must be between 0 and 1, got {value!r}")
    return value


def _derived_jmax25(params) -> float:
    from .c3 import jmax_vcmax_ratio  # c3 registers its model on import; params needs only this equation

    return float(jmax_vcmax_ratio(params["growth_temperature_c"])) * params["vcmax25"] * params["jmax_ratio_factor"]


def jmax25_is_derived(params) -> bool:
    """Whether a resolved C3 mapping's Jmax25 is the Kattge & Knorr (2007) value derived from Vcmax25 and
    Tg (its set has ``jmax25: None`` and no other value was given), so that it follows the growth
    temperature under acclimation (:func:`suitability.physiology.c3.fvcb_acclimated_terms`)."""
    base = PARAMETER_SETS["C3"].get(params.get("parameter_set"), {})
    return base.get("jmax25", 0.0) is None and params["jmax25"] == _derived_jmax25(params)


def _derive(pathway: str, merged: dict) -> dict:
    if pathway == "C3":
        if merged["jmax25"] is None:
            merged["jmax25"] = _derived_jmax25(merged)
        if merged["rd25"] is None:
            merged["rd25"] = 0.015 * merged["vcmax25"]
        if merged["tpu25"] is None:
            merged["tpu25"] = math.inf
    elif merged["model"] == "vc2000" and merged["rd25"] is None:
        merged["rd25"] = 0.01 * merged["vcmax25"]
    c3_kinetics = merged.get("kinetics") in ("bernacchi2001", "collatz1991")
    if "kinetics" in merged and c3_kinetics != (pathway == "C3"):
        valid = "bernacchi2001, collatz1991" if pathway == "C3" else "caemmerer2000_c4, caemmerer2021_c4"
        raise ValueError(f"{pathway} parameter 'kinetics' = {merged['kinetics']!r}; valid: {valid}")
    leaf_model(merged["model"], pathway)  # ValueError listing the registered models of the pathway
    return merged


@lru_cache(maxsize=512)
def _resolve_cached(pathway: str, set_name: str, overrides: tuple) -> Mapping:
    sets = PARAMETER_SETS[pathway]
    if set_name not in sets:
        raise ValueError(f"unknown {pathway} parameter set {set_name!r}; valid: {', '.join(sorted(sets))}")
    base = sets[set_name]
    merged = dict(base)
    for key, value in overrides:
        if key not in base:
            raise ValueError(
                f"unknown {pathway} parameter {key!r} for set {set_name!r}; valid: "
                f"parameter_set, {', '.join(sorted(base))}"
            )
        merged[key] = _check_value(pathway, key, value, base[key])
    merged = _derive(pathway, merged)
    merged["parameter_set"] = set_name
    return MappingProxyType(merged)


def resolve_params(pathway, params=None) -> Mapping:
    """Read-only parameter mapping for ``pathway`` ("C3"/"C4", any case).

    ``params`` is None (the pathway's default set, :data:`DEFAULT_SETS`), a set name, or
    a mapping with an optional ``"parameter_set"`` key (the base set; default set if absent) and any
    overrides of that set's keys. Unknown set names, keys or invalid values raise ``ValueError`` listing
    the valid ones. Results are cached by value, so calling this repeatedly is cheap.
    """
    pathway = normalise_pathway(pathway)
    if params is None:
        return _resolve_cached(pathway, DEFAULT_SETS[pathway], ())
    if isinstance(params, str):
        return _resolve_cached(pathway, params, ())
    if not isinstance(params, Mapping):
        raise ValueError(
            f"{pathway} params must be None, a parameter-set name or a mapping, got {type(params).__name__}"
        )
    set_name = params.get("parameter_set", DEFAULT_SETS[pathway])
    if not isinstance(set_name, str):
        raise ValueError(f"{pathway} 'parameter_set' must be a set name, got {set_name!r}")
    overrides = []
    for key, value in params.items():
        if key == "parameter_set":
            continue
        if not isinstance(key, str):
            raise ValueError(f"{pathway} parameter names must be strings, got {key!r}")
        if isinstance(value, (list, dict, set)):
            raise ValueError(f"{pathway} parameter {key!r} must be a single value, got {value!r}")
        overrides.append((key, value))
    try:
        return _resolve_cached(pathway, set_name, tuple(sorted(overrides)))
    except TypeError:
        raise ValueError(f"{pathway} parameter values must be numbers, strings, booleans or None") from None
