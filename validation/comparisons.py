"""The model against published observations: each comparison's pass band and source, then the runs.

Every :class:`Band` below is declared before any comparison runs (the report prints them first); a
comparison computes the model's value with the public API (``suitability.evaluate`` and the physiology
functions) and states whether it lies in its band. Verification tags on sources: [P: abstract seen] the
number was read in the paper's abstract through the project's search tool; [M] recalled from memory or
from ../shared/REFERENCES.md, not verified against the paper. Bands are our own choice around the
published value (the width is stated with its reason). Where the model falls outside a band, the reason
is given in :data:`KNOWN_DISAGREEMENTS` (written after the first run, from the numbers it produced).

Climates here are synthetic (built from the stated rules), not observations of any place.
"""

from __future__ import annotations

import io
import warnings
from dataclasses import dataclass, field

import numpy as np
import xarray as xr

import suitability
from suitability.model import DAYS_IN_MONTH, REPRESENTATIVE_DAY
from suitability.physiology import quantum_yield_crossover, daily_canopy_assimilation, leaf_assimilation, light
from suitability.physiology.uncertainty import draw_parameters


@dataclass(frozen=True)
class Band:
    """A pass band declared before the comparison runs."""

    key: str
    title: str
    quantity: str
    low: float
    high: float
    unit: str
    sources: tuple[str, ...]
    width: str

    def text(self) -> str:
        return f"{self.quantity}: {self.low:g} to {self.high:g} {self.unit}".strip()


@dataclass
class Outcome:
    """What a comparison gave for one band."""

    band: Band
    value: float
    rows: list[tuple] = field(default_factory=list)
    header: tuple = ()
    note: str = ""

    @property
    def passed(self) -> bool:
        return bool(np.isfinite(self.value) and self.band.low <= self.value <= self.band.high)


_EB1977 = ("Ehleringer & Björkman (1977) Plant Physiol 59:86: at 30 °C in normal air the quantum yields of C3 "
           "plants averaged 0.0524 ± 0.0014 and of C4 plants 0.0534 ± 0.0009 mol CO2 per absorbed einstein; the C4 "
           "yield does not depend on temperature [P: abstract seen]; 'normal air' then held about 330 ppm CO2 [M]")
_COLLATZ1998 = ("Collatz, Berry & Clark (1998) Oecologia 114:441: C4 grasses favoured in months warmer than a "
                "crossover of about 22 °C at present CO2 (350 ppm) [P: the authors' abstract of this model seen, "
                "'about 22 °C at current atmospheric CO2'; the paper itself not read]")
_EHLERINGER1997 = ("Ehleringer, Cerling & Helliker (1997) Oecologia 112:285: the quantum-yield crossover explains C4 "
                   "distributions [P: abstract seen] and rises with CO2 [M: their crossover-versus-CO2 figure]")
_TEERI1976 = ("Teeri & Stowe (1976) Oecologia 23:1: across 27 North American regions the share of C4 species in the "
              "grass flora correlates most strongly with growing-season minimum temperatures [P: abstract seen]; "
              "July minimum temperature named as the variable [M]")
_PARUELO1996 = ("Paruelo & Lauenroth (1996) Ecol Appl 6:1212: C4 grass relative abundance rises with mean annual "
                "precipitation, mean annual temperature and the share of summer rain, r² 0.66 [P: abstract seen]; "
                "C4 = -0.9837 + 0.000594 MAP + 1.3528 JJA/MAP + 0.2710 ln MAT [M: coefficients from "
                "../shared/REFERENCES.md, not verified]")
_AINSWORTH2005 = ("Ainsworth & Long (2005) New Phytol 165:351: 12 FACE experiments at 475-600 ppm, light-saturated "
                  "carbon uptake increased [P: abstract seen]; by 31 % on average for C3 plants [M]")
_LEAKEY2009 = ("Leakey et al. (2009) J Exp Bot 60:2859: C4 photosynthesis is not stimulated by elevated CO2 when "
               "water is not limiting [M]")
