"""Regional briefs: zonal statistics per district, figures, and HTML/PDF briefs from the output rasters."""

from suitability.reports.brief import (
    BriefContext,
    ScenarioInfo,
    brief_context_from_config,
    build_brief,
)
from suitability.reports.summary import headline, region_table, transition_matrix
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
    "headline",
    "read_zones",
    "region_table",
    "transition_matrix",
    "write_table_csv",
    "write_table_geopackage",
    "zonal_statistics",
]
