"""The YAML config: the schema (:mod:`.schema`) and loading with its error messages (:mod:`.loading`).

Everything a caller needs is importable from here: ``load_config(path)``, ``validate_config(mapping)``,
the section models (``RunConfig``, ``ScenarioConfig``, ...) and the message helpers.
"""

from .loading import dotted_key, format_validation_error, load_config, validate_config, validate_section
from .schema import (
    ENGINES,
    LOCAL_SCHEDULERS,
    MEMBER_FIELD,
    MONTH_FIELD,
    BriefConfig,
    UncertaintyConfig,
    ClassesConfig,
    ClimateConfig,
    ClimateLayers,
    CogConfig,
    ComputeConfig,
    GridConfig,
    LayerSpec,
    OutputConfig,
    PathwayConfig,
    PhysiologyConfig,
    RegionConfig,
    RunConfig,
    ScenarioConfig,
    SeasonConfig,
    is_month_pattern,
    parse_crs,
)

__all__ = [
    "RunConfig", "RegionConfig", "GridConfig", "LayerSpec", "ClimateLayers", "ClimateConfig", "SeasonConfig",
    "PathwayConfig", "PhysiologyConfig", "ScenarioConfig", "ClassesConfig", "CogConfig", "OutputConfig",
    "ComputeConfig", "BriefConfig", "UncertaintyConfig", "load_config", "validate_config", "validate_section", "parse_crs",
    "is_month_pattern", "MONTH_FIELD", "MEMBER_FIELD", "ENGINES", "LOCAL_SCHEDULERS", "dotted_key", "format_validation_error",
]
