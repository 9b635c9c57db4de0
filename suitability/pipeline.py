"""The whole run, in order: config -> inputs -> scenarios -> model -> indicators -> outputs -> reports.

This is the only module that knows the order. Each step is a call into the module that owns it.
"""

from __future__ import annotations

import hashlib
import json
import platform
import time
import warnings
from dataclasses import dataclass, field
from datetime import datetime, timezone
from importlib import metadata
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import xarray as xr

from . import __version__
from .config import RunConfig, load_config
from .errors import ConfigError, InputDataError
from .grid import TargetGrid
from .indicators import advantage_change, class_transition
from .inputs import load_climate, load_mask
from .model import MONTHLY_LAYERS, SEASONAL_LAYERS, evaluate
from .outputs import (
    check_output_folder,
    file_checksum,
    remove_leftovers,
    write_csv,
    write_datacube,
    write_layers,
    write_manifest,
)
from .runlock import RunLock
from .runtime import compute_context
from .variables import CLASS_C3, CLASS_C4, CLASS_CONTESTED, CLASS_NAMES, CLASS_NODATA

CAUTION = (
    "Results are potential, model-based estimates of where C4 or C3 plants have the physiological "
    "advantage; they are not yield forecasts. Local soils, irrigation, pests, markets and farmer knowledge "
    "are not represented. Confirm with local agronomic advice, field trials and local regulations before acting."
)
CHANGE_LAYERS = ("advantage_change", "class_transition")
#: Always written: the change layers and the briefs are computed from them.
REQUIRED_LAYERS = ("pathway_advantage", "pathway_class")
MANIFEST_NAME = "manifest.json"
SUMMARY_NAME = "class_summary.csv"
DATACUBE_NAME = "monthly_assimilation.nc"
#: Hidden record of the scenarios finished so far, kept during a run for ``resume``; removed at the end.
PROGRESS_NAME = ".suitability-progress.json"

_PACKAGES = ("numpy", "xarray", "dask", "distributed", "rasterio", "rioxarray", "rio-cogeo", "pyproj",
             "odc-geo", "pydantic", "numba", "geopandas", "exactextract")


