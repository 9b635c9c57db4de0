"""Compose the physiology into per-cell seasonal C3 and C4 potential assimilation and the indicators.

For every cell and month the daily canopy model (:func:`suitability.physiology.daily_canopy_assimilation`)
is evaluated for a representative day, the 15th of the month, and multiplied by the days in the month
(a non-leap year). Season totals add the months of the season. The work is done block by block: on dask
data each block of cells goes through :func:`_evaluate_block` once, which returns every output layer at
the same time, so the physiology runs once per cell and month whatever the number of layers written.

Two engines evaluate the daily canopy model inside a block, chosen by ``engine`` (config
``compute.engine``): "compiled" (default), the fused numba kernel of :mod:`suitability.kernel`, and
"numpy", the physiology package called month by month and pathway by pathway (the reference the
kernel is tested against, within 1e-4 relative). Both run the same equations (:mod:`suitability.kernel`).
A registered leaf model that is marked as not compiled (:func:`suitability.kernel.supports`) runs on the
numpy engine, with a warning once per pair of models. Everything after the daily values (season sums,
indicators) is shared.
"""

from __future__ import annotations

import itertools
import warnings
from dataclasses import dataclass
from typing import Any, Mapping, Sequence

import dask
import dask.array
import numpy as np
import xarray as xr

from . import indicators, kernel
from .config.schema import GROWING_SEASON_MIN_MEAN_TEMPERATURE_C, GROWING_SEASON_MIN_MEAN_TMIN_C
from .physiology import atmosphere, energy, light
from .physiology import crossover_temperature, daily_canopy_assimilation
from .physiology.water import MAX_WATER_SUPPLY_MM_PER_DAY
from .runtime import ENGINES
from .physiology import water_balance
from .scenarios import DEFAULT_DIURNAL_RANGE_C, ScenarioSettings, apply_scenario, scale_water_availability
from .variables import (CLASS_NODATA, DATACUBE, HARGREAVES_SAMANI, OUTPUT_LAYERS, PENMAN_MONTEITH, SEASONAL,  # noqa: F401
                        layer_names, pet_method)

#: Day of year of the 15th of each month in a non-leap year; the representative day of the month.
REPRESENTATIVE_DAY = np.array([15, 46, 74, 105, 135, 166, 196, 227, 258, 288, 319, 349])
DAYS_IN_MONTH = np.array([31, 28, 31, 30, 31, 30, 31, 31, 30, 31, 30, 31], dtype=np.float64)

# The registry (variables.OUTPUT_LAYERS) lists the layers; _evaluate_block returns them in this order.
SEASONAL_LAYERS = layer_names(SEASONAL)
MONTHLY_LAYERS = layer_names(DATACUBE)
_N_STACKED = len(SEASONAL_LAYERS) + 12 * len(MONTHLY_LAYERS)
_MONTHLY_INPUTS = ("tmin", "tmax", "shortwave", "par", "water_availability", "vpd", "humidity")
_STATIC_INPUTS = ("elevation", "lai", "latitude")
DEFAULT_LAI = 3.0


@dataclass(frozen=True)
class ModelSettings:
    """Everything the block function needs besides the data; hashable and picklable for dask.

    c3_params, c4_params: what :func:`suitability.physiology.resolve_params` accepts.
    season_months: fixed months (1..12) of the season, or None to use ``season_min_temperature_c``.
    season_min_temperature_c: per-cell rule, months whose mean of tmin and tmax is at least this [°C].
    season_min_tmin_c: with it, months whose mean daily minimum is at least this too [°C].
    contested_margin: half-width of the contested class on the advantage index [-].
    lai: leaf area index used where the data have no ``lai`` layer [m2 m-2].
    engine: "compiled" (the numba kernel) or "numpy" (see the module docstring).
    max_water_supply_mm: the soil's daily water supply at field capacity [mm d-1]
        (:mod:`suitability.physiology.water`).
    """

    scenario: ScenarioSettings
    c3_params: Any = None
    c4_params: Any = None
    season_months: tuple[int, ...] | None = tuple(range(1, 13))
    season_min_temperature_c: float | None = None
    season_min_tmin_c: float | None = None
    contested_margin: float = 0.05
    lai: float = DEFAULT_LAI
    engine: str = "compiled"
    max_water_supply_mm: float = MAX_WATER_SUPPLY_MM_PER_DAY


