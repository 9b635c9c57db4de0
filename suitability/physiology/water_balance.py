"""Water from rainfall: reference evapotranspiration and a monthly soil-water balance (a bucket).

Pure functions on numpy arrays (xarray/dask callers apply them block-wise, the month axis whole).
Rainfall, evapotranspiration and the capacity are depths of water [mm]; 1 kg m-2 of water = 1 mm.

- :func:`hargreaves_samani_et0`: reference evapotranspiration from Tmin, Tmax and extraterrestrial
  radiation (Hargreaves & Samani 1985, in the form of FAO-56 eq. 52).
- :func:`monthly_soil_water_balance`: the monthly bucket of Thornthwaite & Mather (1955, 1957): storage
  gains the surplus of rainfall over demand up to the capacity; in a month of deficit it loses water,
  either exponentially with the deficit (the soil gives water up less readily as it dries; the negative
  exponential that summarises the Thornthwaite & Mather (1957) retention tables, Pastor & Post 1984) or, in
  the simple bookkeeping form taught with the method, until it is empty. Actual evapotranspiration is the
  rainfall plus what the soil gives up, at most the demand.
- :func:`water_availability_from_balance`: AET/PET, the ratio used as a water-availability index in
  bucket models of vegetation distribution (Cramer & Prentice 1988; Prentice et al. 1992 "alpha").

The monthly climatology is a repeating year: the balance is run round the 12 months until the storage at
the end of December repeats (to 0.01 mm) or ``max_years`` is reached, starting from a full bucket; it is
then independent of the start.
"""

from __future__ import annotations

import numpy as np

#: Hargreaves & Samani (1985) empirical coefficient and temperature offset [°C] (FAO-56 eq. 52).
HARGREAVES_COEFFICIENT = 0.0023
HARGREAVES_OFFSET_C = 17.8
#: Reciprocal of the latent heat of vaporisation 2.45 MJ kg-1: MJ m-2 d-1 -> mm d-1 (FAO-56 eq. 20).
MJ_TO_MM = 0.408

#: Default plant-available soil water capacity [mm]: 150 mm is the bucket of Prentice et al. (1992,
#: J Biogeogr 19:117) for global vegetation modelling (from memory; configurable, or a raster).
DEFAULT_SOIL_WATER_CAPACITY_MM = 150.0
RETENTIONS = ("exponential", "linear")


def hargreaves_samani_et0(tmin_c, tmax_c, extraterrestrial_mj):
    """Reference evapotranspiration by Hargreaves & Samani (1985), FAO-56 eq. 52.

    ET0 = 0.0023 (Tmean + 17.8) (Tmax - Tmin)^0.5 · 0.408 Ra,  Tmean = (Tmax + Tmin)/2

    Parameters
    ----------
    tmin_c, tmax_c : mean daily minimum and maximum air temperature [°C] (Tmax >= Tmin, else NaN).
    extraterrestrial_mj : Ra [MJ m-2 d-1] (FAO-56 eq. 21); 0.408 Ra is its evaporation equivalent [mm d-1].

    Returns
    -------
    ET0 [mm d-1], >= 0 (0 where Tmean < -17.8 °C; NaN where Tmax < Tmin).

    Reference: Hargreaves & Samani (1985) Appl Eng Agric 1:96; Allen et al. (1998) FAO-56, eqs. 20, 52.
    """
    tmin_c = np.asarray(tmin_c, dtype=np.float64)
    tmax_c = np.asarray(tmax_c, dtype=np.float64)
    tmean = 0.5 * (tmin_c + tmax_c)
    span = tmax_c - tmin_c
    root = np.sqrt(np.where(span >= 0, span, np.nan))
    et0 = HARGREAVES_COEFFICIENT * (tmean + HARGREAVES_OFFSET_C) * root * MJ_TO_MM * np.asarray(extraterrestrial_mj)
    return np.where(np.isnan(et0), np.nan, np.maximum(et0, 0.0))


