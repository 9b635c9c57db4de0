"""Indicators derived from the C3 and C4 potential assimilation: advantage, classes, months, change.

Pure array functions (numpy in, numpy out; they also work on xarray objects). No physiology here: the
inputs are assimilation totals already computed by :mod:`suitability.model`.

Decisions (documented in the README "Science" section):
- The advantage index is the normalised difference of the seasonal NET canopy assimilation,
  ``(A4 - A3) / (A4 + A3)``, with negative totals (respiration exceeding assimilation, e.g. a frozen or
  completely dry season) counted as zero: a pathway that cannot gain carbon has no potential, but a
  larger loss is not an "advantage" of the other. Where both are zero the index is 0 (neither favoured).
- Class boundaries: ``advantage > margin`` C4 favoured, ``advantage < -margin`` C3 favoured, otherwise
  contested; margin defaults to 0.05 (our choice, configurable as ``classes.contested_margin``).
"""

from __future__ import annotations

import numpy as np
import xarray as xr

from .variables import (
    CLASS_C3,
    CLASS_C4,
    CLASS_CONTESTED,
    CLASS_NO_SEASON,
    CLASS_NODATA,
    CONFIDENCE_C3_LIKELY,
    CONFIDENCE_C3_ROBUST,
    CONFIDENCE_C4_LIKELY,
    CONFIDENCE_C4_ROBUST,
    CONFIDENCE_UNCERTAIN,
)


def advantage_index(c3_total, c4_total):
    """Normalised pathway advantage (A4 - A3) / (A4 + A3), in [-1, 1].

    c3_total, c4_total: net assimilation of each pathway over the same period [g C m-2]; negative totals
    count as zero. NaN in either gives NaN.
    """
    a3 = np.maximum(c3_total, 0.0)  # NaN stays NaN (np.maximum propagates it), and so does the quotient
    a4 = np.maximum(c4_total, 0.0)
    total = a3 + a4
    # Where neither pathway gains, 0 / 1 = 0. Seven array passes where there were thirteen: on every block
    # month and every crossover search step, it was among the largest costs of the model outside the kernel.
    with np.errstate(invalid="ignore", divide="ignore"):  # inf / inf
        return (a4 - a3) / (total + (total == 0))


def pathway_class(advantage, margin: float = 0.05):
    """Class codes from the advantage index: 1 C3 favoured, 2 contested, 3 C4 favoured, 255 nodata (uint8)."""
    if not 0.0 <= margin < 1.0:
        raise ValueError(f"contested margin must be in [0, 1), got {margin}")
    classes = _where(advantage > margin, CLASS_C4, _where(advantage < -margin, CLASS_C3, CLASS_CONTESTED))
    return _where(np.isnan(advantage), CLASS_NODATA, classes).astype(np.uint8)


def with_growing_season(classes, valid, has_season):
    """Class codes with CLASS_NO_SEASON (4) where a cell has data but no month of growing season (uint8)."""
    return _where(valid & ~has_season, CLASS_NO_SEASON, classes).astype(np.uint8)


def growing_season_months(in_season, valid):
    """Number of months of the growing season per cell (float32; 0 = none, NaN where the cell has no data).

    in_season: boolean, leading axis = month.
    """
    return _where(valid, in_season.sum(axis=0).astype(np.float32), np.float32(np.nan))


def c4_favoured_months(monthly_c3, monthly_c4, in_season, margin: float = 0.05):
    """Number of season months whose own advantage index exceeds the margin.

    monthly_c3, monthly_c4: net assimilation per month [g C m-2], leading axis = month.
    in_season: boolean array broadcastable to them, True for months that belong to the season.
    Returns float32 counts; NaN where any season month has no data.
    """
    return favoured_month_count(advantage_index(monthly_c3, monthly_c4), in_season, margin)


