"""What a run records about itself, so that every number can be traced to its config, inputs and code.

The manifest (``manifest.json``) holds the validated config and its hash, every input file with its size
and sha256, every output with its size and sha256, the class summary, timings, Python, platform and
package versions, and the caution. The same provenance goes, shorter, into every GeoTIFF's tags
(:func:`scenario_tags`). The class summary (:func:`class_summary`) is the table the CLI prints.
"""

from __future__ import annotations

import json
import platform
from datetime import datetime, timezone
from importlib import metadata
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from ._version import __version__
from .assumptions import run_assumptions
from .caution import CAUTION, invented_note
from .config import RunConfig
from .inputs import layer_files
from .inputs.inspection import derived_methods
from .outputs import file_checksum
from .variables import CLASS_C3, CLASS_C4, CLASS_CONTESTED, CLASS_NAMES, CLASS_NO_SEASON, CLASS_NODATA

MANIFEST_NAME = "manifest.json"
#: Column keys of the class shares in the class summary, as in the district table (share_c3, ...).
SHARE_KEYS = {CLASS_C3: "c3", CLASS_CONTESTED: "contested", CLASS_C4: "c4", CLASS_NO_SEASON: "noseason"}
#: Packages whose versions the manifest records.
PACKAGES = ("numpy", "xarray", "dask", "distributed", "rasterio", "rioxarray", "rio-cogeo", "pyproj",
            "odc-geo", "pydantic", "numba", "geopandas", "exactextract")


def input_files(cfg: RunConfig, only=None) -> set[Path]:
    """Every file the run reads: baseline climate, region mask, 'like' raster and extent-giving zones file,
    scenarios' own layers.

    only: the scenarios whose own layers count (all if None).
    """
    files: set[Path] = set()
    for spec in cfg.climate.values():
        files.update(layer_files(spec, cfg.config_dir))
    zones = getattr(cfg.region.grid, "zones", None) if cfg.region.grid is not None else None
    for extra in (cfg.region.mask, cfg.region.like, zones):
        if extra is not None:
            files.add(Path(extra))
    for scenario in cfg.scenarios if only is None else only:
        for member in (scenario.members or [None]):  # one file (set) per member of a pattern or list
            own = scenario.member_climate(member) if member else (scenario.climate or {})
            for spec in own.values():
                files.update(layer_files(spec, cfg.config_dir))
    return files


def input_checksums(cfg: RunConfig) -> dict[Path, str]:
    """sha256 of every input file of the run, by path (sorted)."""
    return {path: file_checksum(path) for path in sorted(input_files(cfg))}


def output_records(paths: dict[str, Path]) -> dict[str, dict[str, Any]]:
    """Output name -> {"path", "bytes", "sha256"} of written files."""
    return {name: {"path": str(p), "bytes": p.stat().st_size, "sha256": file_checksum(p)} for name, p in paths.items()}


def scenario_tags(scenario, config_hash: str, scenario_hash: str, *, invented_region: str | None = None) -> dict[str, str]:
    """Dataset tags of every GeoTIFF (and attributes of the datacube) of one scenario.

    invented_region: the region's name when the config marks it invented; a ``region_note`` tag says so.
    """
    note = {"region_note": invented_note(invented_region)} if invented_region else {}
    return {
        **note,
        "scenario": scenario.name,
        "scenario_description": scenario.description or "",
        "co2_ppm": f"{scenario.co2_ppm:g}",
        "o2_percent": f"{scenario.o2_percent:g}",
        "temperature_offset_c": f"{scenario.temperature_offset_c:g}",
        "config_hash": config_hash,
        "scenario_hash": scenario_hash,
        "tool": f"suitability {__version__}",
        "caution": CAUTION,
    }


#: The data dictionary of ``class_summary.csv`` (written beside it as ``class_summary.columns.csv``):
#: every column of :func:`class_summary` with its meaning and, in the last [brackets], its units.
SUMMARY_COLUMNS: dict[str, str] = {
    "scenario": "scenario name, as in the config's scenarios [none: text]",
    "valid_cells": "grid cells of the scenario's pathway_class map with a class (C3, contested, C4 or no "
                   "growing season) [cells]",
    "nodata_cells": "grid cells of the map without a result (outside the mask, nodata or invalid input) [cells]",
    **{f"share_{key}": f"share of the valid cells where the map shows {CLASS_NAMES[code]!r} (cells / valid_cells, "
                       "4 decimals) [0-1]" for code, key in SHARE_KEYS.items()},
}


