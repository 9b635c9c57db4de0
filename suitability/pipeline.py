"""The whole run, in order: config -> inputs -> scenarios -> model -> indicators -> outputs -> reports.

This is the only module that knows the order. Each step is a call into the module that owns it:
provenance (manifest, checksums, tags) in :mod:`suitability.provenance`, resume records and hashes in
:mod:`suitability.resume`, the output layers in the registry :data:`suitability.variables.OUTPUT_LAYERS`.
"""

from __future__ import annotations

import gc
import os
import time
import warnings
from contextlib import contextmanager
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import xarray as xr

from . import indicators
from ._version import __version__
from .assumptions import run_assumptions
from .caution import CAUTION
from .config import ComputeConfig, RunConfig, load_config, validate_section
from .errors import ConfigError, InputDataError, OutputError
from .grid import TargetGrid
from .inputs import load_climate, load_mask
from .inputs.cf import one_handle_per_file
from .inputs.readers import member_labels
from .model import ModelRun, evaluate_runs
from .outputs import (LayerWrite, check_output_folder, dictionary_path, remove_leftovers, with_sidecars, write_csv,
                      write_data_dictionary, write_manifest, write_together)
from .provenance import (MANIFEST_NAME, SUMMARY_COLUMNS, build_manifest, class_summary, input_checksums, input_files,
                         scenario_tags)
from .resume import PROGRESS_NAME, record_paths, scenario_hash, scenario_record, verified_records, write_progress
from .runlock import RunLock
from .runtime import compute_context
from .variables import (
    CHANGE,
    DATACUBE,
    DERIVED,
    ENSEMBLE,
    INPUT_VARIABLES,
    OUTPUT_LAYERS,
    SEASONAL,
    UNCERTAINTY,
    layer_names,
)

SUMMARY_NAME = "class_summary.csv"
#: Sub-folder of a scenario's folder holding each member's layers (``output.member_outputs``).
MEMBERS_FOLDER = "members"
DATACUBE_NAME = "monthly_assimilation.nc"


@dataclass
class RunResult:
    """What :func:`run` produced.

    output_folder: the run's output folder. scenario_folders: scenario name -> its folder.
    layers: scenario name -> {layer name -> COG path}. summary: class shares per scenario (one row per
    scenario: share of valid cells in each class, in percent, and the valid cell count).
    manifest_path / manifest: the run manifest (config, inputs with checksums, versions, timings, outputs).
    briefs: brief file paths (empty without a ``brief`` section). caution: the text every output carries.
    resumed: names of the scenarios not recomputed because ``resume`` found their outputs up to date.
    assumptions: the defaults the run relied on, in words (:func:`suitability.assumptions.run_assumptions`),
    also in ``manifest["assumptions"]``.
    """

    output_folder: Path
    scenario_folders: dict[str, Path]
    layers: dict[str, dict[str, Path]]
    summary: pd.DataFrame
    manifest_path: Path
    manifest: dict[str, Any]
    briefs: dict[str, Path] = field(default_factory=dict)
    caution: str = CAUTION
    resumed: list[str] = field(default_factory=list)
    assumptions: list[str] = field(default_factory=list)


