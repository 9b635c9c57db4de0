"""The caution every output carries, written once: the CLI prints it, briefs show it, GeoTIFF tags, the
NetCDF datacube, the manifest and :class:`suitability.pipeline.RunResult` hold it."""

CAUTION = (
    "Results are potential, model-based estimates of where C4 or C3 plants have the physiological "
    "advantage; they are not yield forecasts. Local soils, irrigation, pests, markets and farmer knowledge "
    "are not represented. Confirm with local agronomic advice, field trials and local regulations before acting."
)


def invented_note(region: str) -> str:
    """The line every output of an invented region carries (config ``region.invented``): briefs, GeoTIFF
    tags, the datacube and the manifest."""
    return (f"Invented region: {region} does not exist. Its climate, terrain and districts were made up to "
            "show what the tool does; nothing here describes a real place.")
