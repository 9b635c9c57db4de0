"""The model's inputs under a scenario: the scenario applied, water availability derived from rainfall where
only rainfall is given, latitude as a layer, each input as a float32 array months first.

:mod:`suitability.model` calls :func:`model_arrays` on each block of cells (the climate of the block read and
resampled once for all the runs of a pass) and, lazily, on the whole region for the datacube's derived layer.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Mapping, Sequence

import numpy as np
import xarray as xr

from .physiology import atmosphere, energy, light, water_balance
from .scenarios import DEFAULT_DIURNAL_RANGE_C, ScenarioSettings, apply_scenario, scale_water_availability
from .variables import PENMAN_MONTEITH, pet_method

#: Day of year of the 15th of each month in a non-leap year; the representative day of the month.
REPRESENTATIVE_DAY = np.array([15, 46, 74, 105, 135, 166, 196, 227, 258, 288, 319, 349])
DAYS_IN_MONTH = np.array([31, 28, 31, 30, 31, 30, 31, 31, 30, 31, 30, 31], dtype=np.float64)
MONTHLY_INPUTS = ("tmin", "tmax", "shortwave", "par", "water_availability", "vpd", "humidity")
STATIC_INPUTS = ("elevation", "lai", "latitude")


def model_arrays(dataset: xr.Dataset, scenario: ScenarioSettings, scenario_layers, physiology):
    """(names, float32 arrays (month, *spatial) or (*spatial), climate) of the model's inputs under ``scenario``;
    ``climate`` holds ``derived_water_availability`` when water availability was derived from rainfall."""
    diurnal_range = get_setting(physiology, "diurnal_range_c", DEFAULT_DIURNAL_RANGE_C)
    climate = apply_scenario(dataset, scenario, scenario_layers, diurnal_range_c=diurnal_range)
    climate = with_latitude(climate)
    derived = "precipitation" in climate and "water_availability" not in climate
    if derived:
        climate = water_from_rainfall(climate, get_setting(physiology, "soil_water_capacity_mm",
                                                    water_balance.DEFAULT_SOIL_WATER_CAPACITY_MM),
                                      get_setting(physiology, "soil_water_retention", "exponential"))
        climate = scale_water_availability(climate, scenario)
    names = tuple(n for n in MONTHLY_INPUTS + STATIC_INPUTS if n in climate)
    _check_inputs(names)
    spatial_dims = climate["latitude"].dims
    arrays = []
    for name in names:
        layer = climate[name]
        if "month" in layer.dims:
            layer = layer.sel(month=list(range(1, 13))).transpose("month", *spatial_dims)
            if layer.chunks is not None:
                layer = layer.chunk({"month": -1})
        else:
            layer = layer.transpose(*spatial_dims)
        arrays.append(layer.astype(np.float32).data)
    if derived:
        derived_layer = climate["water_availability"].transpose("month", *spatial_dims).copy()
        derived_layer.attrs = {}  # the registry's long name and units are written, not the rainfall's
        climate = climate.assign(derived_water_availability=derived_layer)
    return names, tuple(arrays), climate


@dataclass(frozen=True)
class InputOptions:
    """The physiology settings that shape the model's inputs (:func:`model_arrays`), picklable for dask."""

    diurnal_range_c: float
    soil_water_capacity_mm: float
    soil_water_retention: str

    @classmethod
    def of(cls, physiology) -> "InputOptions":
        return cls(float(get_setting(physiology, "diurnal_range_c", DEFAULT_DIURNAL_RANGE_C)),
                   float(get_setting(physiology, "soil_water_capacity_mm", water_balance.DEFAULT_SOIL_WATER_CAPACITY_MM)),
                   str(get_setting(physiology, "soil_water_retention", "exponential")))