def run(
    config: RunConfig | str | Path,
    *,
    overwrite: bool | None = None,
    resume: bool = False,
    scheduler: str | None = None,
    workers: int | None = None,
    memory_limit: str | None = None,
    progress: bool = False,
) -> RunResult:
    """Run every scenario of ``config`` (a RunConfig or a path to a YAML file) and write its outputs.

    overwrite, scheduler, workers, memory_limit override the config's values when given.
    resume: skip the scenarios whose outputs exist and match what the manifest (or the progress record of
        an interrupted run) recorded for them, with the same scenario hash (config and input files, see
        :func:`suitability.resume.scenario_hash`); recompute the others, replacing their outputs. If the
        baseline is recomputed, every scenario is.
    progress: show a progress bar on stderr (the CLI turns it on; the library default is silent).

    Order: every input (baseline climate, mask, each scenario's own layers, the brief's districts) is
    opened and checked before anything is written; then the output folder is locked for this run
    (:class:`~suitability.runlock.RunLock`), existing outputs are checked, and the scenarios are computed
    and written, several in one dask pass (:func:`scenario_passes`: they share the reading and resampling
    of the climate). A progress record (hidden file) is kept after each pass so that an interrupted run
    can be resumed; ``manifest.json`` and ``class_summary.csv`` (with its ``.columns.csv``) of an earlier
    run are removed before the first write and written anew at the end, so they are present only after a
    complete run.
    """
    # An earlier run in this process leaves lazy arrays holding open NetCDF handles in reference cycles.
    # Collected at an arbitrary moment of this run, their closing met this run's reads of the same files and
    # crashed HDF5 (a segmentation fault on the second run of one Python session); collect them first.
    gc.collect()
    cfg = load_config(config) if isinstance(config, (str, Path)) else config
    cfg = _with_overrides(cfg, overwrite=overwrite, scheduler=scheduler, workers=workers, memory_limit=memory_limit)
    started = time.perf_counter()
    timings: dict[str, float] = {}
    clock = _Clock(timings)
    grid = TargetGrid.from_region(cfg.region, cfg.config_dir)
    folder = Path(cfg.output.folder)
    scenarios = cfg.scenarios_baseline_first()
    input_warnings: list[str] = []
    with one_handle_per_file(), compute_context(cfg.compute, progress=progress) as runtime:
        with clock("open_inputs_s"), _recording_input_warnings(input_warnings):
            ensembles = {s.name: members for s in scenarios if (members := scenario_members(cfg, s))}
            layers_of = selected_layers(cfg, set(ensembles))
            today = load_climate(cfg.climate, grid, cfg.config_dir, cfg.compute.chunk_size)
            climate = _model_inputs(cfg, grid, today)
            own_layers = {s.name: _own_layers(cfg, grid, s, ensembles.get(s.name)) for s in scenarios if s.climate}
            _check_brief_inputs(cfg)
        check_output_folder(folder)
        with RunLock(folder) as lock:
            _clear_after_takeover(lock, folder, [s.name for s in scenarios])
            _warn_about_foreign_files(cfg, folder)
            checksums = input_checksums(cfg)
            hashes = {s.name: scenario_hash(cfg, s, layers_of(s), checksums, ensembles.get(s.name)) for s in scenarios}
            records = verified_records(folder, hashes, cfg.baseline) if resume else {}
            resumed = [s.name for s in scenarios if s.name in records]
            to_compute = [s for s in scenarios if s.name not in records]
            _prepare_folder(cfg, folder, to_compute, layers_of, replace=cfg.output.overwrite or resume, ensembles=ensembles)
            _check_disk_space(cfg, grid, folder, to_compute, layers_of)
            write_progress(folder, records)
            written = {name: record_paths(folder, name, record) for name, record in records.items()}
            config_hash = cfg.config_hash()
            if to_compute:
                tags = {s.name: scenario_tags(s, config_hash, hashes[s.name],
                                              invented_region=cfg.region.name if cfg.region.invented else None)
                        for s in to_compute}
                for group in scenario_passes(to_compute, ensembles, cfg.compute.runs_per_pass):
                    with clock("scenarios_s"):
                        written.update(_compute_scenarios(cfg, grid, runtime, climate, group, own_layers, ensembles,
                                                          written, tags, layers_of))
                    for scenario in group:
                        _refuse_empty_map(cfg, scenario, written[scenario.name])
                        records[scenario.name] = scenario_record(hashes[scenario.name], written[scenario.name])
                    write_progress(folder, records)
            summary = class_summary({s.name: written[s.name]["pathway_class"] for s in scenarios})
            briefs: dict[str, Path] = {}
            if cfg.brief is not None:
                with clock("briefs_s"):
                    briefs = make_briefs(cfg, {s.name: folder / s.name for s in scenarios}, today,
                                         members=ensembles, assumptions=run_assumptions(cfg), progress=progress)
            timings["total_s"] = time.perf_counter() - started
            manifest = build_manifest(cfg, config_hash, written, summary, timings, briefs, checksums=checksums,
                                      records=records, resumed=resumed,
                                      input_time={"baseline": today.attrs.get("time_info", {}),
                                                  **{name: _time_info(own) for name, own in own_layers.items()}},
                                      ensembles=ensembles)
            manifest["input_warnings"] = input_warnings
            # The summary and the manifest are the last two files, written only when everything else is:
            # their presence says the run finished (a crash in the briefs leaves neither).
            write_data_dictionary(SUMMARY_COLUMNS, dictionary_path(folder / SUMMARY_NAME))
            write_csv(summary, folder / SUMMARY_NAME)
            manifest_path = write_manifest(manifest, folder / MANIFEST_NAME)
            (folder / PROGRESS_NAME).unlink(missing_ok=True)
    return RunResult(
        output_folder=folder,
        scenario_folders={s.name: folder / s.name for s in scenarios},
        layers=written,
        summary=summary,
        manifest_path=manifest_path,
        manifest=manifest,
        briefs=briefs,
        resumed=resumed,
        assumptions=list(manifest.get("assumptions", [])),
    )


