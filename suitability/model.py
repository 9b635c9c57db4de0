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

The C3 leaves are acclimated to each cell's monthly mean temperature (:func:`growth_temperature`). The
canopy crossover (:func:`canopy_crossover`) calls the same engine again on the same block, with the
month's temperatures shifted, through :mod:`suitability.tie_solver`.
"""

from __future__ import annotations

import functools
import itertools
import warnings
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field
from typing import Any, Mapping, Sequence

import dask
import dask.array
import numpy as np
import xarray as xr

from . import indicators, kernel, tie_solver
from .config.schema import GROWING_SEASON_MIN_MEAN_TEMPERATURE_C, GROWING_SEASON_MIN_MEAN_TMIN_C
from .model_inputs import DAYS_IN_MONTH, REPRESENTATIVE_DAY, InputOptions, model_arrays, with_latitude
from .model_inputs import get_setting as _get
from .model_inputs import water_from_rainfall  # noqa: F401  (part of this module's interface)
from .physiology import atmosphere, light
from .physiology import daily_canopy_assimilation
from .physiology.water import MAX_WATER_SUPPLY_MM_PER_DAY
from .runtime import ENGINES
from .scenarios import ScenarioSettings
from .physiology import uncertainty as parameter_uncertainty
from .variables import (CLASS_NODATA, DATACUBE, HARGREAVES_SAMANI, OUTPUT_LAYERS, PENMAN_MONTEITH, SEASONAL, UNCERTAINTY,  # noqa: F401
                        layer_names, pet_method)  # noqa: F401


# The registry (variables.OUTPUT_LAYERS) lists the layers; _evaluate_block returns them in this order.
SEASONAL_LAYERS = layer_names(SEASONAL)
MONTHLY_LAYERS = layer_names(DATACUBE)
#: Layers from the parameter draws; the paired ones (``compares`` set) need the baseline's draws too.
UNCERTAINTY_LAYERS = layer_names(UNCERTAINTY)
PAIRED_LAYERS = tuple(n for n in UNCERTAINTY_LAYERS if OUTPUT_LAYERS[n].compares is not None)
_BASELINE_PREFIX = "baseline:"
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
    draws: the parameter draws (config ``uncertainty``), each a pair of sorted (key, value) tuples of C3 and
        C4 parameters (hashable); empty: no uncertainty layers.
    baseline: the baseline scenario's settings when the draws are paired with the baseline's (the
        scenario's change under uncertainty); None otherwise.
    growth_temperature: "month_mean" (C3 leaves acclimated to the cell's mean air temperature of the month,
        Kattge & Knorr 2007) or "parameter_set" (the C3 set's own ``growth_temperature_c`` everywhere).
    crossover: solve the canopy crossover per cell and month (:func:`canopy_crossover`); False leaves the
        crossover layers NaN.
    monthly_layers: return the monthly layers (the datacube's) and solve the crossover for every season
        month; False: no monthly layers, and the crossover only for each cell's warmest season month, all
        that ``crossover_temperature`` needs (the search then costs about a twelfth).
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
    draws: tuple = ()
    baseline: ScenarioSettings | None = None
    growth_temperature: str = "month_mean"
    crossover: bool = True
    monthly_layers: bool = True

    def draw_params(self):
        """The draws as (C3 parameters, C4 parameters) dicts."""
        return [(dict(c3), dict(c4)) for c3, c4 in self.draws]


def uncertainty_layer_names(settings: ModelSettings) -> tuple[str, ...]:
    """The uncertainty layers the model returns for ``settings`` (none without draws; the paired ones
    only with a baseline to pair with)."""
    if not settings.draws:
        return ()
    return tuple(n for n in UNCERTAINTY_LAYERS if settings.baseline is not None or n not in PAIRED_LAYERS)


def _n_monthly(settings: ModelSettings) -> int:
    """Rows of the monthly layers in a block's stacked result (12 per layer, or none)."""
    return 12 * len(MONTHLY_LAYERS) if settings.monthly_layers else 0


def _n_stacked(settings: ModelSettings) -> int:
    return len(SEASONAL_LAYERS) + _n_monthly(settings) + len(uncertainty_layer_names(settings))


#: The calendar months (0 = January) of a block's monthly arrays, when it holds the whole year.
ALL_MONTHS = np.arange(12)
#: Monthly mean temperatures [°C] searched for the canopy crossover (widened to include the month's own).
CROSSOVER_SEARCH_C = (0.0, 45.0)
#: Largest shifted daily maximum and smallest daily minimum [°C] the crossover search uses: the leaf
#: models' valid range (atmosphere.TEMPERATURE_RANGE_C) less the 0.5 °C of the hourly course's rounding.
_SHIFT_TMAX_C, _SHIFT_TMIN_C = atmosphere.TEMPERATURE_RANGE_C[1] - 0.5, atmosphere.TEMPERATURE_RANGE_C[0] + 0.5


