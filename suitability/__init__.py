"""suitability: where C4 plants out-assimilate C3 plants, today and under climate scenarios.

Public API: :func:`run` (a whole config: inputs to maps, tables and briefs) and :func:`evaluate` (an
in-memory xarray Dataset of monthly climate). Results are potential, model-based estimates, not yield
forecasts; defer to local agronomic advice, field trials and local regulations.
"""

from __future__ import annotations

from ._version import __version__

__all__ = ["run", "evaluate", "load_config", "RunResult", "__version__"]


def __getattr__(name: str):
    # Imported lazily so that `import suitability.physiology` does not pull in the raster stack.
    if name in ("run", "RunResult"):
        from . import pipeline

        return getattr(pipeline, name)
    if name == "evaluate":
        from .evaluation import evaluate

        return evaluate
    if name == "load_config":
        from .config import load_config

        return load_config
    raise AttributeError(f"module 'suitability' has no attribute {name!r}")