_SUYKER = ("Suyker & Verma, irrigated maize at Mead, Nebraska (AmeriFlux US-Ne1), 8 years: clear-sky light-use "
           "efficiency 1.96 ± 0.10 g C MJ-1, annual GPP 1796 ± 92 g C m-2 [P: abstract seen]; peak green LAI 5.5-6.0 "
           "(Suyker & Verma, same site, water-vapour paper) [P: abstract seen]; journal details [M]")
_WAGLE2019 = ("Wagle et al. (2019) Agric For Meteorol 279:107714: winter wheat, El Reno, Oklahoma, 7-day mean GPP "
              "reached about 16 g C m-2 d-1 [P: abstract seen]")

#: The bands, declared before anything runs.
BANDS: dict[str, Band] = {band.key: band for band in [
    Band("leaf_crossover_330", "Leaf quantum-yield crossover in normal air", "crossover temperature at 330 ppm",
         26.0, 34.0, "°C", (_EB1977,), "±4 °C around the 30 °C at which the measured yields are equal (ours)"),
    Band("crossover_rises", "Crossover rises with CO2", "rise of the leaf crossover from 180 to 560 ppm", 3.0, 60.0,
         "°C", (_EHLERINGER1997,), "direction only: a rise of at least 3 °C (ours); the magnitude is not verified"),
    Band("canopy_tie_350", "Canopy C3/C4 boundary at 350 ppm", "monthly mean temperature of the daily canopy tie",
         20.0, 24.0, "°C", (_COLLATZ1998,), "±2 °C around 22 °C (ours)"),
    Band("gradient_rank", "C4 advantage along a grassland temperature gradient",
         "Spearman rank correlation of the model's probability of C4 advantage with July minimum temperature",
         0.8, 1.0, "", (_TEERI1976,), "a strong monotone relation, ρ ≥ 0.8 (ours)"),
    Band("gradient_midpoint", "Where C4 takes over along the gradient",
         "mean annual temperature at which the model's probability of C4 advantage reaches 0.5, minus the one at "
         "which the Paruelo-Lauenroth regression gives C4 = 0.5 (MAP 600 mm, 40 % summer rain)",
         -4.0, 4.0, "°C", (_PARUELO1996,), "±4 °C (ours): the regression has r² 0.66"),
    Band("gradient_rain", "Effect of more rain on C4",
         "change of the model's mean probability of C4 advantage from MAP 400 to 800 mm (the regression's sign is +)",
         0.0, 1.0, "", (_PARUELO1996,), "the sign only (ours)"),
    Band("face_c3", "C3 light-saturated photosynthesis under FACE CO2",
         "stimulation of light-saturated leaf net assimilation, 370 -> 567 ppm, C3 grass and C3 cereal (the smaller)",
         20.0, 45.0, "%", (_AINSWORTH2005,), "31 % widened to 20-45 % for species and temperature (ours)"),
    Band("face_c4", "C4 light-saturated photosynthesis under FACE CO2",
         "stimulation of light-saturated leaf net assimilation, 370 -> 567 ppm, C4 grass and C4 cereal (the larger)",
         0.0, 10.0, "%", (_LEAKEY2009, _AINSWORTH2005), "no stimulation, up to 10 % allowed (ours)"),
    Band("flux_maize", "Peak daily gross assimilation of a C4 cereal",
         "model gross canopy assimilation of the C4 cereal on a clear July day at 41 °N, LAI 5.5", 20.0, 32.0,
         "g C m-2 d-1", (_SUYKER,),
         "LUE 1.96 g C MJ-1 x 12-14 MJ of PAR on a clear July day = 24-28 (derived here), widened to 20-32 (ours)"),
    Band("flux_wheat", "Peak daily gross assimilation of a C3 cereal",
         "model gross canopy assimilation of the C3 cereal on a clear April day at 35.5 °N, LAI 4", 12.0, 22.0,
         "g C m-2 d-1", (_WAGLE2019,), "16 as a 7-day mean; single clear days higher; 12-22 (ours)"),
    Band("flux_ratio", "C4 to C3 cereal peak ratio", "model maize peak / model wheat peak", 1.2, 2.2, "",
         (_SUYKER, _WAGLE2019), "26/16 = 1.6 from the two studies (derived here), ±0.5 (ours)"),
]}

