"""The glossary as data: every input and output layer with its canonical units and defaults.

Inputs are converted to the canonical units listed here before any computation; outputs are written in
them. Docs, the config checker and the writers all read this table, so a layer's units are defined once.
Units are CF/UDUNITS strings that ``pint`` (with the ``cf_xarray`` registry) parses.

:data:`OUTPUT_LAYERS` is the one registry of output layers: what the model returns per scenario
("seasonal"), what the pipeline derives against the baseline ("change") and what goes into the monthly
NetCDF ("datacube"), with units, legend, colours and the indicator that computes each. Adding an output
layer is one entry here plus its computation and tests (see DEVELOPERS.md).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


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
        Variable("precipitation", "mm d-1", "mean daily precipitation (monthly total / days in the month)",
                 (0.0, 150.0), "average", True),
        Variable("pet", "mm d-1", "mean daily reference (potential) evapotranspiration", (0.0, 30.0), "average", True),
        Variable("soil_water_capacity", "mm", "plant-available soil water capacity of the root zone",
                 (1.0, 2000.0), "average", False),
        Variable("wind_speed", "m s-1", "mean wind speed at 2 m above the ground (FAO-56 Penman-Monteith PET)",
                 (0.0, 40.0), "bilinear", True),
        Variable("vpd", "kPa", "mean daytime vapour pressure deficit", (0.0, 10.0), "bilinear", True),
        Variable("humidity", "1", "mean relative humidity as a fraction", (0.0, 1.0), "bilinear", True),
        Variable("elevation", "m", "ground elevation above sea level", (-500.0, 9000.0), "bilinear", False),
        Variable("lai", "m2 m-2", "leaf area index of the canopy", (0.0, 15.0), "average", False),
    ]
}

# Aliases that mean the same quantity with the opposite sense or another name.
WATER_LAYERS = ("water_availability", "water_stress")
#: Layers from which water availability is derived by the soil-water balance (suitability.model).
RAINFALL_LAYERS = ("precipitation", "pet", "soil_water_capacity", "wind_speed")
RADIATION_LAYERS = ("shortwave", "par")

#: The reference evapotranspiration the rainfall balance computes where no ``pet`` layer is given.
PENMAN_MONTEITH = "FAO-56 Penman-Monteith (eq. 6)"
HARGREAVES_SAMANI = "Hargreaves-Samani (FAO-56 eq. 52)"


def pet_method(layers) -> str:
    """Which reference evapotranspiration the rainfall balance computes from these layer names (without a
    ``pet`` layer): FAO-56 Penman-Monteith where wind (``wind_speed``), humidity (``humidity`` or ``vpd``),
    ``shortwave`` and ``tmin``/``tmax`` are given, else Hargreaves-Samani from Tmin and Tmax."""
    names = set(layers)
    if {"wind_speed", "shortwave", "tmin", "tmax"} <= names and names & {"humidity", "vpd"}:
        return PENMAN_MONTEITH
    return HARGREAVES_SAMANI

CLASS_C3 = 1
CLASS_CONTESTED = 2
CLASS_C4 = 3
#: Cells with no month of the growing season (config ``season``): neither pathway grows there.
CLASS_NO_SEASON = 4
CLASS_NODATA = 255
CLASS_NAMES = {CLASS_C3: "C3 favoured", CLASS_CONTESTED: "contested", CLASS_C4: "C4 favoured",
               CLASS_NO_SEASON: "no growing season"}

#: Class colours as RGB, shared by the GeoTIFF colour tables and the brief figures: blue-green C3 favoured,
#: pale grey contested, amber C4 favoured (from the colour-blind-safe set of Okabe & Ito 2008); a muted
#: violet-grey of our own for "no growing season", chosen to stay distinct from the three under colour
#: vision deficiencies (tests/reports/test_figures.py).
CLASS_COLOURS_RGB = {CLASS_C3: (0, 158, 115), CLASS_CONTESTED: (221, 221, 221), CLASS_C4: (230, 159, 0),
                     CLASS_NO_SEASON: (140, 110, 160)}

# Colour tables of our own (RGBA). Classes take their class colour; transitions: kept classes take their
# class colour, moves toward C4 warm (stronger = darker), moves toward C3 cool; nodata is transparent.
_TRANSPARENT = (0, 0, 0, 0)
_CLASS_RGBA = {code: rgb + (255,) for code, rgb in CLASS_COLOURS_RGB.items()}
PATHWAY_CLASS_COLOURS = {**_CLASS_RGBA, CLASS_NODATA: _TRANSPARENT}
CLASS_TRANSITION_COLOURS = {
    11: _CLASS_RGBA[CLASS_C3], 22: _CLASS_RGBA[CLASS_CONTESTED], 33: _CLASS_RGBA[CLASS_C4],
    12: (247, 205, 150, 255), 23: (224, 112, 36, 255), 13: (176, 45, 28, 255),
    21: (154, 208, 200, 255), 32: (150, 178, 222, 255), 31: (38, 66, 150, 255),
    # Into or out of "no growing season": that class's colour.
    **{b * 10 + s: _CLASS_RGBA[CLASS_NO_SEASON] for b in CLASS_NAMES for s in CLASS_NAMES
       if CLASS_NO_SEASON in (b, s)},
    CLASS_NODATA: _TRANSPARENT,
}
PATHWAY_CLASS_LEGEND = dict(CLASS_NAMES)
CLASS_TRANSITION_LEGEND = {
    b * 10 + s: f"{CLASS_NAMES[b]} -> {CLASS_NAMES[s]}" for b in CLASS_NAMES for s in CLASS_NAMES
}

#: Agreement of ensemble members on the direction of the advantage change (our own codes and colours;
#: classification after IPCC AR6 WGI Cross-Chapter Box Atlas.1, see indicators.change_agreement).
CHANGE_AGREEMENT_LEGEND = {1: "members agree: toward C3", 2: "low agreement", 3: "members agree: toward C4"}
CHANGE_AGREEMENT_COLOURS = {1: (38, 66, 150, 255), 2: (221, 221, 221, 255), 3: (176, 45, 28, 255),
                            CLASS_NODATA: _TRANSPARENT}

#: Confidence in the favoured pathway under parameter uncertainty (our own names and codes;
#: thresholds in indicators.confidence_class).
CONFIDENCE_C3_ROBUST, CONFIDENCE_C3_LIKELY, CONFIDENCE_UNCERTAIN, CONFIDENCE_C4_LIKELY, CONFIDENCE_C4_ROBUST = 1, 2, 3, 4, 5
CONFIDENCE_LEGEND = {CONFIDENCE_C3_ROBUST: "C3 robust", CONFIDENCE_C3_LIKELY: "C3 likely",
                     CONFIDENCE_UNCERTAIN: "uncertain", CONFIDENCE_C4_LIKELY: "C4 likely",
                     CONFIDENCE_C4_ROBUST: "C4 robust"}
#: The class colours, paler for "likely" (tints of our own between the class colour and white).
CONFIDENCE_COLOURS = {CONFIDENCE_C3_ROBUST: _CLASS_RGBA[CLASS_C3], CONFIDENCE_C3_LIKELY: (140, 206, 184, 255),
                      CONFIDENCE_UNCERTAIN: _CLASS_RGBA[CLASS_CONTESTED], CONFIDENCE_C4_LIKELY: (243, 207, 128, 255),
                      CONFIDENCE_C4_ROBUST: _CLASS_RGBA[CLASS_C4], CLASS_NODATA: _TRANSPARENT}

SEASONAL, CHANGE, DATACUBE, ENSEMBLE, DERIVED = "seasonal", "change", "datacube", "ensemble", "derived"
#: Layers from the parameter draws (config ``uncertainty``): written only when it is set; those with
#: ``compares`` only for scenarios other than the baseline, from draws paired with the baseline's.
UNCERTAINTY = "uncertainty"


@dataclass(frozen=True)
class OutputLayer:
    """One output layer of the registry.

    name: file stem (``<name>.tif``) or NetCDF variable name; units, long_name: as written in the metadata.
    kind: "seasonal" (one (y, x) layer per scenario, from the model), "change" (a scenario against the
        baseline, written for every scenario but the baseline), "datacube" (monthly (month, y, x), in the
        NetCDF datacube only) or "ensemble" (written only for a scenario with members, from the members'
        advantage; ``compares`` set: against the baseline, not for the baseline), "uncertainty" (from the
        parameter draws, written only with config ``uncertainty``; ``compares`` set: from draws paired
        with the baseline's, computed by the model, not for the baseline) or "derived" (a monthly
        input the model derives, e.g. water availability from rainfall; in the datacube when derived).
    valid_range: (min, max) of valid values. resampling: overview resampling ("mode" for classes).
    indicator: how it is computed: the name of the function in :mod:`suitability.indicators` (for
        "seasonal" and "datacube" layers the model calls it inside its block function; "season_total" and
        "monthly_total" are the model's own sums and "canopy_crossover" the model's tie solver,
        :func:`suitability.model.canopy_crossover`).
    compares: for change layers, the seasonal layer of baseline and scenario passed to ``indicator``.
    legend / colours: for categorical layers, code -> label and code -> RGBA (GeoTIFF colour table).
    required: always written whatever ``output.layers`` asks, because change layers or briefs need it.
    integer: whole counts (months): written as uint8 with nodata 255, like class codes but without a legend.
    display_units: the units as people read them where the file format allows free text (GeoTIFF band
        units, CSV, briefs), e.g. "g C m-2"; ``units`` stays the CF/UDUNITS string (in UDUNITS "C" would be
        the coulomb, so the element cannot go into a CF units string; the long name says "as carbon").
    """

    name: str
    units: str
    long_name: str
    valid_range: tuple[float, float]
    resampling: str
    kind: str
    indicator: str
    compares: str | None = None
    legend: dict[int, str] | None = None
    colours: dict[int, tuple[int, int, int, int]] | None = None
    required: bool = False
    integer: bool = False
    display_units: str | None = None

    @property
    def readable_units(self) -> str:
        """``display_units`` where set, else ``units``."""
        return self.display_units or self.units

    @property
    def categorical(self) -> bool:
        """Class codes (uint8, nodata 255, colour table) rather than a continuous quantity."""
        return self.legend is not None


_CARBON = "g m-2"
#: Carbon mass per area as people write it (GeoTIFF band units, README): grams of carbon per square metre.
_CARBON_TEXT = "g C m-2"

#: The registry of output layers, in the order the model returns them and the writers list them.
OUTPUT_LAYERS: dict[str, OutputLayer] = {
    layer.name: layer
    for layer in [
        OutputLayer("c3_assimilation", _CARBON, "seasonal potential canopy net assimilation of a C3 canopy, as carbon",
                    (-1e4, 1e5), "average", SEASONAL, "season_total", display_units=_CARBON_TEXT),
        OutputLayer("c4_assimilation", _CARBON, "seasonal potential canopy net assimilation of a C4 canopy, as carbon",
                    (-1e4, 1e5), "average", SEASONAL, "season_total", display_units=_CARBON_TEXT),
        OutputLayer("pathway_advantage", "1", "normalised C4 minus C3 advantage (A4 - A3) / (A4 + A3)",
                    (-1.0, 1.0), "average", SEASONAL, "advantage_index", required=True),
        OutputLayer("pathway_class", "1", "favoured pathway: 1 C3, 2 contested, 3 C4, 4 no growing season, 255 nodata",
                    (1.0, 4.0), "mode", SEASONAL, "pathway_class", legend=PATHWAY_CLASS_LEGEND,
                    colours=PATHWAY_CLASS_COLOURS, required=True),
        OutputLayer("c4_favoured_months", "1", "number of season months in which C4 is favoured",
                    (0.0, 12.0), "average", SEASONAL, "c4_favoured_months", integer=True),
        OutputLayer("growing_season_months", "1", "number of months in the growing season (0: no growing season)",
                    (0.0, 12.0), "average", SEASONAL, "growing_season_months", integer=True),
        OutputLayer("photorespiration_share", "1", "share of C3 gross carboxylation released by photorespiration "
                    "(above 1 where leaf CO2 falls below the C3 compensation point: more released than fixed)",
                    (0.0, np.inf), "average", SEASONAL, "photorespiration_share"),
        OutputLayer("crossover_temperature", "degC", "canopy crossover of the warmest season month: the monthly mean "
                    "temperature above which C4 is favoured in that month (-inf: C4 favoured down to 0 degC, +inf: "
                    "not C4-favoured up to 45 degC)", (-np.inf, np.inf), "average", SEASONAL, "canopy_crossover"),
        OutputLayer("advantage_change", "1", "change of the pathway advantage against the baseline",
                    (-2.0, 2.0), "average", CHANGE, "advantage_change", compares="pathway_advantage"),
        OutputLayer("class_transition", "1", "baseline class * 10 + scenario class; 255 nodata",
                    (11.0, 44.0), "mode", CHANGE, "class_transition", compares="pathway_class",
                    legend=CLASS_TRANSITION_LEGEND, colours=CLASS_TRANSITION_COLOURS),
        OutputLayer("ensemble_median_advantage", "1", "median over the ensemble members of the pathway advantage",
                    (-1.0, 1.0), "average", ENSEMBLE, "ensemble_median"),
        OutputLayer("c4_favoured_share", "1", "share of ensemble members in which C4 is favoured",
                    (0.0, 1.0), "average", ENSEMBLE, "c4_favoured_share"),
        OutputLayer("change_agreement", "1", "ensemble agreement on the direction of the advantage change "
                    "(after IPCC AR6 WGI Atlas.1): 1 toward C3, 2 low agreement, 3 toward C4, 255 nodata",
                    (1.0, 3.0), "mode", ENSEMBLE, "change_agreement", compares="pathway_advantage",
                    legend=CHANGE_AGREEMENT_LEGEND, colours=CHANGE_AGREEMENT_COLOURS),
        OutputLayer("c4_advantage_probability", "1", "share of parameter draws in which C4 is favoured "
                    "(advantage above the contested margin)", (0.0, 1.0), "average", UNCERTAINTY,
                    "favoured_probability"),
        OutputLayer("c3_advantage_probability", "1", "share of parameter draws in which C3 is favoured "
                    "(advantage below minus the contested margin)", (0.0, 1.0), "average", UNCERTAINTY,
                    "favoured_probability"),
        OutputLayer("advantage_p05", "1", "5th percentile over the parameter draws of the pathway advantage",
                    (-1.0, 1.0), "average", UNCERTAINTY, "advantage_quantiles"),
        OutputLayer("advantage_p50", "1", "median over the parameter draws of the pathway advantage",
                    (-1.0, 1.0), "average", UNCERTAINTY, "advantage_quantiles"),
        OutputLayer("advantage_p95", "1", "95th percentile over the parameter draws of the pathway advantage",
                    (-1.0, 1.0), "average", UNCERTAINTY, "advantage_quantiles"),
        OutputLayer("confidence_class", "1", "favoured pathway under parameter uncertainty: 1 C3 robust, 2 C3 likely, "
                    "3 uncertain, 4 C4 likely, 5 C4 robust, 255 nodata", (1.0, 5.0), "mode", UNCERTAINTY,
                    "confidence_class", legend=CONFIDENCE_LEGEND, colours=CONFIDENCE_COLOURS),
        OutputLayer("towards_c4_probability", "1", "share of paired parameter draws in which the scenario raises "
                    "the C4 advantage against the baseline", (0.0, 1.0), "average", UNCERTAINTY,
                    "towards_c4_probability", compares="pathway_advantage"),
        OutputLayer("class_change_probability", "1", "share of paired parameter draws in which the scenario's "
                    "favoured class differs from the baseline's", (0.0, 1.0), "average", UNCERTAINTY,
                    "class_change_probability", compares="pathway_class"),
        OutputLayer("derived_water_availability", "1", "water availability derived from rainfall: AET/PET of a "
                    "monthly soil-water balance", (0.0, 1.0), "average", DERIVED, "water_from_rainfall"),
        OutputLayer("c3_monthly_assimilation", _CARBON, "monthly potential canopy net assimilation of a C3 canopy, as carbon",
                    (-1e4, 1e5), "average", DATACUBE, "monthly_total", display_units=_CARBON_TEXT),
        OutputLayer("c4_monthly_assimilation", _CARBON, "monthly potential canopy net assimilation of a C4 canopy, as carbon",
                    (-1e4, 1e5), "average", DATACUBE, "monthly_total", display_units=_CARBON_TEXT),
        OutputLayer("monthly_crossover_temperature", "degC", "canopy crossover of each season month: the monthly mean "
                    "temperature above which C4 is favoured in that month (-inf: C4 favoured down to 0 degC, +inf: "
                    "not C4-favoured up to 45 degC)", (-np.inf, np.inf), "average", DATACUBE, "canopy_crossover"),
    ]
}


def layer_names(*kinds: str) -> tuple[str, ...]:
    """Names of the registered output layers of the given kinds, in registry order."""
    return tuple(name for name, layer in OUTPUT_LAYERS.items() if layer.kind in kinds)


#: The GeoTIFF layers a run can write (``output.layers`` chooses among them): seasonal, change, ensemble and
#: uncertainty layers.
OUTPUT_VARIABLES: dict[str, OutputLayer] = {name: OUTPUT_LAYERS[name]
                                           for name in layer_names(SEASONAL, CHANGE, ENSEMBLE, UNCERTAINTY)}