def evaluate(
    dataset: xr.Dataset,
    scenario: Any = None,
    *,
    physiology: Any = None,
    season: Any = None,
    classes: Any = None,
    scenario_layers: xr.Dataset | None = None,
    engine: str | None = None,
    uncertainty: Any = None,
    baseline: Any = None,
    baseline_layers: xr.Dataset | None = None,
    monthly_layers: bool = True,
) -> xr.Dataset:
    """Evaluate both pathways on a climate dataset and return every per-scenario output layer.

    dataset: monthly layers with dims (month, y, x) (month = 1..12): ``tmin`` and ``tmax`` (or ``tmean``)
        [°C], ``shortwave`` [MJ m-2 d-1] or ``par`` [mol m-2 d-1], ``water_availability`` [0-1], optional
        ``vpd`` [kPa] or ``humidity`` [0-1]; static (y, x): ``latitude`` [degrees north] (data variable or
        coordinate), optional ``elevation`` [m] (sea level if absent) and ``lai`` [m2 m-2]. numpy- or
        dask-backed; dask input stays lazy.
    scenario: a config scenario, a mapping (co2_ppm, o2_percent, temperature_offset_c, shortwave_factor,
        water_availability_factor) or None (420 ppm, present climate).
    physiology: config ``physiology`` section or mapping {"c3": {...}, "c4": {...}, "lai": ...,
        "growth_temperature": "month_mean" | "parameter_set", "crossover_temperature": bool}.
    season: config ``season`` section or mapping {"months": [...]} / {"min_mean_temperature_c": t}.
    classes: config ``classes`` section or mapping {"contested_margin": m}.
    engine: "compiled" or "numpy" (the pipeline passes the config's ``compute.engine``); None = "compiled".
    uncertainty: config ``uncertainty`` section or mapping {"draws": n, "seed": s, "method": ...}, or None.
        With it the result also holds the uncertainty layers of the registry: the model runs once per
        parameter draw on the same inputs (:mod:`suitability.physiology.uncertainty`).
    baseline, baseline_layers: the baseline scenario (and its own layers) to pair the draws with, for the
        paired layers (``towards_c4_probability``, ``class_change_probability``); only with ``uncertainty``.
    monthly_layers: False (the pipeline without a datacube) leaves the monthly layers out of the result
        and solves the canopy crossover for the warmest season month only (``ModelSettings``).

    Returns a Dataset with the layers of ``SEASONAL_LAYERS`` (y, x) and ``MONTHLY_LAYERS`` (month, y, x; only
    with ``monthly_layers``),
    assimilation in g C m-2 per season or month; ``pathway_class`` is uint8 with 255 as nodata.
    """
    run = ModelRun(scenario, scenario_layers, uncertainty, baseline, baseline_layers)
    return evaluate_runs(dataset, [run], physiology=physiology, season=season, classes=classes, engine=engine,
                         monthly_layers=monthly_layers)[0]


@dataclass(frozen=True)
class ModelRun:
    """One evaluation of :func:`evaluate_runs`: a scenario, its own layers and the parameter draws' arguments
    (each as the argument of the same name of :func:`evaluate`)."""

    scenario: Any = None
    scenario_layers: xr.Dataset | None = None
    uncertainty: Any = None
    baseline: Any = None
    baseline_layers: xr.Dataset | None = None


def evaluate_runs(dataset: xr.Dataset, runs: Sequence[ModelRun], *, physiology: Any = None, season: Any = None,
                  classes: Any = None, engine: str | None = None, monthly_layers: bool = True,
                  threads_per_block: int = 1) -> list[xr.Dataset]:
    """:func:`evaluate` for several runs (scenarios, ensemble members) on the same climate ``dataset``, one
    result per run. On dask data all runs share one task per block of cells, which reads and resamples the
    block of ``dataset`` once and of each run's own layers once, and then evaluates the runs one after the
    other: computed together (one dask pass), the runs cost their model work and little more.
    threads_per_block: threads each block's task uses (its inputs' layers read at once, each run's model in
    as many stripes of rows); more than 1 only where a region has fewer blocks than threads, whose other
    threads would otherwise wait. The model works cell by cell, so stripes give the same values.
    """
    prepared = []
    for run in runs:
        settings = model_settings(run.scenario, physiology=physiology, season=season, classes=classes, engine=engine,
                                  uncertainty=run.uncertainty, baseline=run.baseline, monthly_layers=monthly_layers)
        names, arrays, climate = model_arrays(dataset, settings.scenario, run.scenario_layers, physiology)
        prepared.append((settings, names, arrays, climate))
    spatial_dims = prepared[0][3]["latitude"].dims
    lazy = any(isinstance(a, dask.array.Array) for _, _, arrays, _ in prepared for a in arrays)
    if lazy:
        stacked = _shared_blocks(dataset, runs, [settings for settings, *_ in prepared], physiology, threads_per_block)
    results, first = [], 0
    for run, (settings, names, arrays, climate) in zip(runs, prepared):
        if lazy:
            block = stacked[first:first + _n_stacked(settings)]
            first += _n_stacked(settings)
        else:
            block = _evaluate_run(dataset, settings, run.scenario_layers, run.baseline_layers, physiology,
                                  inputs=(names, arrays))
        coords = {k: v for k, v in climate["latitude"].coords.items() if set(v.dims) <= set(spatial_dims)}
        result = _unstack(xr.DataArray(block, dims=("layer",) + spatial_dims, coords=coords), settings)
        if "derived_water_availability" in climate and monthly_layers:  # the registry's "derived" layer
            result["derived_water_availability"] = climate["derived_water_availability"]
        results.append(result)
    return results