def selected_layers(cfg: RunConfig, ensembles: set[str] | None = None):
    """Return a function scenario -> the layer names to write for it (the baseline has no change layers).

    The layers ``output.layers`` asks for, plus those the registry marks ``required``. Ensemble layers
    only for the scenarios in ``ensembles`` (default: those listing ``members``), and those comparing with
    the baseline not for the baseline.
    """
    names = cfg.output.layer_names()
    names += [name for name, layer in OUTPUT_LAYERS.items() if layer.required and name not in names]
    change = set(layer_names(CHANGE))
    ensemble = set(layer_names(ENSEMBLE))
    if cfg.uncertainty is None:
        names = [n for n in names if OUTPUT_LAYERS[n].kind != UNCERTAINTY]
    if ensembles is None:
        ensembles = {s.name for s in cfg.scenarios if s.members}

    def for_scenario(scenario) -> list[str]:
        chosen = [n for n in names if n not in ensemble or scenario.name in ensembles]
        if scenario.name == cfg.baseline:
            chosen = [n for n in chosen if n not in change and OUTPUT_LAYERS[n].compares is None]
        return chosen

    return for_scenario


def _draw_arguments(cfg: RunConfig, scenario, own_layers) -> dict[str, Any]:
    """The model's parameter-draw arguments for ``scenario``: the config's ``uncertainty`` and, for a scenario
    other than the baseline, the baseline scenario and its own layers to pair the draws with."""
    if cfg.uncertainty is None:
        return {}
    arguments: dict[str, Any] = {"uncertainty": cfg.uncertainty}
    if scenario.name != cfg.baseline:
        arguments.update(baseline=cfg.baseline_scenario, baseline_layers=own_layers.get(cfg.baseline))
    return arguments


def scenario_members(cfg: RunConfig, scenario) -> list[str] | None:
    """The ensemble members of a scenario: its ``members`` list, else the labels of a member dimension in
    its own layers' files (which must agree between layers); None for a single climate."""
    if scenario.members:
        return list(scenario.members)
    found, where = None, None
    for name, spec in (scenario.climate.items() if scenario.climate else ()):
        if isinstance(spec.path, list):  # only with members, returned above
            continue
        labels = member_labels(name, spec, Path(spec.path), INPUT_VARIABLES[name].monthly)
        if labels is None:
            continue
        if found is not None and labels != found:
            raise InputDataError(f"{spec.path}: layer {name!r} has members {', '.join(labels)}, but {where} has "
                                 f"{', '.join(found)}; expected the same members in every layer of scenario {scenario.name!r}")
        found, where = labels, f"{spec.path} (layer {name!r})"
    return found


def _own_layers(cfg: RunConfig, grid: TargetGrid, scenario, members: list[str] | None):
    """A scenario's own layers on the grid: one Dataset, or member -> Dataset for an ensemble."""
    if not members:
        return load_climate(scenario.climate, grid, cfg.config_dir, cfg.compute.chunk_size)
    own = {m: load_climate(scenario.member_climate(m), grid, cfg.config_dir, cfg.compute.chunk_size, member=m)
           for m in members}
    check_members_alike(scenario, own)
    return own


def check_members_alike(scenario, own: dict[str, xr.Dataset]) -> None:
    """Members must give each layer from the same kind of time steps (all monthly or all daily, or all 12
    months) and from the same file variable; their grids may differ (each is aligned on the run's grid)."""
    for name in scenario.climate.keys():
        files = {m: scenario.member_climate(m)[name].path for m in own}
        kinds = {m: ds.attrs["time_info"].get(name, {}).get("steps", "12 months") for m, ds in own.items()}
        if len(set(kinds.values())) > 1:
            first = next(iter(kinds.values()))
            odd = next(m for m, k in kinds.items() if k != first)
            listed = ", ".join(f"{m}: {k}" for m, k in kinds.items())
            raise InputDataError(f"{files[odd]}: layer {name!r} of scenario {scenario.name!r} mixes time steps between "
                                 f"members ({listed}); expected the same (all monthly or all daily)")
        found = {m: ds.attrs.get("variables", {}).get(name) for m, ds in own.items()}
        odd = next((m for m, v in found.items() if _other_variable(v, next(iter(found.values())))), None)
        if odd is not None:
            listed = ", ".join(f"{m}: {v}" for m, v in found.items())
            raise InputDataError(f"{files[odd]}: layer {name!r} of scenario {scenario.name!r} is read from different "
                                 f"variables between members ({listed}); expected the same variable in every member")


def _other_variable(described: str | None, first: str | None) -> bool:
    """Whether two "name (standard_name)" descriptions of a member's variable name different quantities: the
    names differ, or both give a CF standard_name and those differ (a missing standard_name is no conflict)."""
    if described is None or first is None:
        return False
    name, _, standard = described.partition(" (")
    first_name, _, first_standard = first.partition(" (")
    return name != first_name or bool(standard and first_standard and standard != first_standard)