#: Why the model falls outside a band (from the first run's numbers; the quick test checks they still hold).
KNOWN_DISAGREEMENTS: dict[str, str] = {
    "leaf_crossover_330": (
        "The default C4 set takes the Collatz et al. (1992) fitted quantum yield 0.04 per absorbed photon, below "
        "the 0.0534 Ehleringer & Björkman measured; the C3 yield is calibrated to their 0.0524 at 30 °C. With "
        "the C4 yield at their measured value the crossover falls inside the band (see the table), and that value "
        "lies within the declared spread of alpha, so the parameter draws bracket the observation."),
    "face_c3": (
        "The band was set on the smaller stimulation of the two C3 sets over 25-31 °C; that is the C3 cereal at "
        "25 °C (+15 %), where its high Vcmax leaves the light-saturated rate limited by electron transport, which "
        "responds less to CO2. The stimulation rises with leaf temperature as photorespiration grows (Long 1991, "
        "Plant Cell Environ 14:729 [M]); the mean over the six set-temperature pairs is 26 %, near the 31 % "
        "FACE mean. FACE leaves also acclimate (lower Vcmax at high CO2), which the model leaves out."),
    "gradient_midpoint": (
        "The model favours C4 at the cold, dry end of the gradient where the regression has almost no C4 grass: "
        "the season counts only months of at least 5 °C mean (so cold sites are judged on their warm summers), "
        "the C3 boundary is too cool (see the canopy tie), and the water-use advantage of C4 on a dry soil weighs "
        "heavily. Observed abundance also reflects competition, grazing, fire and the cool-season growth of C3 "
        "grasses before the season the model counts; the model maps a physiological advantage, not abundance."),
    "gradient_rain": (
        "In the model more rain relieves the water limitation that handicaps C3 more than C4 (C4 needs less water "
        "per carbon), so wetter cells lean towards C3. The regression's positive sign reflects that the dry "
        "western plains hold shrubs and winter-rain C3 grasses, which the model does not represent."),
}


# --- synthetic climates -----------------------------------------------------------------------------------


def uniform_month_gradient(tmean_c, *, latitude=40.0, shortwave=22.0, diurnal_range=10.0) -> xr.Dataset:
    """One row of cells whose every month has mean temperature ``tmean_c`` (one value per cell), a clear-sky
    day of ``shortwave`` MJ m-2 d-1, a ``diurnal_range`` °C day and a well-watered soil."""
    t = np.asarray(tmean_c, np.float32)
    shape = (12, 1, t.size)
    monthly = np.broadcast_to(t[None, None, :], shape)
    return xr.Dataset(
        {"tmin": (("month", "y", "x"), monthly - diurnal_range / 2),
         "tmax": (("month", "y", "x"), monthly + diurnal_range / 2),
         "shortwave": (("month", "y", "x"), np.full(shape, shortwave, np.float32)),
         "water_availability": (("month", "y", "x"), np.ones(shape, np.float32)),
         "latitude": (("y", "x"), np.full((1, t.size), latitude, np.float32))},
        coords={"month": np.arange(1, 13), "y": [0.5], "x": np.arange(t.size) + 0.5})