def _shared_blocks(dataset: xr.Dataset, runs: Sequence[ModelRun], settings: Sequence[ModelSettings], physiology,
                   threads: int = 1):
    """The stacked results of every run, (sum of the runs' layers, *spatial) float32, one task per block.

    Each output block is ONE task that computes its own input blocks (a few small tasks: read, resample)
    and then the model of every run (:func:`_evaluate_runs_block`). Left as separate tasks, the input
    blocks hang off shared roots (e.g. a coarse climate raster read as one chunk, needed by every block),
    and dask's schedulers then resample the inputs of every block of the region ahead of the model and
    hold them all in memory (measured: peak memory growing with the region, 2.6 GB for 3072² cells).
    Embedded, a block's inputs exist only while its task runs, so memory stays bounded by the blocks in
    flight; and the runs of a scenario set share the block's reading and resampling.
    """
    sources = [with_latitude(dataset)]  # the climate, then each distinct own-layers dataset of the runs
    own_index = []
    for run in runs:
        indices = []
        for own in (run.scenario_layers, run.baseline_layers):
            if own is None:
                indices.append(None)
                continue
            found = next((i for i, known in enumerate(sources) if known is own), None)
            if found is None:
                sources.append(own)
                found = len(sources) - 1
            indices.append(found)
        own_index.append(tuple(indices))
    spatial_dims = sources[0]["latitude"].dims
    layouts, arrays = zip(*(_BlockLayout.of(source, spatial_dims) for source in sources))
    spatial_chunks = next(a.chunks[-len(spatial_dims):] for source in arrays for a in source
                          if isinstance(a, dask.array.Array))
    n_spatial = len(spatial_dims)
    aligned = [[dask.array.asarray(a).rechunk(dask.array.asarray(a).chunks[:-n_spatial] + spatial_chunks)
                for a in source] for source in arrays]
    options = InputOptions.of(physiology)
    plan = tuple(zip(settings, own_index))
    name = "evaluate-" + dask.base.tokenize(aligned, layouts, plan, options, threads)
    graph = {}
    for index in itertools.product(*(range(len(c)) for c in spatial_chunks)):
        blocks = tuple(tuple(a.blocks[(0,) * (a.ndim - n_spatial) + index] for a in arrays) for arrays in aligned)
        graph[(name, 0) + index] = (_evaluate_runs_block, _BlockInputs(blocks), tuple(layouts), plan, options, threads)
    n_layers = sum(_n_stacked(s) for s in settings)
    return dask.array.Array(graph, name, chunks=((n_layers,),) + spatial_chunks, dtype=np.float32,
                            meta=np.empty((0,) * (n_spatial + 1), np.float32))


@dataclass(frozen=True)
class _BlockInputs:
    """The input blocks of one output block, per source, as small dask arrays (opaque to the outer graph)."""

    arrays: tuple


@dataclass(frozen=True)
class _BlockLayout:
    """How to rebuild one source dataset from its blocks: variable names, dims and the month labels."""

    names: tuple
    dims: tuple
    months: tuple | None

    @classmethod
    def of(cls, source: xr.Dataset, spatial_dims) -> tuple["_BlockLayout", tuple]:
        """The layout of ``source`` and its arrays in that order (months first, then ``spatial_dims``)."""
        names, dims, arrays = [], [], []
        for name, layer in source.data_vars.items():
            order = (("month",) if "month" in layer.dims else ()) + tuple(spatial_dims)
            names.append(name)
            dims.append(order)
            arrays.append(layer.transpose(*order).data)
        months = tuple(int(m) for m in source["month"].values) if "month" in source.coords else None
        return cls(tuple(names), tuple(dims), months), tuple(arrays)

    def dataset(self, values) -> xr.Dataset:
        coords = {"month": list(self.months)} if self.months is not None else {}
        return xr.Dataset({n: (d, v) for n, d, v in zip(self.names, self.dims, values)}, coords=coords)