def favoured_month_count(monthly_advantage, in_season, margin: float = 0.05, axis: int = 0):
    """:func:`c4_favoured_months` from the months' advantage indices already computed (``axis`` = month)."""
    favoured = (monthly_advantage > margin) & in_season
    count = favoured.sum(axis=axis).astype(np.float32)
    missing = (np.isnan(monthly_advantage) & in_season).any(axis=axis)
    return _where(missing, np.float32(np.nan), count)


def warmest_season_month(monthly_mean_c, in_season):
    """Index (0-11) of the warmest season month of each cell (the first of equally warm ones), and whether
    the cell has one (False where it has no season month or its temperatures are NaN).

    monthly_mean_c [°C], in_season: (..., 12), month last.
    """
    warmth = np.where(in_season & np.isfinite(monthly_mean_c), monthly_mean_c, -np.inf)
    warmest = np.argmax(warmth, axis=-1)
    has = np.isfinite(np.take_along_axis(warmth, warmest[..., None], axis=-1)[..., 0])
    return warmest, has


def warmest_month_value(monthly_values, monthly_mean_c, in_season):
    """The value of the warmest season month of each cell (:func:`warmest_season_month`); NaN where a
    cell has no season month or its temperatures are NaN.

    monthly_values, monthly_mean_c [°C], in_season: (..., 12), month last. Used for the seasonal canopy
    crossover: that month is C4-favoured exactly when its mean temperature is above the value.
    """
    warmest, has = warmest_season_month(monthly_mean_c, in_season)
    value = np.take_along_axis(np.asarray(monthly_values, np.float64), warmest[..., None], axis=-1)[..., 0]
    return np.where(has, value, np.nan)


def photorespiration_share(c3_gross_total, c3_photorespiration_total):
    """Share of C3 gross carboxylation released again by photorespiration, >= 0 [-].

    Gross carboxylation vc = A_gross + 0.5 vo (von Caemmerer 2000, eq. 2.1 rearranged), so the share is
    R_photo / (A_gross + R_photo), for a leaf 0.5 vo / vc = Γ*/C. It exceeds 1 where leaf CO2 is below
    the compensation point Γ* (C3 gross assimilation negative: more CO2 released than fixed), e.g. at
    very low CO2 in hot months; it is not clipped, as a share of 1 would hide that loss. Inputs
    [g C m-2] over the same period; NaN where the sum is zero.
    """
    carboxylation = c3_gross_total + c3_photorespiration_total
    with np.errstate(invalid="ignore", divide="ignore"):
        return _where(carboxylation > 0, c3_photorespiration_total / _where(carboxylation > 0, carboxylation, 1.0), np.nan)


def advantage_change(baseline_advantage, scenario_advantage):
    """Scenario minus baseline advantage index, in [-2, 2]; NaN where either is NaN."""
    return scenario_advantage - baseline_advantage


def class_transition(baseline_class, scenario_class):
    """Transition code baseline*10 + scenario (e.g. 13 = C3 favoured -> C4 favoured); 255 where either is nodata."""
    base = _as_uint16(baseline_class)
    scen = _as_uint16(scenario_class)
    code = base * 10 + scen
    nodata = (base == CLASS_NODATA) | (scen == CLASS_NODATA)
    return _where(nodata, CLASS_NODATA, code).astype(np.uint8)


#: Share of members that must agree on the sign of a change for "members agree": IPCC AR6 WGI, Cross-Chapter
#: Box Atlas.1 (Gutiérrez et al. 2021), simple approach, as AR6 figure captions state it (e.g. Chapter 9,
#: Figure 9.3): "high model agreement, where >=80% of models agree on sign of change"; "low model agreement,
#: where <80% of models agree on sign of change".
AGREEMENT_SHARE = 0.8
AGREE_TOWARD_C3, LOW_AGREEMENT, AGREE_TOWARD_C4 = 1, 2, 3


def ensemble_median(stack, dim: str = "member"):
    """Median over the ensemble members (NaN where any member is NaN: a cell needs every member)."""
    stack = stack.chunk({dim: -1}) if getattr(stack, "chunks", None) else stack
    return stack.median(dim, skipna=False)