def plains_gradient(mat_c, map_mm: float, summer_share: float = 0.4) -> tuple[xr.Dataset, np.ndarray]:
    """A synthetic north-south gradient shaped like the North American grasslands (rules of thumb, common
    practice, no source): latitude 49° N at a mean annual temperature (MAT) of 2 °C falling 1.1° per °C;
    July minus annual mean 15 °C at MAT 2 falling 0.3 °C per °C; a 13 °C daily range; shortwave 0.55 of the
    extraterrestrial radiation (FAO-56 eq. 21); ``map_mm`` of rain a year, ``summer_share`` of it in June-
    August. Returns the dataset (rain as precipitation: the model's soil-water balance gives the water) and
    each cell's July minimum temperature [°C]."""
    mat = np.asarray(mat_c, float)
    latitude = 49.0 - 1.1 * (mat - 2.0)
    amplitude = 15.0 - 0.3 * (mat - 2.0)
    months = np.arange(1, 13)
    tmean = mat[None, :] + amplitude[None, :] * np.cos(2 * np.pi * (months[:, None] - 7) / 12)
    shortwave = 0.55 * light.extraterrestrial_radiation(latitude[None, :], REPRESENTATIVE_DAY[:, None])
    share = np.where(np.isin(months, [6, 7, 8]), summer_share / 3, (1 - summer_share) / 9)
    rain = (map_mm * share / DAYS_IN_MONTH)[:, None] * np.ones_like(tmean)

    def cube(values):
        return ("month", "y", "x"), values[:, None, :].astype(np.float32)

    dataset = xr.Dataset({"tmin": cube(tmean - 6.5), "tmax": cube(tmean + 6.5), "shortwave": cube(shortwave),
                          "precipitation": cube(rain), "latitude": (("y", "x"), latitude[None, :].astype(np.float32))},
                         coords={"month": months, "y": [0.5], "x": np.arange(mat.size) + 0.5})
    return dataset, tmean[6] - 6.5


def paruelo_lauenroth_c4(mat_c, map_mm, summer_share):
    """C4 grass relative abundance of the Paruelo & Lauenroth (1996) regression (coefficients [M])."""
    return -0.9837 + 0.000594 * map_mm + 1.3528 * summer_share + 0.2710 * np.log(mat_c)


def _crossing(x, y, level=0.0) -> float:
    """First x at which y, rising, reaches ``level`` (linear interpolation); NaN if it never does."""
    x, y = np.asarray(x, float), np.asarray(y, float)
    above = np.nonzero(y >= level)[0]
    if above.size == 0 or above[0] == 0:
        return float("nan") if above.size == 0 else float(x[0])
    i = above[0]
    return float(x[i - 1] + (level - y[i - 1]) * (x[i] - x[i - 1]) / (y[i] - y[i - 1]))


# --- the comparisons ---------------------------------------------------------------------------------------