def _time_info(own) -> dict:
    if isinstance(own, xr.Dataset):
        return own.attrs.get("time_info", {})
    return {member: ds.attrs.get("time_info", {}) for member, ds in own.items()}


def ensemble_result(members: dict[str, xr.Dataset], margin: float) -> xr.Dataset:
    """One scenario's layers from its members' results: the median over members of every continuous layer
    (the pathway class from the median advantage), the ensemble layers of the registry, and
    ``member_advantage`` (member, y, x) for the agreement against the baseline."""
    stack = xr.concat(list(members.values()), dim=xr.DataArray(list(members), dims="member", name="member"),
                      coords="minimal", compat="override")
    out = xr.Dataset()
    for name in stack.data_vars:
        if OUTPUT_LAYERS.get(name) is not None and not OUTPUT_LAYERS[name].categorical:
            out[name] = indicators.ensemble_median(stack[name]).astype(np.float32)
    out["pathway_class"] = indicators.pathway_class(out["pathway_advantage"], margin)
    # Parameter draws of every member pooled: a share of draws is the mean of the members' shares (each
    # member has the same draws); the quantiles stay the median of the members' quantiles.
    for name in (n for n in layer_names(UNCERTAINTY) if n.endswith("_probability") and n in stack):
        out[name] = stack[name].mean("member", skipna=False).astype(np.float32)
    if "confidence_class" in stack:
        out["confidence_class"] = xr.apply_ufunc(indicators.confidence_class, out["c3_advantage_probability"],
                                                 out["c4_advantage_probability"], dask="parallelized",
                                                 output_dtypes=[np.uint8])
    out["ensemble_median_advantage"] = out["pathway_advantage"]
    out["c4_favoured_share"] = indicators.c4_favoured_share(stack["pathway_advantage"], margin).astype(np.float32)
    out["member_advantage"] = stack["pathway_advantage"]
    return out


def make_briefs(cfg: RunConfig, scenario_folders: dict[str, Path], today: xr.Dataset, *, members=None,
                assumptions=(), progress: bool = False) -> dict[str, Path]:
    """Zonal statistics, figures and HTML/PDF briefs for the scenarios already written.

    today: the baseline climate on the grid (unmasked): the region's warm-season temperature and each
    district's monthly mean temperature (for the crossover chart) are taken from it, the latter in one
    pass over its row chunks. members: scenario -> its climate-model members.
    progress: show a progress bar of the briefs on stderr.
    """
    from .reports import brief_context_from_config, build_brief
    from .reports.zones import district_monthly_means, output_grid

    if members is None:  # a brief of a finished run: the members as the run found them
        members = {s.name: found for s in cfg.scenarios if (found := scenario_members(cfg, s))}
    monthly = today["tmean"] if "tmean" in today else (today["tmin"] + today["tmax"]) / 2
    warm_season = indicators.warm_season_mean(indicators.regional_monthly_temperature(today).compute().to_numpy())
    grid = output_grid(Path(scenario_folders[cfg.baseline]) / "pathway_class.tif")
    district_climate = district_monthly_means(cfg.brief.zones, cfg.brief.name_field, grid,
                                              monthly.transpose("month", "y", "x").data)
    context = brief_context_from_config(cfg, scenario_folders, warm_season_temperature_c=warm_season,
                                        caution=CAUTION, tool_version=__version__, district_climate=district_climate,
                                        time_info=today.attrs.get("time_info", {}), members=members,
                                        assumptions=assumptions or run_assumptions(cfg))
    return build_brief(context, Path(cfg.output.folder), progress=progress)