@dataclass
class RunResult:
    """What :func:`run` produced.

    output_folder: the run's output folder. scenario_folders: scenario name -> its folder.
    layers: scenario name -> {layer name -> COG path}. summary: class shares per scenario (one row per
    scenario: share of valid cells in each class, in percent, and the valid cell count).
    manifest_path / manifest: the run manifest (config, inputs with checksums, versions, timings, outputs).
    briefs: brief file paths (empty without a ``brief`` section). caution: the text every output carries.
    resumed: names of the scenarios not recomputed because ``resume`` found their outputs up to date.
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
        :func:`scenario_hash`); recompute the others, replacing their outputs. If the baseline is
        recomputed, every scenario is.
    progress: show a progress bar on stderr (the CLI turns it on; the library default is silent).

    Order: every input (baseline climate, mask, each scenario's own layers, the brief's districts) is
    opened and checked before anything is written; then the output folder is locked for this run
    (:class:`~suitability.runlock.RunLock`), existing outputs are checked, and each scenario is computed
    and written. A progress record (hidden file) is kept after each scenario so that an interrupted run
    can be resumed; ``manifest.json`` and ``class_summary.csv`` of an earlier run are removed before the
    first write and written anew at the end, so they are present only after a complete run.
    """
    cfg = load_config(config) if isinstance(config, (str, Path)) else config
    cfg = _with_overrides(cfg, overwrite=overwrite, scheduler=scheduler, workers=workers, memory_limit=memory_limit)
    started = time.perf_counter()
    timings: dict[str, float] = {}
    grid = TargetGrid.from_region(cfg.region, cfg.config_dir)
    folder = Path(cfg.output.folder)
    scenarios = _ordered_scenarios(cfg)
    baseline = cfg_baseline(cfg)
    layer_names = selected_layers(cfg)
    chunk = cfg.compute.chunk_size
    written: dict[str, dict[str, Path]] = {}
    with compute_context(cfg.compute, progress=progress) as runtime:
        tick = time.perf_counter()
        climate = load_climate(cfg.climate, grid, cfg.config_dir, chunk)
        mask = load_mask(cfg.region, grid, cfg.config_dir, chunk)
        if mask is not None:
            climate = climate.where(mask)
        climate = climate.assign(latitude=grid.latitude(chunk))
        own_layers = {s.name: load_climate(s.climate, grid, cfg.config_dir, chunk) for s in scenarios
                      if getattr(s, "climate", None)}
        _check_brief_inputs(cfg)
        timings["open_inputs_s"] = time.perf_counter() - tick
        check_output_folder(folder)
        with RunLock(folder) as lock:
            if lock.taken_over_from is not None:
                warnings.warn(f"{lock.path}: taken over from {lock.taken_over_from.describe()}, which no longer "
                              "holds it (a run that was killed); its temporary files are removed", stacklevel=2)
            remove_leftovers(folder)
            checksums = {path: file_checksum(path) for path in sorted(_input_files(cfg))}
            hashes = {s.name: scenario_hash(cfg, s, layer_names(s), checksums) for s in scenarios}
            records = _verified_records(folder, hashes, baseline) if resume else {}
            resumed = [s.name for s in scenarios if s.name in records]
            to_compute = [s for s in scenarios if s.name not in records]
            check_output_folder(folder, [name for s in to_compute for name in _output_names(cfg, s, layer_names)],
                                cfg.output.overwrite or resume)
            for stale in (MANIFEST_NAME, SUMMARY_NAME):
                (folder / stale).unlink(missing_ok=True)
            _write_progress(folder, records)
            written = {name: _record_paths(folder, name, record) for name, record in records.items()}
            config_hash = cfg.config_hash()
            for scenario in to_compute:
                tick = time.perf_counter()
                result = evaluate(
                    climate, scenario, physiology=cfg.physiology, season=cfg.season, classes=cfg.classes,
                    scenario_layers=own_layers.get(scenario.name), engine=runtime.engine,
                )
                layers = {name: result[name] for name in layer_names(scenario) if name in result}
                if scenario.name != baseline:
                    layers.update(_change_layers(written[baseline], result, chunk))
                    layers = {n: layers[n] for n in layer_names(scenario)}
                layers = {n: _georeferenced(layer, grid) for n, layer in layers.items()}
                scenario_folder = folder / scenario.name
                tags = _scenario_tags(scenario, config_hash, hashes[scenario.name])
                with runtime.progress(f"{scenario.name}: computing and writing"):
                    written[scenario.name] = write_layers(
                        layers, scenario_folder, tags=tags, cog_options=cfg.output.cog, lock=None
                    )
                if cfg.output.datacube:
                    cube = result[list(MONTHLY_LAYERS)]
                    cube.attrs.update(tags)
                    with runtime.progress(f"{scenario.name}: monthly datacube"):
                        write_datacube(_georeferenced(cube, grid), scenario_folder / DATACUBE_NAME)
                    written[scenario.name]["datacube"] = scenario_folder / DATACUBE_NAME
                records[scenario.name] = {"scenario_hash": hashes[scenario.name],
                                          "outputs": _output_records(written[scenario.name])}
                _write_progress(folder, records)
                timings[f"scenario_{scenario.name}_s"] = time.perf_counter() - tick
            summary = class_summary({name: written[name]["pathway_class"] for name in (s.name for s in scenarios)})
            write_csv(summary, folder / SUMMARY_NAME)
            briefs: dict[str, Path] = {}
            if getattr(cfg, "brief", None) is not None:
                tick = time.perf_counter()
                briefs = make_briefs(cfg, {s.name: folder / s.name for s in scenarios})
                timings["briefs_s"] = time.perf_counter() - tick
            timings["total_s"] = time.perf_counter() - started
            manifest = build_manifest(cfg, config_hash, written, summary, timings, briefs,
                                      checksums=checksums, records=records, resumed=resumed)
            manifest_path = folder / MANIFEST_NAME
            write_manifest(manifest, manifest_path)
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
    )


