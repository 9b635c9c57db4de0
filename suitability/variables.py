"""The glossary as data: every input and output layer with its canonical units and defaults.

Inputs are converted to the canonical units listed here before any computation; outputs are written in
them. Docs, the config checker and the writers all read this table, so a layer's units are defined once.
Units are CF/UDUNITS strings that ``pint`` (with the ``cf_xarray`` registry) parses.
"""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class Variable:
    """One layer of the glossary.

    name: canonical layer name used in configs and file names.
    units: canonical units (CF string). Inputs are converted to these.
    long_name: human-readable description, written as band description.
    valid_range: physically plausible (min, max) in canonical units; values outside it are treated as
        invalid input (set to nodata and counted), never silently clamped.
    resampling: default resampling when aligning onto the target grid (rasterio Resampling name).
    monthly: True if the layer has one value per month, False if static.
    """

    name: str
    units: str
    long_name: str
    valid_range: tuple[float, float]
    resampling: str
    monthly: bool


INPUT_VARIABLES: dict[str, Variable] = {
    v.name: v
    for v in [
        Variable("tmin", "degC", "monthly mean daily minimum air temperature", (-60.0, 60.0), "bilinear", True),
        Variable("tmax", "degC", "monthly mean daily maximum air temperature", (-60.0, 60.0), "bilinear", True),
        Variable("tmean", "degC", "monthly mean air temperature", (-60.0, 60.0), "bilinear", True),
        Variable("shortwave", "MJ m-2 d-1", "mean daily global shortwave radiation", (0.0, 45.0), "average", True),
        Variable("par", "mol m-2 d-1", "mean daily photosynthetically active photon flux", (0.0, 100.0), "average", True),
        Variable("water_availability", "1", "water availability, 0 no water to 1 unstressed", (0.0, 1.0), "average", True),
        Variable("water_stress", "1", "water stress, 0 unstressed to 1 no water", (0.0, 1.0), "average", True),
        Variable("vpd", "kPa", "mean daytime vapour pressure deficit", (0.0, 10.0), "bilinear", True),
        Variable("humidity", "1", "mean relative humidity as a fraction", (0.0, 1.0), "bilinear", True),
        Variable("elevation", "m", "ground elevation above sea level", (-500.0, 9000.0), "bilinear", False),
        Variable("lai", "m2 m-2", "leaf area index of the canopy", (0.0, 15.0), "average", False),
    ]
}

OUTPUT_VARIABLES: dict[str, Variable] = {
    v.name: v
    for v in [
        Variable("c3_assimilation", "g m-2", "seasonal potential canopy net assimilation of a C3 canopy, as carbon", (-1e4, 1e5), "average", False),
        Variable("c4_assimilation", "g m-2", "seasonal potential canopy net assimilation of a C4 canopy, as carbon", (-1e4, 1e5), "average", False),
        Variable("pathway_advantage", "1", "normalised C4 minus C3 advantage (A4 - A3) / (A4 + A3)", (-1.0, 1.0), "average", False),
        Variable("pathway_class", "1", "favoured pathway: 1 C3, 2 contested, 3 C4, 255 nodata", (1.0, 3.0), "mode", False),
        Variable("c4_favoured_months", "1", "number of season months in which C4 is favoured", (0.0, 12.0), "average", False),
        Variable("photorespiration_share", "1", "share of C3 gross carboxylation released by photorespiration", (0.0, 1.0), "average", False),
        Variable("crossover_temperature", "degC", "temperature above which C4 light-limited quantum yield exceeds C3", (0.0, 50.0), "average", False),
        Variable("advantage_change", "1", "change of the pathway advantage against the baseline", (-2.0, 2.0), "average", False),
        Variable("class_transition", "1", "baseline class * 10 + scenario class; 255 nodata", (11.0, 33.0), "mode", False),
    ]
}

# Aliases that mean the same quantity with the opposite sense or another name.
WATER_LAYERS = ("water_availability", "water_stress")
RADIATION_LAYERS = ("shortwave", "par")

CLASS_C3 = 1
CLASS_CONTESTED = 2
CLASS_C4 = 3
CLASS_NODATA = 255
CLASS_NAMES = {CLASS_C3: "C3 favoured", CLASS_CONTESTED: "contested", CLASS_C4: "C4 favoured"}

#: Class colours as RGB, shared by the GeoTIFF colour tables and the brief figures: blue-green C3 favoured,
#: pale grey contested, amber C4 favoured (from the colour-blind-safe set of Okabe & Ito 2008).
CLASS_COLOURS_RGB = {CLASS_C3: (0, 158, 115), CLASS_CONTESTED: (221, 221, 221), CLASS_C4: (230, 159, 0)}
