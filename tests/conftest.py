"""Shared fixtures. The demo region used here is invented (demo_region/README.md)."""

from __future__ import annotations

from pathlib import Path

import pytest
import yaml

REPO = Path(__file__).resolve().parents[1]
DEMO_CONFIG = REPO / "configs" / "demo.yaml"


def write_demo_config(folder: Path, **changes) -> Path:
    """Copy configs/demo.yaml into ``folder`` with absolute input paths and outputs in ``folder/out``.

    Keyword arguments replace whole top-level sections (e.g. ``season={"months": [1]}``).
    """
    config = yaml.safe_load(DEMO_CONFIG.read_text())
    for layer in config["climate"].values():
        layer["path"] = str((DEMO_CONFIG.parent / layer["path"]).resolve())
    if "brief" in config:
        config["brief"]["zones"] = str((DEMO_CONFIG.parent / config["brief"]["zones"]).resolve())
    config["output"]["folder"] = str(folder / "out")
    for key, value in changes.items():
        if value is None:
            config.pop(key, None)
        else:
            config[key] = value
    path = folder / "config.yaml"
    path.write_text(yaml.safe_dump(config, sort_keys=False))
    return path


@pytest.fixture
def demo_config(tmp_path):
    """A function making a private copy of the demo config (see write_demo_config)."""
    return lambda **changes: write_demo_config(tmp_path, **changes)