def evaluate(
    dataset: xr.Dataset,
    scenario: Any = None,
    *,
    physiology: Any = None,
    season: Any = None,
    classes: Any = None,
    scenario_layers: xr.Dataset | None = None,
    engine: str | None = None,
) -> xr.Dataset:
    """Evaluate both pathways on a climate dataset and return every per-scenario output layer.

    dataset: monthly layers with dims (month, y, x) (month = 1..12): ``tmin`` and ``tmax`` (or ``tmean``)
        [°C], ``shortwave`` [MJ m-2 d-1] or ``par`` [mol m-2 d-1], ``water_availability`` [0-1], optional
        ``vpd`` [kPa] or ``humidity`` [0-1]; static (y, x): ``latitude`` [degrees north] (data variable or
        coordinate), optional ``elevation`` [m] (sea level if absent) and ``lai`` [m2 m-2]. numpy- or
        dask-backed; dask input stays lazy.
    scenario: a config scenario, a mapping (co2_ppm, o2_percent, temperature_offset_c, shortwave_factor,
        water_availability_factor) or None (420 ppm, present climate).
    physiology: config ``physiology`` section or mapping {"c3": {...}, "c4": {...}, "lai": ...}.
    season: config ``season`` section or mapping {"months": [...]} / {"min_mean_temperature_c": t}.
    classes: config ``classes`` section or mapping {"contested_margin": m}.
    engine: "compiled" or "numpy" (the pipeline passes the config's ``compute.engine``); None = "compiled".

    Returns a Dataset with the layers of ``SEASONAL_LAYERS`` (y, x) and ``MONTHLY_LAYERS`` (month, y, x),
    assimilation in g C m-2 per season or month; ``pathway_class`` is uint8 with 255 as nodata.
    """
    settings = model_settings(scenario, physiology=physiology, season=season, classes=classes, engine=engine)
    diurnal_range = _get(physiology, "diurnal_range_c", DEFAULT_DIURNAL_RANGE_C)
    climate = apply_scenario(dataset, settings.scenario, scenario_layers, diurnal_range_c=diurnal_range)
    climate = _with_latitude(climate)
    derived = "precipitation" in climate and "water_availability" not in climate
    if derived:
        climate = water_from_rainfall(climate, _get(physiology, "soil_water_capacity_mm",
                                                    water_balance.DEFAULT_SOIL_WATER_CAPACITY_MM),
                                      _get(physiology, "soil_water_retention", "exponential"))
        climate = scale_water_availability(climate, settings.scenario)
    names = tuple(n for n in _MONTHLY_INPUTS + _STATIC_INPUTS if n in climate)
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
    if any(isinstance(array, dask.array.Array) for array in arrays):
        stacked = _map_blocks(arrays, names, settings, len(spatial_dims))
    else:
        stacked = _evaluate_block(*arrays, names=names, settings=settings)
    coords = {k: v for k, v in climate["latitude"].coords.items() if set(v.dims) <= set(spatial_dims)}
    stacked = xr.DataArray(stacked, dims=("layer",) + spatial_dims, coords=coords)
    result = _unstack(stacked, settings)
    if derived:  # the registry's "derived" layer: written to the datacube
        derived_layer = climate["water_availability"].transpose("month", *spatial_dims).copy()
        derived_layer.attrs = {}  # the registry's long name and units are written, not the rainfall's
        result["derived_water_availability"] = derived_layer
    return result