def class_summary(class_paths: dict[str, Path]) -> pd.DataFrame:
    """Share of valid cells per class for each scenario's ``pathway_class`` COG, read window by window.

    Columns: scenario, valid_cells (cells with a class: C3, contested, C4 or no growing season),
    nodata_cells, and ``share_<class>`` per class as a fraction of the valid cells [0-1, 4 decimals], the
    convention of every table the tool writes (the CLI shows them as percent). The meaning and units of
    each column: :data:`SUMMARY_COLUMNS` (written beside the CSV as ``class_summary.columns.csv``)."""
    import rasterio

    rows = []
    for scenario, path in class_paths.items():
        counts = np.zeros(256, np.int64)
        with rasterio.open(path) as src:
            for _, window in src.block_windows(1):
                counts += np.bincount(src.read(1, window=window).ravel(), minlength=256)
        valid = counts[list(CLASS_NAMES)].sum()
        row = {"scenario": scenario, "valid_cells": int(valid), "nodata_cells": int(counts[CLASS_NODATA])}
        for code, key in SHARE_KEYS.items():
            row[f"share_{key}"] = round(float(counts[code] / valid), 4) if valid else float("nan")
        rows.append(row)
    return pd.DataFrame(rows)


def build_manifest(cfg, config_hash, written, summary, timings, briefs, *, checksums=None, records=None,
                   resumed=(), input_time=None, ensembles=None) -> dict[str, Any]:
    """The run manifest: enough to trace every number back to its config, inputs and code.

    checksums: input path -> sha256 (computed here if None). input_time: "baseline" or scenario name ->
    layer -> calendar, period and years of the climatology it was made from (member -> layer -> ... for an
    ensemble). ensembles: scenario -> its members. The manifest's ``member_outputs`` lists each member's own
    layers (scenario -> member -> layer -> path), also recorded among the scenario's ``outputs``. records: scenario name -> {"scenario_hash",
    "outputs"} as kept for resume (outputs are hashed here if None). resumed: scenarios not recomputed.
    """
    if checksums is None:
        checksums = input_checksums(cfg)
    inputs = [{"path": str(path), "bytes": path.stat().st_size, "sha256": checksums[path]} for path in sorted(checksums)]
    if records is None:
        records = {scenario: {"outputs": output_records(paths)} for scenario, paths in written.items()}
    outputs = {scenario: record["outputs"] for scenario, record in records.items()}
    return {
        "tool": "suitability",
        "tool_version": __version__,
        "status": "complete",
        "created": datetime.now(timezone.utc).isoformat(timespec="seconds"),
        "config_file": str(cfg.source_path or ""),
        "config_hash": config_hash,
        "config": json.loads(cfg.model_dump_json()),
        "inputs": inputs,
        "input_periods": input_time or {},
        "ensembles": {name: list(members) for name, members in (ensembles or {}).items()},
        "derived": derived_methods(cfg),
        "member_outputs": member_outputs(outputs),
        "outputs": outputs,
        "scenario_records": records,
        "resumed_scenarios": list(resumed),
        "briefs": {k: str(v) for k, v in briefs.items()},
        "summary": summary.to_dict(orient="records"),
        "assumptions": run_assumptions(cfg),
        "uncertainty": uncertainty_record(cfg),
        "timings": {k: round(v, 3) for k, v in timings.items()},
        "python": platform.python_version(),
        "platform": platform.platform(),
        "packages": package_versions(),
        "caution": CAUTION,
        **({"region_note": invented_note(cfg.region.name)} if getattr(cfg.region, "invented", False) else {}),
    }


def uncertainty_record(cfg) -> dict[str, Any] | None:
    """The parameter draws of a run (None without ``uncertainty``): draws, seed, method and every declared
    spread of both parameter sets, with its source and whether it varied."""
    if cfg.uncertainty is None:
        return None
    from .physiology.uncertainty import varied_parameters

    return {**cfg.uncertainty.model_dump(mode="json"),
            "parameters": varied_parameters(cfg.physiology.c3.as_params(), cfg.physiology.c4.as_params())}


def member_outputs(outputs: dict[str, dict[str, dict]]) -> dict[str, dict[str, dict[str, str]]]:
    """scenario -> member -> layer -> path of the members' own outputs (``output.member_outputs``), from the
    scenario's output records, where they are named ``members/<member>/<layer>``."""
    found: dict[str, dict[str, dict[str, str]]] = {}
    for scenario, records in outputs.items():
        for name, entry in records.items():
            parts = name.split("/")
            if len(parts) == 3 and parts[0] == "members":
                found.setdefault(scenario, {}).setdefault(parts[1], {})[parts[2]] = entry["path"]
    return found


def package_versions() -> dict[str, str | None]:
    """Installed version of each of :data:`PACKAGES` (None if not installed)."""
    versions = {}
    for package in PACKAGES:
        try:
            versions[package] = metadata.version(package)
        except metadata.PackageNotFoundError:
            versions[package] = None
    return versions


__all__ = ["MANIFEST_NAME", "SUMMARY_COLUMNS", "member_outputs", "input_files", "input_checksums", "output_records", "scenario_tags", "class_summary", "build_manifest",
           "uncertainty_record",
           "package_versions", "PACKAGES"]