def _evaluate_run(climate: xr.Dataset, settings: ModelSettings, own, base_own, physiology, inputs=None) -> np.ndarray:
    """One run on in-memory ``climate``: its inputs under its scenario (``inputs``, (names, arrays), if
    already made) and under the baseline, for the draws paired with the baseline's; then :func:`_evaluate_block`."""
    names, arrays = inputs if inputs is not None else model_arrays(climate, settings.scenario, own, physiology)[:2]
    if settings.baseline is not None:
        base_names, base_arrays, _ = model_arrays(climate, settings.baseline, base_own, physiology)
        names = names + tuple(_BASELINE_PREFIX + n for n in base_names)
        arrays = arrays + base_arrays
    return _evaluate_block(*arrays, names=names, settings=settings)


def _evaluate_runs_block(inputs: _BlockInputs, layouts, plan, options: InputOptions, threads: int = 1) -> np.ndarray:
    """One block of every run: the climate's block read and resampled once, each own-layers dataset's when
    the first run needing it comes (and released after the last), then each run's model; on ``threads``
    threads (:func:`evaluate_runs`)."""
    if threads > 1:
        with ThreadPoolExecutor(threads, thread_name_prefix="block") as pool:
            return _runs_of_block(inputs, layouts, plan, options, threads, pool)
    return _runs_of_block(inputs, layouts, plan, options, 1, None)


def _runs_of_block(inputs: _BlockInputs, layouts, plan, options: InputOptions, threads: int, pool) -> np.ndarray:
    scheduler = {"scheduler": "threads", "num_workers": threads} if threads > 1 else {"scheduler": "sync"}
    (climate_values,) = dask.compute(inputs.arrays[0], **scheduler)
    climate = layouts[0].dataset(climate_values)
    last_use = {}
    for i, (_, own) in enumerate(plan):
        for index in own:
            if index is not None:
                last_use[index] = i
    owned: dict[int, xr.Dataset] = {}
    out = []
    for i, (settings, (own, base_own)) in enumerate(plan):
        for index in (own, base_own):
            if index is not None and index not in owned:
                (values,) = dask.compute(inputs.arrays[index], **scheduler)
                owned[index] = layouts[index].dataset(values)
        out.append(_in_stripes(climate, settings, owned.get(own), owned.get(base_own), options, pool, threads))
        for index in [k for k, last in last_use.items() if last == i]:
            owned.pop(index, None)
    return np.concatenate(out, axis=0)


def _in_stripes(climate: xr.Dataset, settings: ModelSettings, own, base_own, options, pool, stripes: int) -> np.ndarray:
    """:func:`_evaluate_run` on ``stripes`` stripes of rows at once (on ``pool``), joined; the whole block
    at once if ``stripes`` is 1."""
    if stripes <= 1 or pool is None:
        return _evaluate_run(climate, settings, own, base_own, options)
    rows = climate["latitude"].dims[0]
    edges = np.linspace(0, climate.sizes[rows], stripes + 1).round().astype(int)
    # Each stripe gets its own copies, cut here: pandas indexes are not safe to first use from several
    # threads at once (seen: a spurious "uniquely valued Index" error).
    parts = [[None if data is None else data.isel({rows: slice(int(a), int(b))}).copy(deep=True)
              for data in (climate, own, base_own)] for a, b in zip(edges[:-1], edges[1:]) if b > a]
    values = pool.map(lambda part: _evaluate_run(part[0], settings, part[1], part[2], options), parts)
    return np.concatenate(list(values), axis=1)  # (layers, rows, columns)


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


def model_settings(scenario: Any = None, *, physiology: Any = None, season: Any = None, classes: Any = None,
                   engine: str | None = None, uncertainty: Any = None, baseline: Any = None,
                   monthly_layers: bool = True) -> ModelSettings:
    """Collect the model's settings from config sections or plain mappings (see :func:`evaluate`).

    The parameter draws are made here, once, from the parameter sets and the seed alone, so every block
    of cells (whatever the chunk size or scheduler) and every scenario gets the same draws.
    """
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
    draws: tuple = ()
    if uncertainty is not None:
        pairs = parameter_uncertainty.draw_parameters(
            c3_params, c4_params, int(_get(uncertainty, "draws", 0)), int(_get(uncertainty, "seed", 0)),
            _get(uncertainty, "method", "latin_hypercube"))
        draws = tuple((tuple(sorted(c3.items())), tuple(sorted(c4.items()))) for c3, c4 in pairs)
    elif baseline is not None:
        raise ValueError("baseline: pairing with the baseline is for the parameter draws; give uncertainty too")
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
        draws=draws,
        baseline=ScenarioSettings.from_any(baseline) if baseline is not None else None,
        growth_temperature=str(_get(physiology, "growth_temperature", "month_mean")),
        crossover=bool(_get(physiology, "crossover_temperature", True)),
        monthly_layers=bool(monthly_layers),
    )