def scenario_hash(cfg: RunConfig, scenario, layer_names, input_checksums: dict[Path, str]) -> str:
    """sha256 (hex) of everything a scenario's outputs depend on, for ``run(resume=True)``.

    That is: the tool version; the region, climate, season, physiology and classes sections; the layers
    written for it and the COG and datacube settings; the scenario itself and (for other scenarios, whose
    change layers compare with it) the baseline scenario; and the sha256 of every input file it reads.
    Not included, since results do not depend on them: the compute section, output.folder,
    output.overwrite, the brief section and the other scenarios.
    """
    dump = cfg.model_dump(mode="json")
    baseline = cfg.scenario(cfg_baseline(cfg))
    files = _input_files(cfg, only=[baseline] + ([] if scenario.name == baseline.name else [scenario]))
    recipe = {
        "tool_version": __version__,
        **{section: dump[section] for section in ("region", "climate", "season", "physiology", "classes")},
        "output": {"layers": sorted(layer_names), "cog": dump["output"]["cog"], "datacube": dump["output"]["datacube"]},
        "scenario": scenario.model_dump(mode="json"),
        "baseline": None if scenario.name == baseline.name else baseline.model_dump(mode="json"),
        "inputs": {str(path): input_checksums[path] for path in sorted(files)},
    }
    text = json.dumps(recipe, sort_keys=True, separators=(",", ":"), ensure_ascii=False)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def _check_brief_inputs(cfg: RunConfig) -> None:
    """Refuse unusable district polygons before computing (the briefs are made last)."""
    if getattr(cfg, "brief", None) is None:
        return
    from .reports.zones import read_zones

    read_zones(cfg.brief.zones, cfg.brief.name_field)


def _output_names(cfg: RunConfig, scenario, layer_names) -> list[str]:
    names = [f"{scenario.name}/{n}.tif" for n in layer_names(scenario)]
    return names + ([f"{scenario.name}/{DATACUBE_NAME}"] if cfg.output.datacube else [])


def _output_records(paths: dict[str, Path]) -> dict[str, dict[str, Any]]:
    return {name: {"path": str(p), "bytes": p.stat().st_size, "sha256": file_checksum(p)} for name, p in paths.items()}


def _record_paths(folder: Path, scenario: str, record: dict) -> dict[str, Path]:
    return {name: folder / scenario / Path(entry["path"]).name for name, entry in record["outputs"].items()}


def _previous_records(folder: Path) -> dict[str, dict]:
    """Per-scenario records of an interrupted run (progress file), else of the last complete run."""
    for name in (PROGRESS_NAME, MANIFEST_NAME):
        try:
            data = json.loads((folder / name).read_text(encoding="utf-8"))
        except (OSError, ValueError):
            continue
        records = data.get("scenario_records") if isinstance(data, dict) else None
        if isinstance(records, dict):
            return records
    return {}


def _verified_records(folder: Path, hashes: dict[str, str], baseline: str) -> dict[str, dict]:
    """The previous records of the scenarios that need no recomputing (see :func:`run`, ``resume``)."""
    kept = {}
    for name, record in _previous_records(folder).items():
        try:
            if name in hashes and record["scenario_hash"] == hashes[name] and _outputs_match(folder, name, record):
                kept[name] = record
        except (KeyError, TypeError, AttributeError):
            continue  # a record of another shape: recompute
    return kept if baseline in kept else {}


def _outputs_match(folder: Path, scenario: str, record: dict) -> bool:
    for path, entry in zip(_record_paths(folder, scenario, record).values(), record["outputs"].values()):
        if not path.is_file() or path.stat().st_size != entry["bytes"] or file_checksum(path) != entry["sha256"]:
            return False
    return bool(record["outputs"])