def _map_blocks(arrays, names, settings: ModelSettings, n_spatial: int):
    """:func:`_evaluate_block` block by block over dask (or numpy) inputs; (layer, *spatial) float32.

    Each output block is ONE task that computes its own input blocks (a few small tasks: read, resample,
    scenario offsets) and then the model. Left as separate tasks, the input blocks hang off shared
    roots (e.g. a coarse climate raster read as one chunk, needed by every block), and dask's schedulers
    then resample the inputs of every block of the region ahead of the model and hold them all in memory
    (measured: peak memory growing with the region, 2.6 GB for 3072² cells). Embedded, a block's inputs
    exist only while its task runs, so memory stays bounded by the blocks in flight.
    """
    spatial_chunks = next(a.chunks[-n_spatial:] for a in arrays if isinstance(a, dask.array.Array))
    arrays = [dask.array.asarray(array) for array in arrays]
    aligned = [array.rechunk(array.chunks[:-n_spatial] + spatial_chunks) for array in arrays]
    name = "evaluate-" + dask.base.tokenize(aligned, names, settings)
    graph = {}
    for index in itertools.product(*(range(len(c)) for c in spatial_chunks)):
        blocks = tuple(array.blocks[(0,) * (array.ndim - n_spatial) + index] for array in aligned)
        graph[(name, 0) + index] = (_evaluate_embedded, _BlockInputs(blocks), names, settings)
    return dask.array.Array(graph, name, chunks=((_N_STACKED,),) + spatial_chunks, dtype=np.float32,
                            meta=np.empty((0,) * (n_spatial + 1), np.float32))


@dataclass(frozen=True)
class _BlockInputs:
    """The input blocks of one output block, as small dask arrays (opaque to the outer graph)."""

    arrays: tuple


_WARNED_NUMPY_ENGINE: set = set()


def _warn_numpy_engine(c3_params, c4_params) -> None:
    """Say once per pair of leaf models that they run on the (much slower) numpy engine."""
    models = tuple(kernel.pathway_tables(p, params).model for p, params in (("C3", c3_params), ("C4", c4_params)))
    key = tuple(m.name for m in models)
    if key not in _WARNED_NUMPY_ENGINE:
        _WARNED_NUMPY_ENGINE.add(key)
        missing = ", ".join(m.name for m in models if not m.compiled)
        warnings.warn(f"leaf model {missing} is not available in the compiled engine; running the numpy engine, "
                      "about 20 times slower (compute.engine: numpy says so explicitly)", RuntimeWarning, stacklevel=3)


def _evaluate_embedded(inputs: _BlockInputs, names: Sequence[str], settings: ModelSettings) -> np.ndarray:
    values = dask.compute(*inputs.arrays, scheduler="sync")
    return _evaluate_block(*values, names=names, settings=settings)


def model_settings(scenario: Any = None, *, physiology: Any = None, season: Any = None, classes: Any = None,
                   engine: str | None = None) -> ModelSettings:
    """Collect the model's settings from config sections or plain mappings (see :func:`evaluate`)."""
    engine = engine if engine is not None else "compiled"
    if engine not in ENGINES:
        raise ValueError(f"engine: expected one of {', '.join(ENGINES)}, got {engine!r}")
    months = _get(season, "months", None)
    threshold = _get(season, "min_mean_temperature_c", None)
    tmin_threshold = _get(season, "min_mean_tmin_c", None)
    if months is None and threshold is None and tmin_threshold is None:  # the growing season (SeasonConfig)
        threshold, tmin_threshold = GROWING_SEASON_MIN_MEAN_TEMPERATURE_C, GROWING_SEASON_MIN_MEAN_TMIN_C
    c3_params, c4_params = _pathway_params(physiology, "c3"), _pathway_params(physiology, "c4")
    if engine == "compiled" and not kernel.supports(c3_params, c4_params):
        _warn_numpy_engine(c3_params, c4_params)
        engine = "numpy"
    return ModelSettings(
        scenario=ScenarioSettings.from_any(scenario),
        c3_params=c3_params,
        c4_params=c4_params,
        season_months=tuple(int(m) for m in months) if months is not None else None,
        season_min_temperature_c=None if months is not None or threshold is None else float(threshold),
        season_min_tmin_c=None if months is not None or tmin_threshold is None else float(tmin_threshold),
        contested_margin=float(_get(classes, "contested_margin", 0.05)),
        lai=float(_get(physiology, "lai", DEFAULT_LAI) or DEFAULT_LAI),
        engine=engine,
        max_water_supply_mm=float(_get(physiology, "max_water_supply_mm", MAX_WATER_SUPPLY_MM_PER_DAY)),
    )