def briefs_of_finished_run(cfg: RunConfig, *, scenarios=None, overwrite: bool = False,
                           progress: bool = False) -> dict[str, Path]:
    """:func:`make_briefs` for the outputs of an earlier run, holding the output folder's lock meanwhile.

    scenarios: names of the scenarios to brief (None: all); the baseline is always included, as every
        brief compares with it. overwrite: replace briefs and district tables that exist already (without
        it, existing ones are an :class:`~suitability.errors.OutputError` listing them, and nothing is written).
    progress: show a progress bar of the briefs on stderr.
    """
    from .errors import OutputError
    from .reports.brief import expected_files

    if cfg.brief is None:
        raise ConfigError(f"{cfg.source_path or '<config>'}: the config has no 'brief' section (zones, name_field)")
    names = [s.name for s in cfg.scenarios]
    wanted = list(dict.fromkeys(scenarios or names))
    unknown = [n for n in wanted if n not in names]
    if unknown:
        raise ConfigError(f"{cfg.source_path or '<config>'}: no scenario {', '.join(map(repr, unknown))}; "
                          f"scenarios: {', '.join(names)}")
    chosen = [s for s in cfg.scenarios if s.name in wanted or s.name == cfg.baseline]
    zones = _check_brief_inputs(cfg)
    folder = Path(cfg.output.folder)
    if not folder.is_dir():
        raise InputDataError(f"output folder {folder} does not exist; expected the folder of a finished run")
    missing = [s.name for s in chosen if not (folder / s.name / "pathway_class.tif").exists()]
    if missing:
        raise InputDataError(f"{folder}: no finished outputs for scenario(s) {', '.join(missing)} "
                             "(expected <scenario>/pathway_class.tif); run them first")
    expected = expected_files(cfg.region.name, [s.name for s in chosen], cfg.baseline,
                              list(zones["district"]) if cfg.brief.per_district else [])
    existing = [name for name in expected if (folder / "brief" / name).exists()]
    if existing and not overwrite:
        raise OutputError(f"{folder / 'brief'}: {len(existing)} brief file(s) exist ({', '.join(existing)}); "
                          "use --overwrite to replace them")
    grid = TargetGrid.from_region(cfg.region, cfg.config_dir)
    with RunLock(folder) as lock:
        _clear_after_takeover(lock, folder, [s.name for s in cfg.scenarios])
        today = load_climate(cfg.climate, grid, cfg.config_dir, cfg.compute.chunk_size)
        return make_briefs(cfg.model_copy(update={"scenarios": chosen}), {s.name: folder / s.name for s in chosen},
                           today, progress=progress)


# --- the steps -----------------------------------------------------------------------------------------------

def _model_inputs(cfg: RunConfig, grid: TargetGrid, today: xr.Dataset) -> xr.Dataset:
    """The baseline climate as the model takes it: masked to the region, with each cell's latitude."""
    mask = load_mask(cfg.region, grid, cfg.config_dir, cfg.compute.chunk_size)
    climate = today.where(mask) if mask is not None else today
    return climate.assign(latitude=grid.latitude(cfg.compute.chunk_size))


def _check_brief_inputs(cfg: RunConfig):
    """Refuse unusable district polygons before computing (the briefs are made last); returns them."""
    if cfg.brief is None:
        return None
    from .reports.brief import MAX_DISTRICT_BRIEFS
    from .reports.zones import read_zones

    zones = read_zones(cfg.brief.zones, cfg.brief.name_field)
    if cfg.brief.per_district and len(zones) > MAX_DISTRICT_BRIEFS:
        raise ConfigError(
            f"{cfg.source_path or '<config>'}: brief.per_district: the district file {cfg.brief.zones} has "
            f"{len(zones)} districts, and one brief each would be {2 * len(zones)} HTML and PDF files; at most "
            f"{MAX_DISTRICT_BRIEFS} districts get briefs of their own. Set per_district: false (the region briefs "
            "and the district table cover every district) or split the district file"
        )
    return zones


def _clear_after_takeover(lock: RunLock, folder: Path, scenario_names) -> None:
    if lock.taken_over_from is not None:
        warnings.warn(f"{lock.path}: taken over from {lock.taken_over_from.describe()}, which no longer "
                      "holds it (a run that was killed); its temporary files are removed", stacklevel=3)
    remove_leftovers(folder, [*scenario_names, "brief"])


#: Compression the disk check counts on at most: outputs are refused before computing only when they would
#: not fit even this many times smaller than uncompressed (DEFLATE with a predictor on smooth fields;
#: common practice, no source).
_BEST_COMPRESSION = 10


def _check_disk_space(cfg: RunConfig, grid: TargetGrid, folder: Path, to_compute, layers_of) -> None:
    """Refuse (exit 4) a run whose outputs cannot fit on the disk, warn when they may not; arithmetic in
    the message. Uncompressed size: cells x (4 bytes per float layer, 1 per class layer) per scenario,
    plus the monthly datacube (4 bytes x 12 months per layer)."""
    import shutil

    cells = grid.width * grid.height
    needed = 0
    for scenario in to_compute:
        per_cell = sum(1 if OUTPUT_LAYERS[n].categorical else 4 for n in layers_of(scenario))
        if cfg.output.datacube:
            per_cell += 4 * 12 * len(layer_names(DATACUBE))
        needed += cells * per_cell
    try:
        free = shutil.disk_usage(folder).free
    except OSError:
        return
    from .atomic import byte_size_text

    arithmetic = (f"{grid.width} x {grid.height} = {cells:,} cells, {len(to_compute)} scenario(s): "
                  f"{byte_size_text(needed)} uncompressed, {byte_size_text(free)} free on the disk of {folder}")
    if free * _BEST_COMPRESSION < needed:
        raise OutputError(f"the outputs cannot fit: {arithmetic}, and they would need to compress more than "
                          f"{_BEST_COMPRESSION}x; free space, choose another output.folder, a coarser "
                          "resolution or fewer layers (output.layers)")
    if free < needed:
        warnings.warn(f"the outputs may not fit: {arithmetic}; they fit only if compression saves "
                      f"{1 - free / needed:.0%}", stacklevel=3)