def c4_favoured_share(advantage_stack, margin: float = 0.05, dim: str = "member"):
    """Share of members [0-1] in which C4 is favoured (advantage > margin, the pathway_class rule); NaN
    where any member is nodata."""
    favoured = (advantage_stack > margin).astype(np.float32)
    return favoured.mean(dim).where(advantage_stack.notnull().all(dim))


def change_agreement(baseline_advantage, member_advantages, dim: str = "member",
                     share: float = AGREEMENT_SHARE):
    """Agreement of the members on the direction of the advantage change against the baseline.

    Classified after the simple approach of IPCC AR6 WGI Cross-Chapter Box Atlas.1: where at least
    ``share`` (80 %) of the members give a change of the same sign, they agree (high model agreement); we
    split that class by the direction the agreeing members give (3: the C4 advantage rises, 1: it falls);
    otherwise low agreement (2). A change of exactly 0 counts for neither sign. 255 where the baseline or
    any member is nodata.

    Not the advanced approach of the same box, whose classes (robust signal, no change or no robust signal,
    conflicting signals) also need >= 66 % of models to show a change greater than a variability
    threshold from the interannual variability of each model's reference period: the model runs on each
    member's 12-month climatology, so no year-to-year spread of the advantage exists to set that threshold.

    Written here rather than with xclim.ensembles (robustness_fractions with test=None, then
    robustness_categories with the sign threshold 0.8): without a significance test that is the same
    three-line share of signs, we also need the direction of the agreeing members, and xclim 0.62 would
    bring scikit-learn, pyarrow, yamale, boltons and bottleneck into the environment (bottleneck changes
    how xarray sums float32 everywhere, see ECOSYSTEM.md). xclim also counts members with exactly no change
    as a group that can "agree"; here they count for neither sign.
    """
    change = member_advantages - baseline_advantage
    valid = change.notnull().all(dim) & baseline_advantage.notnull()
    rising = (change > 0).astype(np.float32).mean(dim)
    falling = (change < 0).astype(np.float32).mean(dim)
    code = _where(rising >= share, AGREE_TOWARD_C4, _where(falling >= share, AGREE_TOWARD_C3, LOW_AGREEMENT))
    return _where(valid, code, CLASS_NODATA).astype(np.uint8)


# --- parameter uncertainty: arrays of draws, draw axis first ------------------------------------------------

#: Shares of the parameter draws for the confidence classes: "likely" when at least 66 %, "robust" when at
#: least 90 % of the draws favour a pathway. The cut-offs follow the calibrated likelihood language of the
#: IPCC (Mastrandrea et al. 2010, guidance note for AR5 lead authors: likely 66-100 %, very likely
#: 90-100 %; from memory); the class names are our own.
LIKELY_SHARE, ROBUST_SHARE = 0.66, 0.90


def _all_draws_valid(draws):
    return ~np.isnan(draws).any(axis=0)


def favoured_probability(draw_advantage, margin: float = 0.05, pathway: str = "C4"):
    """Share of draws [0-1] in which ``pathway`` is favoured by the class rule of :func:`pathway_class`
    (C4: advantage > margin; C3: advantage < -margin). draw_advantage: (draws, ...); NaN where any draw is NaN."""
    draw_advantage = np.asarray(draw_advantage)
    favoured = draw_advantage > margin if pathway == "C4" else draw_advantage < -margin
    share = favoured.sum(axis=0) / draw_advantage.shape[0]
    return np.where(_all_draws_valid(draw_advantage), share, np.nan)


def advantage_quantiles(draw_advantage, probabilities=(0.05, 0.5, 0.95)):
    """Quantiles over the draws of the advantage index (numpy's default linear interpolation between order
    statistics, Hyndman & Fan 1996 definition 7), shape (len(probabilities), ...); NaN where any draw is NaN."""
    draw_advantage = np.asarray(draw_advantage)
    valid = _all_draws_valid(draw_advantage)
    filled = np.where(valid, draw_advantage, 0.0)
    return np.where(valid, np.quantile(filled, probabilities, axis=0), np.nan)