def _evaluate_block(*arrays: np.ndarray, names: Sequence[str], settings: ModelSettings) -> np.ndarray:
    """Evaluate one block of cells. Monthly arrays arrive as (12, ...), static ones as (...).

    Returns (n_layers, ...) float32: the seasonal layers, then 12 monthly C3 and 12 monthly C4 totals.
    """
    data = dict(zip(names, arrays))
    shape = data["latitude"].shape
    data = {name: np.moveaxis(values, 0, -1) if values.ndim == len(shape) + 1 else values
            for name, values in data.items()}  # months last inside: (..., 12)
    elevation = data.get("elevation", np.zeros(shape, np.float32))
    lai = data.get("lai", np.full(shape, settings.lai, np.float32))
    in_season = _season_mask(data, settings, shape)
    if settings.engine == "compiled":
        monthly, c3_gross, c3_photorespiration = _compiled_months(data, settings, in_season, elevation, lai)
    else:
        monthly, c3_gross, c3_photorespiration = _numpy_months(data, settings, in_season, elevation, lai)
    valid = _valid_cells(data)
    season_c3 = np.where(in_season, monthly["C3"], 0.0).sum(axis=-1)
    season_c4 = np.where(in_season, monthly["C4"], 0.0).sum(axis=-1)
    has_season = in_season.any(axis=-1)
    nodata = ~valid | ~has_season | np.isnan(season_c3) | np.isnan(season_c4)
    season_c3 = np.where(nodata, np.nan, season_c3)
    season_c4 = np.where(nodata, np.nan, season_c4)
    advantage = indicators.advantage_index(season_c3, season_c4)
    classes = indicators.with_growing_season(indicators.pathway_class(advantage, settings.contested_margin),
                                             valid, has_season)
    months_favoured = indicators.c4_favoured_months(
        np.moveaxis(monthly["C3"], -1, 0), np.moveaxis(monthly["C4"], -1, 0), np.moveaxis(in_season, -1, 0),
        settings.contested_margin,
    )
    share = indicators.photorespiration_share(c3_gross, c3_photorespiration)
    crossover = _crossover_by_pressure(atmosphere.air_pressure_from_elevation(elevation), settings)
    seasonal = {"c3_assimilation": season_c3, "c4_assimilation": season_c4, "pathway_advantage": advantage,
                "pathway_class": classes, "c4_favoured_months": months_favoured,
                "growing_season_months": indicators.growing_season_months(np.moveaxis(in_season, -1, 0), valid),
                "photorespiration_share": share, "crossover_temperature": crossover}
    out = np.empty((_N_STACKED,) + shape, np.float32)
    for i, name in enumerate(SEASONAL_LAYERS):
        values = np.asarray(seasonal[name], dtype=np.float64)
        if not OUTPUT_LAYERS[name].categorical and name != "growing_season_months":
            values = np.where(nodata, np.nan, values)
        out[i] = values
    first = len(SEASONAL_LAYERS)
    out[first:first + 12] = np.moveaxis(np.where(valid[..., None], monthly["C3"], np.nan), -1, 0)
    out[first + 12:first + 24] = np.moveaxis(np.where(valid[..., None], monthly["C4"], np.nan), -1, 0)
    return out