def crossover(draws: int, seed: int = 11) -> tuple[list[Outcome], dict]:
    """Leaf quantum-yield crossover against CO2 (physiology.quantum_yield_crossover), and the canopy tie."""
    co2 = np.array([180.0, 280.0, 330.0, 350.0, 420.0, 560.0, 700.0])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        default = np.array([float(quantum_yield_crossover(c)) for c in co2])
        measured_alpha = np.array([float(quantum_yield_crossover(c, params={"C4": {"alpha": 0.0534}})) for c in co2])
        drawn = np.array([[float(quantum_yield_crossover(c, params={"C3": c3, "C4": c4})) for c in (330.0,)]
                          for c3, c4 in draw_parameters(None, None, draws, seed)])[:, 0]
    q05, q50, q95 = np.nanpercentile(drawn, [5, 50, 95])
    at330 = float(default[co2 == 330.0][0])
    rows = [(f"{c:g}", f"{d:.1f}", f"{m:.1f}") for c, d, m in zip(co2, default, measured_alpha)]
    leaf = Outcome(BANDS["leaf_crossover_330"], at330, rows, ("CO2 [ppm]", "default sets [°C]",
                                                               "C4 alpha = 0.0534 (E&B 1977) [°C]"),
                   note=(f"Over {draws} parameter draws the crossover at 330 ppm is {q50:.1f} °C (median), "
                         f"{q05:.1f}-{q95:.1f} °C (5-95 %); with alpha at the measured 0.0534 it is "
                         f"{float(measured_alpha[co2 == 330.0][0]):.1f} °C."))
    rise = float(default[co2 == 560.0][0] - default[co2 == 180.0][0])
    rises = Outcome(BANDS["crossover_rises"], rise if np.all(np.diff(default[np.isfinite(default)]) > 0) else np.nan,
                    note="Strictly increasing over the CO2 values in the table (default sets); above 50 °C the "
                         "solver reports no crossover (NaN).")
    temperatures = np.arange(8.0, 36.01, 0.5)
    tie_rows, ties = [], {}
    for ppm in (280.0, 350.0, 420.0, 560.0):
        result = suitability.evaluate(uniform_month_gradient(temperatures), {"co2_ppm": ppm}, season={"months": [7]},
                                      uncertainty={"draws": draws, "seed": seed})
        tie = _crossing(temperatures, result["pathway_advantage"].values[0])
        p05_tie = _crossing(temperatures, result["advantage_p05"].values[0])
        p95_tie = _crossing(temperatures, result["advantage_p95"].values[0])
        half = _crossing(temperatures, result["c4_advantage_probability"].values[0], 0.5)
        ties[ppm] = (tie, p95_tie, p05_tie, half)
        tie_rows.append((f"{ppm:g}", f"{tie:.1f}", f"{half:.1f}", f"{p95_tie:.1f} - {p05_tie:.1f}"))
    canopy = Outcome(BANDS["canopy_tie_350"], ties[350.0][0], tie_rows,
                     ("CO2 [ppm]", "tie, default sets [°C]", "P(C4) = 0.5 at [°C]", "tie of p95 - p05 [°C]"),
                     note="July, 40° N, 22 MJ m-2 d-1, 10 °C daily range, LAI 3, well watered; the temperature is "
                          "every month's mean. A bound of the scanned 8-36 °C means the tie lies beyond it.")
    figure_data = {"co2": co2, "default": default, "measured_alpha": measured_alpha, "ties": ties}
    return [leaf, rises, canopy], figure_data


def grassland_gradient(draws: int, seed: int = 11, step: float = 1.0) -> tuple[list[Outcome], dict]:
    """The model's probability of C4 advantage along synthetic grassland gradients (suitability.evaluate with
    rain), against the Teeri & Stowe relation and the Paruelo & Lauenroth regression."""
    from scipy.stats import spearmanr

    mat = np.arange(2.0, 22.0 + 1e-9, step)
    curves = {}
    for map_mm in (400.0, 600.0, 800.0):
        climate, july_tmin = plains_gradient(mat, map_mm)
        result = suitability.evaluate(climate, {"co2_ppm": 350}, uncertainty={"draws": draws, "seed": seed})
        curves[map_mm] = (result["c4_advantage_probability"].values[0].astype(float),
                          result["pathway_advantage"].values[0].astype(float), july_tmin)
    probability, advantage, july_tmin = curves[600.0]
    rho = float(spearmanr(july_tmin, probability).statistic)
    regression = paruelo_lauenroth_c4(mat, 600.0, 0.4)
    model_half = _crossing(mat, probability, 0.5)
    regression_half = _crossing(mat, regression, 0.5)
    rows = [(f"{m:g}", f"{t:.1f}", f"{r:.2f}", f"{p:.2f}", f"{a:+.2f}")
            for m, t, r, p, a in zip(mat, july_tmin, regression, probability, advantage)]
    header = ("MAT [°C]", "July Tmin [°C]", "P&L C4 share", "model P(C4)", "model advantage")
    rank = Outcome(BANDS["gradient_rank"], rho, rows, header,
                   note="MAP 600 mm, 40 % in June-August, 350 ppm; steps in the curve come from the growing "
                        "season gaining whole months as the climate warms (a cool month joining the season is "
                        "C3-favoured and pulls the season back), so the value lies close to its band: 0.70 "
                        "with 16 draws and 2 °C steps (measured), against the value reported here.")
    midpoint = Outcome(BANDS["gradient_midpoint"], model_half - regression_half,
                       note=f"model P(C4) reaches 0.5 at MAT {model_half:.1f} °C, the regression C4 = 0.5 at "
                            f"{regression_half:.1f} °C (a crossing at the first cell means the model is above 0.5 "
                            "over the whole gradient).")
    wetter = float(np.nanmean(curves[800.0][0]) - np.nanmean(curves[400.0][0]))
    rain = Outcome(BANDS["gradient_rain"], wetter,
                   note=f"mean P(C4) over the gradient: MAP 400 mm {np.nanmean(curves[400.0][0]):.2f}, 600 mm "
                        f"{np.nanmean(curves[600.0][0]):.2f}, 800 mm {np.nanmean(curves[800.0][0]):.2f}.")
    return [rank, midpoint, rain], {"mat": mat, "curves": curves}