@contextmanager
def _recording_input_warnings(into: list[str]):
    """Pass every warning on as usual, and keep the text of the input-data ones (coverage, lost cells)
    for the manifest."""
    from .inputs.climate import InputCoverageWarning, InputLossWarning

    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        yield
    for warning in caught:
        if issubclass(warning.category, (InputCoverageWarning, InputLossWarning)):
            into.append(str(warning.message))
        warnings.warn_explicit(warning.message, warning.category, warning.filename, warning.lineno)


def _refuse_empty_map(cfg: RunConfig, scenario, paths: dict[str, Path]) -> None:
    """A scenario that maps no cell is an error (exit 3), not a finished run with empty maps."""
    counted = class_summary({scenario.name: paths["pathway_class"]})
    if int(counted["valid_cells"].iloc[0]) > 0:
        return
    raise InputDataError(
        f"scenario {scenario.name!r} maps no cell of the region ({paths['pathway_class']} holds only nodata): "
        "every cell lost a value to the mask, to nodata or invalid values of an input, or to the scenario's "
        f"settings (co2_ppm {scenario.co2_ppm:g}, temperature_offset_c {scenario.temperature_offset_c:g}); "
        f"run 'suitability check {cfg.source_path or 'CONFIG'}' and look at the nodata column"
    )


def _warn_about_foreign_files(cfg: RunConfig, folder: Path) -> None:
    """Warn when the output folder holds input files, or files and folders the tool does not write there.

    Nothing is removed or refused: the tool only ever replaces its own outputs (and with --overwrite), but a
    folder shared with inputs or other work is easy to damage by hand afterwards.
    """
    resolved = folder.resolve()
    inputs = [Path(path) for path in input_files(cfg)]
    inside = sorted(str(p) for p in inputs if resolved == p.resolve().parent or resolved in p.resolve().parents)
    if inside:
        shown = ", ".join(inside[:3]) + (f" and {len(inside) - 3} more" if len(inside) > 3 else "")
        warnings.warn(f"output folder {folder} holds input files of this run ({shown}); keep outputs in a "
                      "folder of their own", stacklevel=3)
    own = {MANIFEST_NAME, SUMMARY_NAME, dictionary_path(SUMMARY_NAME).name, PROGRESS_NAME, "brief",
           *(s.name for s in cfg.scenarios)}
    foreign = sorted(p.name for p in folder.iterdir()
                     if p.name not in own and not p.name.startswith(".suitability"))
    if foreign:
        shown = ", ".join(foreign[:5]) + (f" and {len(foreign) - 5} more" if len(foreign) > 5 else "")
        warnings.warn(f"output folder {folder} also holds {len(foreign)} file(s) or folder(s) the tool does not "
                      f"write ({shown}); they are left as they are", stacklevel=3)


def _prepare_folder(cfg: RunConfig, folder: Path, to_compute, layers_of, *, replace: bool, ensembles=None) -> None:
    """Refuse to replace outputs unless allowed; remove the summary and manifest of an earlier run."""
    names = [f"{s.name}/{n}.tif" for s in to_compute for n in layers_of(s)]
    if cfg.output.member_outputs:
        names += [f"{s.name}/{MEMBERS_FOLDER}/{m}/{n}.tif" for s in to_compute for m in (ensembles or {}).get(s.name, ())
                  for n in member_layers(layers_of(s))]
    names += [f"{s.name}/{DATACUBE_NAME}" for s in to_compute] if cfg.output.datacube else []
    check_output_folder(folder, names, replace)
    for stale in (MANIFEST_NAME, SUMMARY_NAME, dictionary_path(SUMMARY_NAME).name):
        (folder / stale).unlink(missing_ok=True)


def scenario_passes(scenarios, ensembles: dict[str, list[str]], runs_per_pass: int) -> list[list]:
    """``scenarios`` (baseline first) in consecutive groups computed one dask pass each: as many whole
    scenarios as fit in ``runs_per_pass`` model runs (config ``compute.runs_per_pass``; a scenario is one
    run, an ensemble one per member, and a larger ensemble gets a pass of its own). The runs of a pass share
    the reading and resampling of the climate, but a block's task holds all their layers at once, and an
    interrupted pass is redone whole by ``--resume``."""
    passes: list[list] = []
    runs = 0
    for scenario in scenarios:
        size = len(ensembles.get(scenario.name, ())) or 1
        if not passes or runs + size > runs_per_pass:
            passes.append([])
            runs = 0
        passes[-1].append(scenario)
        runs += size
    return passes