def _evaluate_block(*arrays: np.ndarray, names: Sequence[str], settings: ModelSettings) -> np.ndarray:
    """Evaluate one block of cells. Monthly arrays arrive as (12, ...), static ones as (...).

    Returns (n_layers, ...) float32: the seasonal layers, then 12 monthly C3 and 12 monthly C4 totals, then
    the uncertainty layers (:func:`uncertainty_layer_names`).
    """
    data = dict(zip(names, arrays))
    base = {n[len(_BASELINE_PREFIX):]: v for n, v in data.items() if n.startswith(_BASELINE_PREFIX)}
    data = {n: v for n, v in data.items() if not n.startswith(_BASELINE_PREFIX)}
    block = _Block.of(data, settings)
    data, shape, in_season, valid = block.data, block.shape, block.in_season, block.valid
    monthly, c3_gross, c3_photorespiration = _months(block, settings)
    season_c3, season_c4, nodata = _season_totals(block, monthly)
    has_season = block.has_season
    advantage = indicators.advantage_index(season_c3, season_c4)
    classes = indicators.with_growing_season(indicators.pathway_class(advantage, settings.contested_margin),
                                             valid, has_season)
    # Month last, as the kernel returns them: contiguous, and shared by the month count and the crossover.
    monthly_advantage = indicators.advantage_index(monthly["C3"], monthly["C4"])
    months_favoured = indicators.favoured_month_count(monthly_advantage, in_season, settings.contested_margin, axis=-1)
    share = indicators.photorespiration_share(c3_gross, c3_photorespiration)
    month_mean = month_mean_temperature(data)
    if settings.crossover:
        monthly_crossover = canopy_crossover(block, settings, _crossover_months(block, settings, month_mean),
                                             monthly_advantage, month_mean)
    else:
        monthly_crossover = np.full(in_season.shape, np.nan)
    crossover = indicators.warmest_month_value(monthly_crossover, month_mean, in_season)
    seasonal = {"c3_assimilation": season_c3, "c4_assimilation": season_c4, "pathway_advantage": advantage,
                "pathway_class": classes, "c4_favoured_months": months_favoured,
                "growing_season_months": indicators.growing_season_months(np.moveaxis(in_season, -1, 0), valid),
                "photorespiration_share": share, "crossover_temperature": crossover}
    out = np.empty((_n_stacked(settings),) + shape, np.float32)
    for i, name in enumerate(SEASONAL_LAYERS):
        values = np.asarray(seasonal[name], dtype=np.float64)
        if not OUTPUT_LAYERS[name].categorical and name != "growing_season_months":
            values = np.where(nodata, np.nan, values)
        out[i] = values
    first = len(SEASONAL_LAYERS)
    by_month = {"c3_monthly_assimilation": monthly["C3"], "c4_monthly_assimilation": monthly["C4"],
                "monthly_crossover_temperature": monthly_crossover}
    for j, name in enumerate(MONTHLY_LAYERS if settings.monthly_layers else ()):
        out[first + 12 * j:first + 12 * (j + 1)] = np.moveaxis(np.where(valid[..., None], by_month[name], np.nan), -1, 0)
    if settings.draws:
        base_block = _Block.of(base, settings, settings.baseline) if settings.baseline is not None else None
        layers = _uncertainty_layers(block, base_block, settings)
        first = len(SEASONAL_LAYERS) + _n_monthly(settings)
        for i, name in enumerate(uncertainty_layer_names(settings)):
            out[first + i] = layers[name]
    return out


@dataclass
class _Block:
    """One block of cells under one scenario: inputs (months last) and every parameter-independent term.

    growth: the C3 growth temperature per cell and month [°C] (:func:`growth_temperature`), or None.
    """

    data: dict
    shape: tuple
    scenario: ScenarioSettings
    in_season: np.ndarray
    has_season: np.ndarray
    valid: np.ndarray
    elevation: np.ndarray
    lai: np.ndarray
    growth: np.ndarray | None = None
    kernel_inputs: dict | None = None
    #: The calendar months (0-11) of the monthly arrays' last axis: all 12, or some (the crossover's).
    months: np.ndarray = field(default_factory=lambda: ALL_MONTHS)

    @classmethod
    def of(cls, data: dict, settings: ModelSettings, scenario: ScenarioSettings | None = None) -> "_Block":
        """The block of the model's inputs as dask hands them over (monthly arrays as (12, ...))."""
        shape = data["latitude"].shape
        data = {name: np.moveaxis(values, 0, -1) if values.ndim == len(shape) + 1 else values
                for name, values in data.items()}  # months last inside: (..., 12)
        return cls.months_last(data, settings, _season_mask(data, settings, shape), scenario)

    @classmethod
    def months_last(cls, data: dict, settings: ModelSettings, in_season: np.ndarray,
                    scenario: ScenarioSettings | None = None, months: np.ndarray | None = None) -> "_Block":
        """The block of inputs already months last, with the months to compute given; ``months``: the
        calendar months (0-11) of the last axis, if not all 12."""
        shape = data["latitude"].shape
        block = cls(data=data, shape=shape, in_season=in_season, has_season=in_season.any(axis=-1),
                    valid=_valid_cells(data), elevation=data.get("elevation", np.zeros(shape, np.float32)),
                    lai=data.get("lai", np.full(shape, settings.lai, np.float32)),
                    scenario=scenario or settings.scenario, growth=growth_temperature(data, settings),
                    months=ALL_MONTHS if months is None else np.asarray(months))
        if settings.engine == "compiled":
            block.kernel_inputs = _kernel_inputs(block, settings)
        return block