def face_response() -> tuple[list[Outcome], dict]:
    """Light-saturated leaf net assimilation at 370 and 567 ppm (physiology.leaf_assimilation): 1500 µmol m-2
    s-1 absorbed, VPD 1.5 kPa, leaf temperatures 25, 28 and 31 °C."""
    sets = {"C3": ("c3_temperate_grass", "c3_cereal"), "C4": ("c4_tropical_grass", "c4_cereal")}
    rows, stimulation = [], {}
    for pathway, names in sets.items():
        for name in names:
            for temperature in (25.0, 28.0, 31.0):
                low, high = (float(leaf_assimilation(pathway, temperature, 1500.0, c, vpd_kpa=1.5, params=name).net)
                             for c in (370.0, 567.0))
                change = 100.0 * (high / low - 1.0)
                stimulation.setdefault(pathway, []).append(change)
                rows.append((name, f"{temperature:g}", f"{low:.1f}", f"{high:.1f}", f"{change:+.1f}"))
    header = ("set", "leaf T [°C]", "A at 370 ppm", "A at 567 ppm [µmol m-2 s-1]", "change [%]")
    c3 = Outcome(BANDS["face_c3"], min(stimulation["C3"]), rows, header,
                 note=f"C3 range {min(stimulation['C3']):.1f} to {max(stimulation['C3']):.1f} %, mean "
                      f"{np.mean(stimulation['C3']):.1f} %. The model has no "
                      "acclimation of Vcmax to high CO2, which FACE leaves show; it would lower the stimulation.")
    c4 = Outcome(BANDS["face_c4"], max(stimulation["C4"]),
                 note=f"C4 range {min(stimulation['C4']):.1f} to {max(stimulation['C4']):.1f} %.")
    return [c3, c4], {"rows": rows}


def flux_peaks() -> tuple[list[Outcome], dict]:
    """Daily gross canopy assimilation of the cereal sets on a clear day at the flux sites' latitudes
    (physiology.daily_canopy_assimilation); the weather values are typical of the season (common practice,
    no source), not the sites' records."""
    maize = daily_canopy_assimilation("C4", tmin_c=18.0, tmax_c=31.0, shortwave_mj=27.0, latitude_deg=41.2,
                                      day_of_year=196, co2_ppm=380.0, lai=5.5, params="c4_cereal")
    wheat = daily_canopy_assimilation("C3", tmin_c=8.0, tmax_c=22.0, shortwave_mj=22.0, latitude_deg=35.5,
                                      day_of_year=105, co2_ppm=405.0, lai=4.0, params="c3_cereal")
    m, w = float(maize.gross), float(wheat.gross)
    rows = [("C4 cereal (maize), 41.2° N, 15 July", "27", "18 / 31", "5.5", "380", f"{m:.1f}", f"{float(maize.net):.1f}"),
            ("C3 cereal (wheat), 35.5° N, 15 April", "22", "8 / 22", "4", "405", f"{w:.1f}", f"{float(wheat.net):.1f}")]
    header = ("crop, place, day", "shortwave [MJ m-2 d-1]", "Tmin / Tmax [°C]", "LAI", "CO2 [ppm]",
              "gross [g C m-2 d-1]", "net of leaf respiration")
    return [Outcome(BANDS["flux_maize"], m, rows, header), Outcome(BANDS["flux_wheat"], w),
            Outcome(BANDS["flux_ratio"], m / w)], {"maize": m, "wheat": w}


