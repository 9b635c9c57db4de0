"""Regional briefs: zonal statistics per district, figures, and HTML/PDF briefs from the output rasters."""

from suitability.reports.brief import (
    BriefContext,
    ScenarioInfo,
    brief_context_from_config,
    build_brief,
    summary_sentences,
)
from suitability.reports.zones import (
    read_zones,
    write_table_csv,
    write_table_geopackage,
    zonal_statistics,
)

__all__ = [
    "BriefContext",
    "ScenarioInfo",
    "brief_context_from_config",
    "build_brief",
    "read_zones",
    "summary_sentences",
    "write_table_csv",
    "write_table_geopackage",
    "zonal_statistics",
]