def _months(block: _Block, settings: ModelSettings, c3_params: Any = None, c4_params: Any = None):
    """Monthly nets per pathway, season C3 gross and photorespiration of a block, by the settings' engine,
    with the settings' parameters or the given ones (a draw)."""
    c3_params = settings.c3_params if c3_params is None else c3_params
    c4_params = settings.c4_params if c4_params is None else c4_params
    if settings.engine == "compiled":
        return _compiled_months(block, settings, c3_params, c4_params)
    return _numpy_months(block.data, settings, block.in_season, block.elevation, block.lai,
                         block.scenario, c3_params, c4_params, block.growth, block.months)


def _season_totals(block: _Block, monthly):
    """Season totals of C3 and C4 [g C m-2] (NaN where nodata) and the nodata mask."""
    season_c3 = np.where(block.in_season, monthly["C3"], 0.0).sum(axis=-1)
    season_c4 = np.where(block.in_season, monthly["C4"], 0.0).sum(axis=-1)
    nodata = ~block.valid | ~block.has_season | np.isnan(season_c3) | np.isnan(season_c4)
    return np.where(nodata, np.nan, season_c3), np.where(nodata, np.nan, season_c4), nodata


def draw_advantages(block: _Block, settings: ModelSettings) -> np.ndarray:
    """(draws, ...) float32 advantage index of every parameter draw: the kernel runs once per draw on the
    block's shared inputs; everything else (season, validity, inputs) is the block's."""
    out = np.empty((len(settings.draws),) + block.shape, np.float32)
    for i, (c3_params, c4_params) in enumerate(settings.draw_params()):
        monthly, _, _ = _months(block, settings, c3_params, c4_params)
        season_c3, season_c4, _ = _season_totals(block, monthly)
        out[i] = indicators.advantage_index(season_c3, season_c4)
    return out


def _uncertainty_layers(block: _Block, base_block: _Block | None, settings: ModelSettings) -> dict[str, np.ndarray]:
    margin = settings.contested_margin
    draws = draw_advantages(block, settings)
    p_c4 = indicators.favoured_probability(draws, margin, "C4")
    p_c3 = indicators.favoured_probability(draws, margin, "C3")
    p05, p50, p95 = indicators.advantage_quantiles(draws, (0.05, 0.5, 0.95))
    layers = {"c4_advantage_probability": p_c4, "c3_advantage_probability": p_c3, "advantage_p05": p05,
              "advantage_p50": p50, "advantage_p95": p95,
              "confidence_class": indicators.confidence_class(p_c3, p_c4)}
    if base_block is not None:
        base_draws = draw_advantages(base_block, settings)
        layers["towards_c4_probability"] = indicators.towards_c4_probability(base_draws, draws)
        layers["class_change_probability"] = indicators.class_change_probability(base_draws, draws, margin)
    return layers


def _crossover_months(block: _Block, settings: ModelSettings, month_mean: np.ndarray) -> np.ndarray:
    """The months (bool (..., 12)) whose canopy crossover is solved: every season month of the valid cells,
    or with ``settings.monthly_layers`` False only the warmest one (the seasonal layer's month)."""
    months = block.in_season & block.valid[..., None]
    if settings.monthly_layers:
        return months
    warmest, has = indicators.warmest_season_month(month_mean, block.in_season)
    return months & (np.arange(12) == warmest[..., None]) & has[..., None]


def month_mean_temperature(data) -> np.ndarray:
    """The monthly mean air temperature (Tmin + Tmax)/2 [°C], (..., 12) float64, as the season rule uses it."""
    return 0.5 * (np.asarray(data["tmin"], np.float64) + np.asarray(data["tmax"], np.float64))


def growth_temperature(data, settings: ModelSettings):
    """The C3 leaves' growth temperature [°C] per cell and month, or None for the parameter set's own.

    "month_mean": the month's mean air temperature (Tmin + Tmax)/2, float32 as the inputs. Kattge & Knorr
    (2007) took the mean air temperature of the 30 days before a measurement (from memory); a monthly
    climatology's own month stands for it (the representative day is the 15th, so half of its 30 days
    are in the month before: a lag this ignores).
    """
    if settings.growth_temperature == "parameter_set":
        return None
    return (0.5 * (data["tmin"] + data["tmax"])).astype(np.float32)