def _compute_scenarios(cfg, grid, runtime, climate, scenarios, own_layers, ensembles, written, tags,
                       layers_of) -> dict[str, dict[str, Path]]:
    """Evaluate every scenario of ``scenarios`` (each member of an ensemble) and write its layers, member
    layers and datacube, all in ONE dask pass: the model's blocks read and resample the climate once for
    all of them (:func:`suitability.model.evaluate_runs`). Returns scenario name -> written paths."""
    runs, owners = [], []
    for scenario in scenarios:
        draws = _draw_arguments(cfg, scenario, own_layers)
        members = own_layers[scenario.name].items() if scenario.name in ensembles else [(None, own_layers.get(scenario.name))]
        for member, layers in members:
            runs.append(ModelRun(scenario, layers, draws.get("uncertainty"), draws.get("baseline"),
                                 draws.get("baseline_layers")))
            owners.append((scenario.name, member))
    results = evaluate_runs(climate, runs, physiology=cfg.physiology, season=cfg.season, classes=cfg.classes,
                            engine=runtime.engine, monthly_layers=cfg.output.datacube,
                            threads_per_block=runtime.threads_per_block(grid.shape))
    writes, kinds = [], []
    computed: dict[str, xr.Dataset] = {}
    for scenario in scenarios:
        names = layers_of(scenario)
        if scenario.name in ensembles:
            members = {m: r for (owner, m), r in zip(owners, results) if owner == scenario.name}
            tags[scenario.name] = {**tags[scenario.name], "ensemble_members": ", ".join(members)}
            if cfg.output.member_outputs:
                for member, result in members.items():
                    folder = Path(cfg.output.folder) / scenario.name / MEMBERS_FOLDER / member
                    writes.append(LayerWrite({n: _georeferenced(result[n], grid) for n in member_layers(names)}, folder,
                                             tags={**tags[scenario.name], "ensemble_member": member},
                                             cog_options=cfg.output.cog))
                    kinds.append((scenario.name, member))
            result = ensemble_result(members, cfg.classes.contested_margin)
        else:
            result = next(r for (owner, _), r in zip(owners, results) if owner == scenario.name)
        computed[scenario.name] = result
        baseline = computed.get(cfg.baseline)
        writes.append(_scenario_write(cfg, grid, scenario, result, written, baseline, tags[scenario.name], names))
        kinds.append((scenario.name, None))
    label = scenarios[0].name if len(scenarios) == 1 else f"{len(scenarios)} scenarios"
    with _input_errors_named(cfg, scenarios):
        with runtime.progress(f"{label}: computing and writing"):
            paths = write_together(writes, conversion_threads=_conversion_threads(runtime))
    found: dict[str, dict[str, Path]] = {s.name: {} for s in scenarios}
    for (name, member), written_paths in zip(kinds, paths):
        written_paths = with_sidecars(written_paths)
        if member is None:
            found[name].update(written_paths)
        else:
            found[name].update({f"{MEMBERS_FOLDER}/{member}/{n}": p for n, p in written_paths.items()})
    return found


def _conversion_threads(runtime) -> int:
    """COG conversions at once in this process after a pass: the run's workers, but no more than this
    machine's cores (a remote scheduler's workers are other machines' cores)."""
    return max(1, min(runtime.workers, os.cpu_count() or 1))


def _scenario_write(cfg, grid, scenario, result, written, baseline: xr.Dataset | None, tags, names) -> LayerWrite:
    """One scenario's layers (change layers against the baseline) and its datacube, to be written.

    baseline: the baseline's result when it is computed in the same pass; else the change layers compare
    with the baseline's written layers (a resumed baseline)."""
    layers = {name: result[name] for name in names if name in result}
    if scenario.name != cfg.baseline:
        layers.update(_change_layers(written.get(cfg.baseline, {}), baseline, result, names, cfg.compute.chunk_size))
    layers = {name: _georeferenced(layers[name], grid) for name in names}
    scenario_folder = Path(cfg.output.folder) / scenario.name
    cube = None
    if cfg.output.datacube:  # written in the same dask pass as the layers: the model runs once
        cube = result[list(layer_names(DATACUBE)) + [n for n in layer_names(DERIVED) if n in result]]
        cube.attrs.update(tags)
        cube = _georeferenced(cube, grid)
    return LayerWrite(layers, scenario_folder, tags=tags, cog_options=cfg.output.cog, datacube=cube,
                      datacube_path=scenario_folder / DATACUBE_NAME)