def _write_progress(folder: Path, records: dict[str, dict]) -> None:
    write_manifest({"status": "incomplete", "scenario_records": records, "caution": CAUTION}, folder / PROGRESS_NAME)


def make_briefs(cfg: RunConfig, scenario_folders: dict[str, Path]) -> dict[str, Path]:
    """Zonal statistics, figures and HTML/PDF briefs for the scenarios already written."""
    from .reports import brief_context_from_config, build_brief

    context = brief_context_from_config(cfg, scenario_folders, caution=CAUTION, tool_version=__version__)
    return build_brief(context, Path(cfg.output.folder))


def briefs_of_finished_run(cfg: RunConfig) -> dict[str, Path]:
    """:func:`make_briefs` for the outputs of an earlier run, holding the output folder's lock meanwhile."""
    if getattr(cfg, "brief", None) is None:
        raise ConfigError(f"{cfg.source_path or '<config>'}: the config has no 'brief' section (zones, name_field)")
    _check_brief_inputs(cfg)
    folder = Path(cfg.output.folder)
    if not folder.is_dir():
        raise InputDataError(f"output folder {folder} does not exist; expected the folder of a finished run")
    with RunLock(folder):
        return make_briefs(cfg, {s.name: folder / s.name for s in cfg.scenarios})


def selected_layers(cfg: RunConfig):
    """Return a function scenario -> the layer names to write for it (baseline has no change layers)."""
    wanted = cfg.output.layers
    all_layers = list(SEASONAL_LAYERS) + list(CHANGE_LAYERS)
    names = all_layers if wanted in (None, "all") else list(wanted)
    for required in REQUIRED_LAYERS:
        if required not in names:
            names.append(required)
    baseline = cfg_baseline(cfg)

    def for_scenario(scenario) -> list[str]:
        if scenario.name == baseline:
            return [n for n in names if n not in CHANGE_LAYERS]
        return names

    return for_scenario


def cfg_baseline(cfg: RunConfig) -> str:
    return cfg.baseline or cfg.scenarios[0].name


def class_summary(class_paths: dict[str, Path]) -> pd.DataFrame:
    """Share of valid cells per class for each scenario's ``pathway_class`` COG, read window by window."""
    import rasterio

    rows = []
    for scenario, path in class_paths.items():
        counts = np.zeros(256, np.int64)
        with rasterio.open(path) as src:
            for _, window in src.block_windows(1):
                counts += np.bincount(src.read(1, window=window).ravel(), minlength=256)
        valid = counts[[CLASS_C3, CLASS_CONTESTED, CLASS_C4]].sum()
        row = {"scenario": scenario, "valid_cells": int(valid), "nodata_cells": int(counts[CLASS_NODATA])}
        for code, label in CLASS_NAMES.items():
            row[f"{label} %"] = round(100.0 * counts[code] / valid, 2) if valid else float("nan")
        rows.append(row)
    return pd.DataFrame(rows)


def build_manifest(cfg, config_hash, written, summary, timings, briefs, *, checksums=None, records=None,
                   resumed=()) -> dict[str, Any]:
    """The run manifest: enough to trace every number back to its config, inputs and code.

    checksums: input path -> sha256 (computed here if None). records: scenario name -> {"scenario_hash",
    "outputs"} as kept for resume (outputs are hashed here if None). resumed: scenarios not recomputed.
    """
    if checksums is None:
        checksums = {path: file_checksum(path) for path in sorted(_input_files(cfg))}
    inputs = [{"path": str(path), "bytes": path.stat().st_size, "sha256": checksums[path]} for path in sorted(checksums)]
    if records is None:
        records = {scenario: {"outputs": _output_records(paths)} for scenario, paths in written.items()}
    outputs = {scenario: record["outputs"] for scenario, record in records.items()}
    versions = {}
    for package in _PACKAGES:
        try:
            versions[package] = metadata.version(package)
        except metadata.PackageNotFoundError:
            versions[package] = None
    return {
        "tool": "suitability",
        "tool_version": __version__,
        "status": "complete",
        "created": datetime.now(timezone.utc).isoformat(timespec="seconds"),
        "config_file": str(cfg.source_path or ""),
        "config_hash": config_hash,
        "config": json.loads(cfg.model_dump_json()),
        "inputs": inputs,
        "outputs": outputs,
        "scenario_records": records,
        "resumed_scenarios": list(resumed),
        "briefs": {k: str(v) for k, v in briefs.items()},
        "summary": summary.to_dict(orient="records"),
        "timings": {k: round(v, 3) for k, v in timings.items()},
        "python": platform.python_version(),
        "platform": platform.platform(),
        "packages": versions,
        "caution": CAUTION,
    }