def canopy_crossover(block: _Block, settings: ModelSettings, months, monthly_advantage, month_mean) -> np.ndarray:
    """The canopy crossover [°C] of every cell and month of ``months`` (bool (..., 12)); NaN elsewhere.

    The monthly mean temperature at which the month's advantage index of the two daily canopies
    (:func:`indicators.advantage_index`) equals the class margin ``settings.contested_margin``, i.e. the
    edge of "C4 favoured" as :func:`indicators.c4_favoured_months` counts it, solved with the same engine
    and inputs as the model pass: the daily minimum and maximum shifted together (the daily range kept),
    the C3 growth temperature following the month mean when it is "month_mean", and the cell's radiation,
    day length, air pressure, water availability, humidity input (VPD or relative humidity held; the
    vapour pressure from Tmin follows Tmin) and CO2 unchanged. The tie nearest the month's own mean on the
    side its own result points to (:mod:`suitability.tie_solver`): a month is C4-favoured exactly when its
    mean temperature is above its crossover. −inf: C4 favoured at every mean temperature down to the
    lower end of :data:`CROSSOVER_SEARCH_C` (or the month's own, if colder); +inf: not C4-favoured at any
    up to the upper end (or where the shifted day leaves the leaf models' temperature range).
    ``monthly_advantage``: the model pass's advantage index of every month (..., 12); ``month_mean``: the
    block's :func:`month_mean_temperature`.
    """
    data = block.data
    shape = months.shape
    n = int(np.prod(shape[:-1], dtype=np.int64))
    flat = {name: (values.reshape(n, 12) if values.ndim == len(shape) else values.reshape(n))
            for name, values in data.items()}
    start = np.where(months, monthly_advantage - settings.contested_margin, np.nan).reshape(n, 12)
    # The solver works on the searched (cell, month) pairs only: one month per cell without a datacube.
    cells, pair_months = np.nonzero(np.isfinite(start))
    mean = month_mean.reshape(n, 12)
    result = np.full((n, 12), np.nan, np.float32)
    for first in range(0, cells.size, CROSSOVER_BATCH_PAIRS):
        pairs = slice(first, first + CROSSOVER_BATCH_PAIRS)
        cell, month = cells[pairs], pair_months[pairs]
        result[cell, month] = _crossover_of_pairs(flat, settings, block.scenario, cell, month,
                                                  start[cell, month], mean[cell, month])
    return result.reshape(shape)


#: (cell, month) pairs solved together by :func:`canopy_crossover`: bounds the memory of the solver's
#: arrays (about 20 float64 numbers per pair) and of each model pass's one-month inputs; large, since
#: every pass makes one engine call per calendar month among the batch's pairs.
CROSSOVER_BATCH_PAIRS = 12 * 16384


def _crossover_of_pairs(flat, settings: ModelSettings, scenario: ScenarioSettings, cells, months, start,
                        mean) -> np.ndarray:
    """:func:`canopy_crossover` of the pairs (``cells``, ``months``) given g at offset 0 (``start``) and the
    pairs' month means."""
    margin = settings.contested_margin
    lower = np.maximum(np.minimum(CROSSOVER_SEARCH_C[0], mean) - mean, _SHIFT_TMIN_C - flat["tmin"][cells, months])
    upper = np.minimum(np.maximum(CROSSOVER_SEARCH_C[1], mean) - mean, _SHIFT_TMAX_C - flat["tmax"][cells, months])

    def excess(offsets, active):
        # Month by month: each model pass computes one calendar month.
        g = np.full(cells.size, np.nan)
        for month in np.unique(months[active]):
            picked = np.flatnonzero(active & (months == month))
            rows = cells[picked]
            # That month's inputs only, (cells, 1): the engines then compute it and nothing else.
            sub = {name: values[rows, month:month + 1] if values.ndim == 2 else values[rows]
                   for name, values in flat.items()}
            shift = offsets[picked].astype(np.float32)[:, None]
            sub["tmin"] = sub["tmin"] + shift
            sub["tmax"] = sub["tmax"] + shift
            block = _Block.months_last(sub, settings, np.ones((rows.size, 1), bool), scenario, months=[month])
            with np.errstate(all="ignore"):
                nets, _, _ = _months(block, settings)
            g[picked] = indicators.advantage_index(nets["C3"][:, 0], nets["C4"][:, 0]) - margin
        return g

    offset = tie_solver.nearest_tie(excess, start, np.minimum(lower, 0.0), np.maximum(upper, 0.0))
    return side_consistent(mean + offset, mean, start > 0)


def side_consistent(crossover, mean, favoured) -> np.ndarray:
    """The crossover as float32, moved by at most one float32 step so that, compared in float64,
    ``mean > crossover`` exactly where ``favoured`` (rounding of a tie that lies within a float32 step of
    the month's mean; NaN and ±inf unchanged)."""
    value = np.asarray(crossover, np.float32)
    with np.errstate(invalid="ignore"):
        value = np.where(favoured & (value >= mean), np.nextafter(value, np.float32(-np.inf)), value)
        value = np.where(~favoured & (value < mean), np.nextafter(value, np.float32(np.inf)), value)
    return value.astype(np.float32)