def water_from_rainfall(climate: xr.Dataset, capacity_mm: float = water_balance.DEFAULT_SOIL_WATER_CAPACITY_MM,
                        retention: str = "exponential") -> xr.Dataset:
    """``climate`` with ``water_availability`` (AET/PET of the monthly soil-water balance) and ``pet``.

    climate: ``precipitation`` [mm d-1] (month, y, x); ``pet`` [mm d-1] if given, else the reference
    evapotranspiration of :func:`pet_method`: FAO-56 Penman-Monteith where ``wind_speed``, ``shortwave`` and
    ``humidity`` or ``vpd`` are given, else Hargreaves-Samani from ``tmin``/``tmax`` [°C], both with the
    extraterrestrial radiation of the representative day of each month at the cell's ``latitude``; ``soil_water_capacity`` [mm] (y, x) if
    given, else ``capacity_mm``. Monthly totals are the daily rates times the days of the month (the same
    non-leap year as the assimilation totals). Lazy on dask data (whole months per block).
    """
    if "pet" in climate:
        pet = climate["pet"]
    else:
        doy = xr.DataArray(REPRESENTATIVE_DAY, dims="month", coords={"month": np.arange(1, 13)})
        ra = xr.apply_ufunc(light.extraterrestrial_radiation, climate["latitude"], doy, dask="allowed")
        if pet_method(climate) == PENMAN_MONTEITH:
            pet = _penman_monteith(climate, ra)
        else:
            pet = xr.apply_ufunc(water_balance.hargreaves_samani_et0, climate["tmin"], climate["tmax"], ra,
                                 dask="parallelized", output_dtypes=[np.float64])
    capacity = climate["soil_water_capacity"] if "soil_water_capacity" in climate else capacity_mm
    pet = pet.transpose("month", ...)
    rain = climate["precipitation"].transpose(*pet.dims)

    def availability(rain_mm_d, pet_mm_d, capacity_mm_):
        # apply_ufunc moves the core dim "month" last; the balance takes months first.
        rain_m = np.moveaxis(rain_mm_d, -1, 0) * DAYS_IN_MONTH.reshape((12,) + (1,) * (rain_mm_d.ndim - 1))
        pet_m = np.moveaxis(pet_mm_d, -1, 0) * DAYS_IN_MONTH.reshape((12,) + (1,) * (pet_mm_d.ndim - 1))
        _, aet = water_balance.monthly_soil_water_balance(rain_m, pet_m, capacity_mm_, retention)
        return np.moveaxis(water_balance.water_availability_from_balance(aet, pet_m), 0, -1).astype(np.float32)

    if pet.chunks is not None:
        pet = pet.chunk({"month": -1})
        rain = rain.chunk({"month": -1})
    water = xr.apply_ufunc(availability, rain, pet, capacity, input_core_dims=[["month"], ["month"], []],
                           output_core_dims=[["month"]], dask="parallelized", output_dtypes=[np.float32])
    return climate.assign(water_availability=water.transpose(*climate["precipitation"].dims), pet=pet.astype(np.float32))


def _penman_monteith(climate: xr.Dataset, extraterrestrial) -> xr.DataArray:
    """FAO-56 Penman-Monteith ET0 [mm d-1] (month, ...) of a monthly climatology: ea from ``humidity``
    (eq. 19) or ``vpd`` (ea = es − D), P from ``elevation`` (eq. 7; sea level without it), G of each month
    from the mean temperatures of the months before and after it, the year taken round (eq. 43)."""
    tmin, tmax = climate["tmin"], climate["tmax"]
    if "humidity" in climate:
        ea = atmosphere.actual_vapour_pressure_from_relative_humidity(100.0 * climate["humidity"], tmin, tmax)
    else:
        ea = atmosphere.actual_vapour_pressure_from_deficit(tmin, tmax, climate["vpd"])
    elevation = climate["elevation"] if "elevation" in climate else xr.zeros_like(climate["latitude"], dtype=np.float32)
    mean = 0.5 * (tmin + tmax)
    heat = energy.monthly_soil_heat_flux(mean.roll(month=1, roll_coords=False), mean.roll(month=-1, roll_coords=False))
    return energy.penman_monteith_et0(tmin, tmax, ea, climate["shortwave"], extraterrestrial, elevation,
                                      atmosphere.air_pressure_from_elevation(elevation), climate["wind_speed"], heat)


def with_latitude(climate: xr.Dataset) -> xr.Dataset:
    if "latitude" in climate.data_vars:
        return climate
    if "latitude" in climate.coords:
        latitude = climate.coords["latitude"]
        return climate.drop_vars("latitude").assign(latitude=latitude)
    raise ValueError("the dataset needs a 'latitude' layer (degrees north of each cell), as data variable or coordinate")


def _check_inputs(names: Sequence[str]) -> None:
    missing = [n for n in ("tmin", "tmax", "water_availability") if n not in names]
    if not any(n in names for n in ("shortwave", "par")):
        missing.append("shortwave (or par)")
    if missing:
        raise ValueError(f"the climate dataset lacks {', '.join(missing)}")


def get_setting(section: Any, key: str, default: Any) -> Any:
    """``key`` of a config section (pydantic model), a mapping or None, else ``default``."""
    if section is None:
        return default
    if isinstance(section, Mapping):
        return section.get(key, default)
    return getattr(section, key, default)
