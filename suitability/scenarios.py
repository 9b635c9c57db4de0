"""Apply a scenario to the baseline climate.

A scenario may (1) replace any baseline layer with layers of its own (a future climate dataset, already
aligned on the grid), then (2) shift temperatures, scale radiation and water availability. Its CO2 and O2
are used by the model, not here. This module only rearranges and offsets data; it contains no physiology.

Decisions:
- Offsets apply after replacement, so a scenario can both bring its own layers and add a sensitivity shift.
- ``temperature_offset_c`` shifts tmin, tmax and tmean alike (a uniform warming).
- ``water_availability_factor`` scales availability and the result is capped at 1: availability is a
  fraction of the unstressed supply and cannot exceed it. This is the only cap, and it is documented.
  Availability derived from rainfall (``precipitation``) is made by the model after the temperature offset
  (warming raises the evaporative demand) and scaled there by the same rule.
- A scenario's own ``precipitation`` replaces the baseline's ``water_availability`` and vice versa.
- A dataset with ``tmean`` but no ``tmin``/``tmax`` gets a daily range of ``diurnal_range_c`` centred on
  the mean (common practice, no source; 10 °C by default, configurable).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Mapping

import numpy as np
import xarray as xr

DEFAULT_DIURNAL_RANGE_C = 10.0
# A scenario layer replaces the baseline's layer of the same quantity under another name, too.
_ALTERNATIVES = {
    "shortwave": ("par",), "par": ("shortwave",), "vpd": ("humidity",), "humidity": ("vpd",),
    "tmean": ("tmin", "tmax"), "tmin": ("tmean",), "tmax": ("tmean",),
    "precipitation": ("water_availability",),
    "water_availability": ("precipitation", "pet", "soil_water_capacity"),
}


@dataclass(frozen=True)
class ScenarioSettings:
    """The numbers of a scenario that the model needs. Built from a config entry or a plain mapping.

    co2_ppm: ambient CO2 mole fraction [µmol mol-1]. o2_percent: O2 mole fraction [%].
    temperature_offset_c: added to every temperature layer [°C]. shortwave_factor: multiplies radiation [-].
    water_availability_factor: multiplies water availability [-], result capped at 1.
    """

    name: str = "baseline"
    co2_ppm: float = 420.0
    o2_percent: float = 20.95
    temperature_offset_c: float = 0.0
    shortwave_factor: float = 1.0
    water_availability_factor: float = 1.0
    description: str = ""

    @classmethod
    def from_any(cls, scenario: Any) -> "ScenarioSettings":
        """Accept a ScenarioSettings, a config ScenarioConfig (any object with these attributes), a mapping or None."""
        if scenario is None:
            return cls()
        if isinstance(scenario, cls):
            return scenario
        if isinstance(scenario, Mapping):
            known = {k: v for k, v in scenario.items() if k in cls.__dataclass_fields__}
            unknown = set(scenario) - set(cls.__dataclass_fields__) - {"climate"}
            if unknown:
                raise ValueError(f"unknown scenario keys {sorted(unknown)}; valid: {sorted(cls.__dataclass_fields__)}")
            return cls(**known)
        values = {}
        for field in cls.__dataclass_fields__:
            value = getattr(scenario, field, None)
            if value is not None:
                values[field] = value
        return cls(**values)


def apply_scenario(
    baseline: xr.Dataset,
    scenario: Any,
    scenario_layers: xr.Dataset | None = None,
    *,
    diurnal_range_c: float = DEFAULT_DIURNAL_RANGE_C,
) -> xr.Dataset:
    """Return the climate the model sees under ``scenario``.

    baseline: aligned inputs (monthly layers with dims month, y, x). scenario_layers: the scenario's own
    layers on the same grid, replacing the baseline's of the same name (a ``water_stress`` or ``tmean``
    replacement is expected to arrive already converted by the reader).
    """
    settings = ScenarioSettings.from_any(scenario)
    climate = baseline.copy()
    if scenario_layers is not None:
        for name, layer in scenario_layers.data_vars.items():
            for alternative in _ALTERNATIVES.get(name, ()):
                if alternative in climate and alternative not in scenario_layers:
                    climate = climate.drop_vars(alternative)
            climate[name] = layer
    climate = _ensure_tmin_tmax(climate, diurnal_range_c)
    offset = np.float32(settings.temperature_offset_c)
    for name in ("tmin", "tmax", "tmean"):
        if name in climate and offset != 0:
            climate[name] = climate[name] + offset
    for name in ("shortwave", "par"):
        if name in climate and settings.shortwave_factor != 1:
            climate[name] = climate[name] * np.float32(settings.shortwave_factor)
    return scale_water_availability(climate, settings)


def scale_water_availability(climate: xr.Dataset, scenario: Any) -> xr.Dataset:
    """``water_availability`` times the scenario's ``water_availability_factor``, capped at 1 (see above);
    also applied by the model to availability derived from rainfall."""
    settings = ScenarioSettings.from_any(scenario)
    if "water_availability" in climate and settings.water_availability_factor != 1:
        scaled = climate["water_availability"] * np.float32(settings.water_availability_factor)
        climate["water_availability"] = scaled.clip(max=1.0)
    return climate


def _ensure_tmin_tmax(climate: xr.Dataset, diurnal_range_c: float) -> xr.Dataset:
    if "tmin" in climate and "tmax" in climate:
        return climate
    if "tmean" not in climate:
        raise ValueError("the climate needs tmin and tmax, or tmean")
    half = np.float32(diurnal_range_c / 2.0)
    return climate.assign(tmin=climate["tmean"] - half, tmax=climate["tmean"] + half)