def _numpy_months(data, settings: ModelSettings, in_season, elevation, lai):
    """Monthly net totals per pathway [g C m-2], season C3 gross and photorespiration, by the numpy physiology."""
    shape = in_season.shape[:-1]
    scenario = settings.scenario
    monthly = {p: np.full(shape + (12,), np.nan, np.float64) for p in ("C3", "C4")}
    c3_gross = np.zeros(shape, np.float64)
    c3_photorespiration = np.zeros(shape, np.float64)
    for index in range(12):
        if not in_season[..., index].any():
            continue
        month_inputs = _month_inputs(data, index)
        for pathway, params in (("C3", settings.c3_params), ("C4", settings.c4_params)):
            with np.errstate(all="ignore"):
                day = daily_canopy_assimilation(
                    pathway,
                    day_of_year=int(REPRESENTATIVE_DAY[index]),
                    latitude_deg=data["latitude"],
                    co2_ppm=scenario.co2_ppm,
                    o2_percent=scenario.o2_percent,
                    elevation_m=elevation,
                    lai=lai,
                    params=params,
                    max_water_supply_mm=settings.max_water_supply_mm,
                    **month_inputs,
                )
            monthly[pathway][..., index] = np.asarray(day.net) * DAYS_IN_MONTH[index]
            if pathway == "C3":
                season_weight = np.where(in_season[..., index], DAYS_IN_MONTH[index], 0.0)
                c3_gross += np.asarray(day.gross) * season_weight
                c3_photorespiration += np.asarray(day.photorespiration) * season_weight
    for pathway in monthly:
        monthly[pathway] = np.where(in_season, monthly[pathway], np.nan)  # NaN = month not in the season
    return monthly, c3_gross, c3_photorespiration


def _compiled_months(data, settings: ModelSettings, in_season, elevation, lai):
    """The same three results as :func:`_numpy_months`, by the compiled kernel (:mod:`suitability.kernel`)."""
    humidity = {}
    if "vpd" in data:
        humidity["vpd_kpa"] = data["vpd"]
    elif "humidity" in data:
        humidity["actual_vapour_pressure_kpa"] = atmosphere.actual_vapour_pressure_from_relative_humidity(
            100.0 * data["humidity"], data["tmin"], data["tmax"])
    if "shortwave" in data:
        shortwave = data["shortwave"]
    else:  # mol m-2 d-1 of PAR back to MJ m-2 d-1 of shortwave, inverting light.par_from_shortwave
        shortwave = data["par"] / light.par_from_shortwave(1.0)
    day = kernel.season_canopy_assimilation(
        tmin_c=data["tmin"], tmax_c=data["tmax"], shortwave_mj=shortwave,
        water_availability=data["water_availability"], latitude_deg=data["latitude"],
        day_of_year=REPRESENTATIVE_DAY, co2_ppm=settings.scenario.co2_ppm, o2_percent=settings.scenario.o2_percent,
        elevation_m=elevation, lai=lai, in_season=in_season, c3_params=settings.c3_params,
        c4_params=settings.c4_params, days_in_month=DAYS_IN_MONTH,
        max_water_supply_mm=settings.max_water_supply_mm, **humidity,
    )
    monthly = {"C3": day.c3_net * DAYS_IN_MONTH, "C4": day.c4_net * DAYS_IN_MONTH}
    return monthly, day.c3_gross_total, day.c3_photorespiration_total


def _crossover_by_pressure(pressure_kpa: np.ndarray, settings: ModelSettings) -> np.ndarray:
    """Crossover temperature per cell, solved once per distinct air pressure (to 0.01 kPa) of the block.

    The crossover depends on the cell only through its air pressure; rounding the pressure to 0.01 kPa
    (about 1 m of elevation) changes it by far less than the 0.1 °C the maps resolve.
    """
    finite = np.isfinite(pressure_kpa)
    rounded = np.round(np.where(finite, pressure_kpa, 101.3), 2)
    distinct, inverse = np.unique(rounded, return_inverse=True)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        solved = crossover_temperature(
            settings.scenario.co2_ppm, o2_percent=settings.scenario.o2_percent, pressure_kpa=distinct,
            params={"C3": settings.c3_params, "C4": settings.c4_params},
        )
    return np.where(finite, np.asarray(solved)[inverse.reshape(pressure_kpa.shape)], np.nan)