def soil_water_step(storage_mm, precipitation_mm, pet_mm, capacity_mm, retention="exponential"):
    """One month of the Thornthwaite & Mather bucket.

    Parameters
    ----------
    storage_mm : soil water at the start of the month [mm], 0..capacity.
    precipitation_mm, pet_mm : the month's rainfall and potential (reference) evapotranspiration [mm month-1].
    capacity_mm : plant-available water capacity [mm] (> 0).
    retention : "exponential": in a month with P < PET the storage becomes S·exp(-(PET - P)/capacity)
        (the retention function summarising Thornthwaite & Mather 1957); "linear": it falls by PET - P until
        empty (Thornthwaite & Mather 1955 bookkeeping).

    Returns
    -------
    (storage at the end of the month [mm], actual evapotranspiration [mm month-1]).
    Where P >= PET: AET = PET, storage = min(S + P - PET, capacity) (the rest is surplus).
    Where P < PET: AET = P + (S - S_end), at most PET.
    """
    storage = np.asarray(storage_mm, dtype=np.float64)
    precipitation = np.asarray(precipitation_mm, dtype=np.float64)
    pet = np.asarray(pet_mm, dtype=np.float64)
    capacity = np.asarray(capacity_mm, dtype=np.float64)
    wet = precipitation >= pet
    deficit = pet - precipitation
    if retention == "exponential":
        with np.errstate(divide="ignore", invalid="ignore"):
            dried = storage * np.exp(-np.where(wet, 0.0, deficit) / capacity)
    elif retention == "linear":
        dried = np.maximum(storage - np.where(wet, 0.0, deficit), 0.0)
    else:
        raise ValueError(f"unknown retention {retention!r}; expected one of {', '.join(RETENTIONS)}")
    end = np.where(wet, np.minimum(storage + precipitation - pet, capacity), dried)
    aet = np.where(wet, pet, np.minimum(precipitation + storage - end, pet))
    return end, aet


def monthly_soil_water_balance(precipitation_mm, pet_mm, capacity_mm=DEFAULT_SOIL_WATER_CAPACITY_MM,
                               retention="exponential", max_years=100, tolerance_mm=0.01):
    """The steady annual cycle of the bucket for a 12-month climatology.

    Parameters
    ----------
    precipitation_mm, pet_mm : arrays (12, ...) of monthly rainfall and PET [mm month-1], January first.
    capacity_mm : plant-available water capacity [mm], scalar or array broadcasting over (...), > 0.
    retention : see :func:`soil_water_step`.
    max_years, tolerance_mm : the 12 months are repeated from a full bucket until the December storage
        changes by less than ``tolerance_mm`` [mm], at most ``max_years`` times.

    Returns
    -------
    (storage at the end of each month [mm], actual evapotranspiration [mm month-1]), both (12, ...).
    Cells with any NaN input, or capacity <= 0, are NaN.

    Reference: Thornthwaite & Mather (1955) Publ Climatol 8(1); (1957) Publ Climatol 10(3); Pastor & Post
    (1984) Can J For Res 14:466 (exponential retention). From memory; see the module docstring.
    """
    precipitation = np.asarray(precipitation_mm, dtype=np.float64)
    pet = np.asarray(pet_mm, dtype=np.float64)
    if precipitation.shape[0] != 12 or pet.shape[0] != 12:
        raise ValueError("expected 12 months along the first axis")
    shape = np.broadcast_shapes(precipitation.shape[1:], pet.shape[1:], np.shape(capacity_mm))
    capacity = np.broadcast_to(np.asarray(capacity_mm, dtype=np.float64), shape)
    invalid = (np.isnan(precipitation).any(axis=0) | np.isnan(pet).any(axis=0) | ~(capacity > 0)
               | (precipitation < 0).any(axis=0) | (pet < 0).any(axis=0))
    safe_capacity = np.where(invalid, 1.0, capacity)
    storage = safe_capacity.copy()
    ends = np.empty((12,) + shape)
    aets = np.empty((12,) + shape)
    for _ in range(max_years):
        start = storage
        for month in range(12):
            storage, aets[month] = soil_water_step(storage, np.where(invalid, 0.0, precipitation[month]),
                                                   np.where(invalid, 0.0, pet[month]), safe_capacity, retention)
            ends[month] = storage
        if np.all(np.abs(storage - start) < tolerance_mm):
            break
    ends[:, invalid] = np.nan
    aets[:, invalid] = np.nan
    return ends, aets


def water_availability_from_balance(aet_mm, pet_mm):
    """AET/PET [0-1]: 1 where the soil meets the whole demand; 1 where there is no demand (PET = 0).

    Reference: Cramer & Prentice (1988) Norsk Geogr Tidsskr 42:149; Prentice et al. (1992) J Biogeogr
    19:117 (the ratio of actual to equilibrium evapotranspiration as a moisture index; from memory).
    """
    aet = np.asarray(aet_mm, dtype=np.float64)
    pet = np.asarray(pet_mm, dtype=np.float64)
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = np.where(pet > 0, aet / pet, 1.0)
    return np.where(np.isnan(aet) | np.isnan(pet), np.nan, ratio)  # 0 <= AET <= PET by construction