def confidence_class(c3_probability, c4_probability):
    """Confidence class from the shares of draws favouring each pathway (uint8): 5 "C4 robust" (C4 share
    >= ROBUST_SHARE), 4 "C4 likely" (>= LIKELY_SHARE), 1 "C3 robust" and 2 "C3 likely" alike for C3,
    otherwise 3 "uncertain"; 255 where either share is NaN."""
    c3_probability, c4_probability = np.asarray(c3_probability), np.asarray(c4_probability)
    code = np.full(np.shape(c4_probability), CONFIDENCE_UNCERTAIN, np.uint8)
    code = np.where(c3_probability >= LIKELY_SHARE, CONFIDENCE_C3_LIKELY, code)
    code = np.where(c3_probability >= ROBUST_SHARE, CONFIDENCE_C3_ROBUST, code)
    code = np.where(c4_probability >= LIKELY_SHARE, CONFIDENCE_C4_LIKELY, code)
    code = np.where(c4_probability >= ROBUST_SHARE, CONFIDENCE_C4_ROBUST, code)
    return np.where(np.isnan(c3_probability) | np.isnan(c4_probability), CLASS_NODATA, code).astype(np.uint8)


def towards_c4_probability(baseline_draws, scenario_draws):
    """Share of PAIRED draws (the same parameters in baseline and scenario) in which the scenario's
    advantage is higher than the baseline's; (draws, ...) each, NaN where any draw of either is NaN."""
    baseline_draws, scenario_draws = np.asarray(baseline_draws), np.asarray(scenario_draws)
    share = (scenario_draws > baseline_draws).sum(axis=0) / scenario_draws.shape[0]
    return np.where(_all_draws_valid(baseline_draws) & _all_draws_valid(scenario_draws), share, np.nan)


def class_change_probability(baseline_draws, scenario_draws, margin: float = 0.05):
    """Share of PAIRED draws in which the class of :func:`pathway_class` differs between baseline and
    scenario; (draws, ...) each, NaN where any draw of either is NaN."""
    baseline_draws, scenario_draws = np.asarray(baseline_draws), np.asarray(scenario_draws)
    changed = pathway_class(baseline_draws, margin) != pathway_class(scenario_draws, margin)
    share = changed.sum(axis=0) / scenario_draws.shape[0]
    return np.where(_all_draws_valid(baseline_draws) & _all_draws_valid(scenario_draws), share, np.nan)


def regional_monthly_temperature(climate: xr.Dataset) -> xr.DataArray:
    """Region-mean monthly mean air temperature [°C] of a climate dataset (lazy, dims (month,)).

    The monthly mean is ``tmean`` where given, else (tmin + tmax) / 2; averaged over every cell with data
    in float64 (float32 sums over millions of cells lose digits).
    """
    mean = climate["tmean"] if "tmean" in climate else (climate["tmin"] + climate["tmax"]) / 2
    return mean.astype("float64").mean(dim=("y", "x"), skipna=True)


def warm_season_mean(monthly_mean_c, months: int = 3) -> float:
    """Mean of the ``months`` warmest values of a region's 12 monthly mean temperatures [deg C].

    The warm season is taken as the three warmest months (common practice, no source).
    """
    values = np.asarray(monthly_mean_c, dtype="float64")
    values = values[np.isfinite(values)]
    if values.size < months:
        raise ValueError(f"expected at least {months} monthly temperatures, got {values.size}")
    return float(np.mean(np.sort(values)[-months:]))


def _as_uint16(values):
    # .astype keeps xarray and dask objects lazy; plain scalars become numpy scalars.
    return values.astype(np.uint16) if hasattr(values, "astype") else np.uint16(values)


def _where(condition, x, y):
    # np.where would turn xarray (and dask-backed) inputs into numpy; xr.where keeps them lazy.
    if any(isinstance(v, (xr.DataArray, xr.Dataset)) for v in (condition, x, y)):
        return xr.where(condition, x, y)
    return np.where(condition, x, y)