def _numpy_months(data, settings: ModelSettings, in_season, elevation, lai, scenario=None, c3_params=None,
                  c4_params=None, growth=None, months=None):
    """Monthly net totals per pathway [g C m-2], season C3 gross and photorespiration, by the numpy physiology
    (``months``: the calendar months of the last axis, all 12 if None)."""
    months = ALL_MONTHS if months is None else months
    shape = in_season.shape[:-1]
    scenario = settings.scenario if scenario is None else scenario
    c3_params = settings.c3_params if c3_params is None else c3_params
    c4_params = settings.c4_params if c4_params is None else c4_params
    monthly = {p: np.full(shape + (len(months),), np.nan, np.float64) for p in ("C3", "C4")}
    c3_gross = np.zeros(shape, np.float64)
    c3_photorespiration = np.zeros(shape, np.float64)
    for index, month in enumerate(months):
        if not in_season[..., index].any():
            continue
        month_inputs = _month_inputs(data, index)
        for pathway, params in (("C3", c3_params), ("C4", c4_params)):
            with np.errstate(all="ignore"):
                day = daily_canopy_assimilation(
                    pathway,
                    day_of_year=int(REPRESENTATIVE_DAY[month]),
                    latitude_deg=data["latitude"],
                    co2_ppm=scenario.co2_ppm,
                    o2_percent=scenario.o2_percent,
                    elevation_m=elevation,
                    lai=lai,
                    params=params,
                    max_water_supply_mm=settings.max_water_supply_mm,
                    growth_temperature_c=None if growth is None else growth[..., index],
                    **month_inputs,
                )
            monthly[pathway][..., index] = np.asarray(day.net) * DAYS_IN_MONTH[month]
            if pathway == "C3":
                season_weight = np.where(in_season[..., index], DAYS_IN_MONTH[month], 0.0)
                c3_gross += np.asarray(day.gross) * season_weight
                c3_photorespiration += np.asarray(day.photorespiration) * season_weight
    for pathway in monthly:
        monthly[pathway] = np.where(in_season, monthly[pathway], np.nan)  # NaN = month not in the season
    return monthly, c3_gross, c3_photorespiration


def _compiled_months(block: _Block, settings: ModelSettings, c3_params: Any, c4_params: Any):
    """The same three results as :func:`_numpy_months`, by the compiled kernel (:mod:`suitability.kernel`)."""
    day = kernel.season_canopy_assimilation(**block.kernel_inputs, c3_params=c3_params, c4_params=c4_params)
    days = DAYS_IN_MONTH[block.months]
    monthly = {"C3": day.c3_net * days, "C4": day.c4_net * days}
    return monthly, day.c3_gross_total, day.c3_photorespiration_total


def _kernel_inputs(block: _Block, settings: ModelSettings) -> dict:
    """The kernel's arguments except the parameters, once per block: C-contiguous float32 arrays, so that
    each draw's kernel call reuses them without a copy."""
    data, in_season, elevation, lai = block.data, block.in_season, block.elevation, block.lai
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
    contiguous = functools.partial(np.require, dtype=np.float32, requirements=["C", "A", "W"])
    return dict(
        tmin_c=contiguous(data["tmin"]), tmax_c=contiguous(data["tmax"]), shortwave_mj=contiguous(shortwave),
        water_availability=contiguous(data["water_availability"]), latitude_deg=contiguous(data["latitude"]),
        day_of_year=REPRESENTATIVE_DAY[block.months], co2_ppm=block.scenario.co2_ppm, o2_percent=block.scenario.o2_percent,
        elevation_m=contiguous(elevation), lai=contiguous(lai), in_season=np.require(in_season, np.bool_, ["C", "A", "W"]),
        days_in_month=DAYS_IN_MONTH[block.months], max_water_supply_mm=settings.max_water_supply_mm,
        **{k: contiguous(v) for k, v in humidity.items()},
        growth_temperature_c=None if block.growth is None else contiguous(block.growth),
    )


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
    seasonal = list(enumerate(SEASONAL_LAYERS))
    first = len(SEASONAL_LAYERS) + _n_monthly(settings)
    seasonal += [(first + i, name) for i, name in enumerate(uncertainty_layer_names(settings))]
    for i, name in seasonal:
        layer = stacked.isel(layer=i)
        if OUTPUT_LAYERS[name].categorical:
            layer = layer.fillna(CLASS_NODATA).astype(np.uint8)
        layers[name] = layer
    first = len(SEASONAL_LAYERS)
    for j, name in enumerate(MONTHLY_LAYERS if settings.monthly_layers else ()):
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