@contextmanager
def _input_errors_named(cfg: RunConfig, scenarios):
    """Turn a failure while computing that comes from reading an input (a damaged tile outside the
    sampled windows, say) into an InputDataError (exit 3) naming the input file and its layer."""
    from .inputs.readers import layer_files

    named = ", ".join(repr(s.name) for s in scenarios)
    computing = f"while computing scenario{'s' if len(scenarios) > 1 else ''} {named}"
    try:
        yield
    except OutputError as error:
        text, seen = "", error
        while seen is not None:
            if isinstance(seen, InputDataError):  # a reader named the file and layer (GuardedRead)
                raise InputDataError(f"{seen} ({computing})") from error
            text += f" {seen}"
            seen = seen.__cause__ or seen.__context__
        specs = [(name, spec) for name, spec in cfg.climate.items()]
        for scenario in scenarios:
            for member in (scenario.members or [None]):
                own = scenario.member_climate(member) if member else (scenario.climate or {})
                specs += [(name, spec) for name, spec in own.items()]
        candidates = [(name, path) for name, spec in specs for path in layer_files(spec, cfg.config_dir)]
        candidates += [("mask", Path(cfg.region.mask))] if cfg.region.mask is not None else []
        for name, path in candidates:
            if str(path) in text:
                raise InputDataError(
                    f"{path}: layer {name!r}: cannot read the values {computing}; "
                    f"the file may be damaged in a part the checks did not sample ({error.__cause__ or error})"
                ) from error
        raise


def _change_layers(baseline_paths: dict[str, Path], baseline: xr.Dataset | None, result: xr.Dataset, names,
                   chunk: int) -> dict[str, xr.DataArray]:
    """Each change layer of the registry among ``names``: its indicator applied to the baseline's layer and
    the scenario's layer that it ``compares``; the baseline's layer from its result computed in the same
    pass (``baseline``), else as written (``baseline_paths``: a baseline kept by ``resume``)."""
    import rioxarray

    changes = {}
    # The uncertainty layers that compare with the baseline come from the model's paired draws, not from here.
    for name in (n for n in names if OUTPUT_LAYERS[n].compares is not None and OUTPUT_LAYERS[n].kind != UNCERTAINTY):
        layer = OUTPUT_LAYERS[name]
        # an ensemble layer compares every member's layer (member_<compares>) with the baseline's
        scenario_values = result[layer.compares] if layer.kind == CHANGE else result["member_advantage"]
        if baseline is not None:
            baseline_values = baseline[layer.compares]
        else:
            written = rioxarray.open_rasterio(baseline_paths[layer.compares], chunks={"x": chunk, "y": chunk},
                                              lock=False, masked=False).squeeze("band", drop=True)
            baseline_values = written.assign_coords(x=scenario_values.x, y=scenario_values.y)
        change = getattr(indicators, layer.indicator)(baseline_values, scenario_values)
        changes[name] = change if layer.categorical else change.astype(np.float32)
    return changes


def member_layers(names) -> list[str]:
    """The layers written per member (``output.member_outputs``): the seasonal and the parameter-uncertainty
    ones among ``names``."""
    return [n for n in names if OUTPUT_LAYERS[n].kind in (SEASONAL, UNCERTAINTY)]


def _georeferenced(layer, grid: TargetGrid):
    layer = layer.drop_vars([c for c in ("band",) if c in layer.coords])
    return layer.rio.write_crs(grid.crs).rio.write_transform(grid.transform)


def _with_overrides(cfg: RunConfig, **overrides) -> RunConfig:
    """``cfg`` with the command line's overrides; the compute section is validated again by its schema."""
    compute_updates = {k: v for k, v in overrides.items() if k != "overwrite" and v is not None}
    updates = {}
    if compute_updates:
        section = {**cfg.compute.model_dump(), **compute_updates}
        updates["compute"] = validate_section(ComputeConfig, section, "compute")
    if overrides.get("overwrite") is not None:
        updates["output"] = cfg.output.model_copy(update={"overwrite": overrides["overwrite"]})
    if not updates:
        return cfg
    return cfg.model_copy(update=updates)


class _Clock:
    """Wall-clock seconds of the named steps of a run, into ``timings``."""

    def __init__(self, timings: dict[str, float]):
        self._timings = timings

    @contextmanager
    def __call__(self, name: str):
        started = time.perf_counter()
        yield
        self._timings[name] = self._timings.get(name, 0.0) + time.perf_counter() - started


__all__ = ["run", "RunResult", "CAUTION", "class_summary", "scenario_hash", "briefs_of_finished_run", "InputDataError"]