def _month_inputs(data: Mapping[str, np.ndarray], index: int) -> dict[str, np.ndarray]:
    inputs = {
        "tmin_c": data["tmin"][..., index],
        "tmax_c": data["tmax"][..., index],
        "water_availability": data["water_availability"][..., index],
    }
    if "shortwave" in data:
        inputs["shortwave_mj"] = data["shortwave"][..., index]
    else:
        # mol m-2 d-1 of PAR back to MJ m-2 d-1 of shortwave, inverting light.par_from_shortwave
        inputs["shortwave_mj"] = data["par"][..., index] / light.par_from_shortwave(1.0)
    if "vpd" in data:
        inputs["vpd_kpa"] = data["vpd"][..., index]
    elif "humidity" in data:
        inputs["actual_vapour_pressure_kpa"] = atmosphere.actual_vapour_pressure_from_relative_humidity(
            100.0 * data["humidity"][..., index], inputs["tmin_c"], inputs["tmax_c"]
        )
    return inputs


def _season_mask(data: Mapping[str, np.ndarray], settings: ModelSettings, shape: tuple[int, ...]) -> np.ndarray:
    if settings.season_months is None:
        in_season = np.ones(data["tmin"].shape, bool)
        if settings.season_min_temperature_c is not None:
            in_season &= 0.5 * (data["tmin"] + data["tmax"]) >= settings.season_min_temperature_c
        if settings.season_min_tmin_c is not None:
            in_season &= data["tmin"] >= settings.season_min_tmin_c
        return in_season
    months = np.zeros(12, bool)
    months[[m - 1 for m in settings.season_months]] = True
    return np.broadcast_to(months, shape + (12,))


def _valid_cells(data: Mapping[str, np.ndarray]) -> np.ndarray:
    valid = np.ones(data["latitude"].shape, bool)
    for name, values in data.items():
        finite = np.isfinite(values)
        valid &= finite.all(axis=-1) if values.ndim == len(valid.shape) + 1 else finite
    return valid


def _unstack(stacked: xr.DataArray, settings: ModelSettings) -> xr.Dataset:
    layers = {}
    for i, name in enumerate(SEASONAL_LAYERS):
        layer = stacked.isel(layer=i)
        if OUTPUT_LAYERS[name].categorical:
            layer = layer.fillna(CLASS_NODATA).astype(np.uint8)
        layers[name] = layer
    first = len(SEASONAL_LAYERS)
    for j, name in enumerate(MONTHLY_LAYERS):
        block = stacked.isel(layer=slice(first + 12 * j, first + 12 * (j + 1)))
        block = block.rename(layer="month").assign_coords(month=np.arange(1, 13))
        layers[name] = block
    result = xr.Dataset(layers)
    scenario = settings.scenario
    result.attrs.update(
        scenario=scenario.name, co2_ppm=scenario.co2_ppm, o2_percent=scenario.o2_percent,
        temperature_offset_c=scenario.temperature_offset_c,
    )
    return result


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


def _with_latitude(climate: xr.Dataset) -> xr.Dataset:
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


def _pathway_params(physiology: Any, key: str):
    section = _get(physiology, key, None)
    if section is None:
        return None
    if isinstance(section, str):
        return section
    name = _get(section, "parameter_set", None)
    overrides = dict(_get(section, "overrides", None) or {})
    params = {"parameter_set": name, **overrides} if name else overrides
    return params or None


def _get(section: Any, key: str, default: Any) -> Any:
    if section is None:
        return default
    if isinstance(section, Mapping):
        return section.get(key, default)
    return getattr(section, key, default)
