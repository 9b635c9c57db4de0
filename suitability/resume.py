"""What ``run(resume=True)`` needs: a hash of everything a scenario's outputs depend on, and records of the
scenarios finished so far.

During a run a hidden progress file (:data:`PROGRESS_NAME`) holds, after each finished scenario, its
scenario hash and the size and sha256 of each of its outputs; the manifest of a complete run holds the
same records. A resumed run keeps a scenario whose hash is unchanged and whose outputs are still exactly
what was recorded, and recomputes the others; if the baseline is recomputed, every scenario is (their
change layers compare with it).
"""

from __future__ import annotations

import hashlib
import json
from pathlib import Path
from typing import Any

from ._version import __version__
from .caution import CAUTION
from .config import RunConfig
from .outputs import file_checksum, write_manifest
from .provenance import MANIFEST_NAME, input_files, output_records

#: Hidden record of the scenarios finished so far, kept during a run for ``resume``; removed at the end.
PROGRESS_NAME = ".suitability-progress.json"


def scenario_hash(cfg: RunConfig, scenario, layer_names, input_checksums: dict[Path, str], members=None) -> str:
    """sha256 (hex) of everything a scenario's outputs depend on, for ``run(resume=True)``.

    That is: the tool version; the region, climate, season, physiology and classes sections (and
    ``uncertainty`` when set); the layers
    written for it and the COG and datacube settings; the scenario itself and (for other scenarios, whose
    change layers compare with it) the baseline scenario; and the sha256 of every input file it reads.
    For an ensemble (``members``: its member names, also those of a member dimension), the members and
    whether each member's layers are written (``output.member_outputs``).
    Not included, since results do not depend on them: the compute section, output.folder,
    output.overwrite, the brief section and the other scenarios.
    """
    dump = cfg.model_dump(mode="json")
    baseline = cfg.baseline_scenario
    files = input_files(cfg, only=[baseline] + ([] if scenario.name == baseline.name else [scenario]))
    recipe = {
        "tool_version": __version__,
        **{section: dump[section] for section in ("region", "climate", "season", "physiology", "classes")},
        "output": {"layers": sorted(layer_names), "cog": dump["output"]["cog"], "datacube": dump["output"]["datacube"]},
        "scenario": scenario.model_dump(mode="json"),
        "baseline": None if scenario.name == baseline.name else baseline.model_dump(mode="json"),
        "inputs": {str(path): input_checksums[path] for path in sorted(files)},
    }
    if dump.get("uncertainty") is not None:  # the parameter draws (a config without them hashes as before)
        recipe["uncertainty"] = dump["uncertainty"]
    if members:
        recipe["members"] = {"names": list(members), "outputs": dump["output"]["member_outputs"]}
    text = json.dumps(recipe, sort_keys=True, separators=(",", ":"), ensure_ascii=False)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def scenario_record(scenario_hash: str, paths: dict[str, Path]) -> dict[str, Any]:
    """The record of one finished scenario: its hash and the size and sha256 of each output."""
    return {"scenario_hash": scenario_hash, "outputs": output_records(paths)}


def record_paths(folder: Path, scenario: str, record: dict) -> dict[str, Path]:
    """Output name -> path in ``folder``'s scenario folder, of a record. A member's output is named
    ``members/<member>/<layer>`` and lies in that sub-folder."""
    return {name: folder / scenario / Path(name).parent / Path(entry["path"]).name
            for name, entry in record["outputs"].items()}


def verified_records(folder: Path, hashes: dict[str, str], baseline: str) -> dict[str, dict]:
    """The previous records of the scenarios that need no recomputing (see the module docstring)."""
    kept = {}
    for name, record in _previous_records(folder).items():
        try:
            if name in hashes and record["scenario_hash"] == hashes[name] and _outputs_match(folder, name, record):
                kept[name] = record
        except (KeyError, TypeError, AttributeError):
            continue  # a record of another shape: recompute
    return kept if baseline in kept else {}


def write_progress(folder: Path, records: dict[str, dict]) -> None:
    """Write the progress file with the records of the scenarios finished so far."""
    write_manifest({"status": "incomplete", "scenario_records": records, "caution": CAUTION}, folder / PROGRESS_NAME)


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


def _outputs_match(folder: Path, scenario: str, record: dict) -> bool:
    for path, entry in zip(record_paths(folder, scenario, record).values(), record["outputs"].values()):
        if not path.is_file() or path.stat().st_size != entry["bytes"] or file_checksum(path) != entry["sha256"]:
            return False
    return bool(record["outputs"])


__all__ = ["PROGRESS_NAME", "scenario_hash", "scenario_record", "record_paths", "verified_records", "write_progress"]