GLOBAL_SHARE_NOTE = (
    "Still et al. (2003) Global Biogeochem Cycles 17:1006 put C4 plants at about 23 % of global GPP (35.3 Pg C "
    "per year) [M, via ../shared/REFERENCES.md]. Not compared: the package registries the project may use ship no "
    "global monthly climatology of temperature, radiation and rain, and a share of global GPP needs one (plus the "
    "area of grasslands and crops, which the model does not map). This comparison is left out.")


# --- figures -----------------------------------------------------------------------------------------------


def _png(figure) -> bytes:
    buffer = io.BytesIO()
    figure.savefig(buffer, format="png")
    return buffer.getvalue()


def crossover_figure(data: dict) -> bytes:
    from matplotlib.figure import Figure

    figure = Figure(figsize=(7, 4.2), dpi=110)
    axes = figure.add_subplot()
    axes.plot(data["co2"], data["default"], "o-", color="#4A4A4A", label="leaf crossover, default sets")
    axes.plot(data["co2"], data["measured_alpha"], "s--", color="#8A8A8A", label="leaf crossover, C4 alpha 0.0534")
    ppm = sorted(data["ties"])
    axes.plot(ppm, [data["ties"][p][0] for p in ppm], "^-", color="#E69F00", label="canopy tie (model)")
    axes.fill_between(ppm, [data["ties"][p][1] for p in ppm], [data["ties"][p][2] for p in ppm], color="#E69F00",
                      alpha=0.2, label="canopy tie of the 95th-5th percentile advantage")
    axes.errorbar([330], [30], yerr=[[4], [4]], fmt="D", color="#009E73", label="Ehleringer & Björkman 1977 (band)")
    axes.errorbar([350], [22], yerr=[[2], [2]], fmt="D", color="#0072B2", label="Collatz et al. 1998 (band)")
    axes.set_xlabel("CO2 [ppm]")
    axes.set_ylabel("temperature [°C]")
    axes.legend(fontsize=7, frameon=False)
    axes.set_title("Crossover temperature against CO2", fontsize=10)
    figure.tight_layout()
    return _png(figure)


def gradient_figure(data: dict) -> bytes:
    from matplotlib.figure import Figure

    figure = Figure(figsize=(7, 4.2), dpi=110)
    axes = figure.add_subplot()
    greys = {400.0: "#B0B0B0", 600.0: "#6A6A6A", 800.0: "#202020"}
    for map_mm, (probability, _, _) in data["curves"].items():
        axes.plot(data["mat"], probability, "-", color=greys[map_mm], label=f"model P(C4), MAP {map_mm:g} mm")
        axes.plot(data["mat"], np.clip(paruelo_lauenroth_c4(data["mat"], map_mm, 0.4), 0, 1), ":",
                  color=greys[map_mm], label=f"Paruelo & Lauenroth C4 share, MAP {map_mm:g} mm")
    axes.set_xlabel("mean annual temperature [°C] (synthetic gradient)")
    axes.set_ylabel("probability of C4 advantage / C4 share")
    axes.set_ylim(-0.02, 1.02)
    axes.legend(fontsize=7, frameon=False, ncol=2)
    axes.set_title("Synthetic North American grassland gradient, 350 ppm", fontsize=10)
    figure.tight_layout()
    return _png(figure)


def run_all(draws: int, *, quick: bool) -> tuple[list[Outcome], dict[str, bytes]]:
    """Every comparison; ``quick`` uses a coarser gradient (the pytest form)."""
    outcomes, figures = [], {}
    found, data = crossover(draws)
    outcomes += found
    figures["crossover.png"] = crossover_figure(data)
    found, data = grassland_gradient(draws, step=2.0 if quick else 1.0)
    outcomes += found
    figures["grassland_gradient.png"] = gradient_figure(data)
    outcomes += face_response()[0]
    outcomes += flux_peaks()[0]
    return outcomes, figures