def _input_files(cfg: RunConfig, only=None) -> set[Path]:
    """Every file the run reads: baseline climate, region mask and 'like' raster, scenarios' own layers.

    only: the scenarios whose own layers count (all if None).
    """
    from .inputs import layer_files

    files: set[Path] = set()
    for name, spec in cfg.climate.items():
        files.update(layer_files(spec, cfg.config_dir))
    for extra in (getattr(cfg.region, "mask", None), getattr(cfg.region, "like", None)):
        if extra is not None:
            files.add(Path(extra))
    for scenario in cfg.scenarios if only is None else only:
        for name, spec in (getattr(scenario, "climate", None) or {}).items():
            files.update(layer_files(spec, cfg.config_dir))
    return files


def _change_layers(baseline_paths: dict[str, Path], result: xr.Dataset, chunk: int) -> dict[str, xr.DataArray]:
    import rioxarray

    def open_written(name: str) -> xr.DataArray:
        layer = rioxarray.open_rasterio(baseline_paths[name], chunks={"x": chunk, "y": chunk}, lock=False, masked=False)
        layer = layer.squeeze("band", drop=True)
        return layer.assign_coords(x=result["pathway_advantage"].x, y=result["pathway_advantage"].y)

    base_advantage = open_written("pathway_advantage")
    base_class = open_written("pathway_class")
    return {
        "advantage_change": advantage_change(base_advantage, result["pathway_advantage"]).astype(np.float32),
        "class_transition": class_transition(base_class, result["pathway_class"]),
    }


def _georeferenced(layer, grid: TargetGrid):
    layer = layer.drop_vars([c for c in ("band",) if c in layer.coords])
    return layer.rio.write_crs(grid.crs).rio.write_transform(grid.transform)


def _scenario_tags(scenario, config_hash: str, scenario_hash: str) -> dict[str, str]:
    return {
        "scenario": scenario.name,
        "scenario_description": getattr(scenario, "description", "") or "",
        "co2_ppm": f"{scenario.co2_ppm:g}",
        "o2_percent": f"{scenario.o2_percent:g}",
        "temperature_offset_c": f"{scenario.temperature_offset_c:g}",
        "config_hash": config_hash,
        "scenario_hash": scenario_hash,
        "tool": f"suitability {__version__}",
        "caution": CAUTION,
    }


def _ordered_scenarios(cfg: RunConfig) -> list:
    baseline = cfg_baseline(cfg)
    names = [s.name for s in cfg.scenarios]
    if baseline not in names:
        raise ConfigError(f"baseline: scenario {baseline!r} is not defined; scenarios are {names}")
    return sorted(cfg.scenarios, key=lambda s: s.name != baseline)


def _with_overrides(cfg: RunConfig, **overrides) -> RunConfig:
    compute_updates = {k: v for k, v in overrides.items() if k != "overwrite" and v is not None}
    updates = {}
    if compute_updates:
        updates["compute"] = cfg.compute.model_copy(update=compute_updates)
    if overrides.get("overwrite") is not None:
        updates["output"] = cfg.output.model_copy(update={"overwrite": overrides["overwrite"]})
    if not updates:
        return cfg
    return cfg.model_copy(update=updates)


__all__ = ["run", "RunResult", "CAUTION", "class_summary", "scenario_hash", "briefs_of_finished_run", "InputDataError"]
