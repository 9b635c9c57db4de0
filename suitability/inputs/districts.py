"""The district polygons of the brief: reading them (``run``, ``brief``) and reporting on them (``check``).

They are an input like the climate: ``check`` opens them and reports CRS, name field, count, duplicate
or empty names and overlap with the grid, so a wrong ``name_field`` fails ``check`` as it would fail ``run``.
"""

from __future__ import annotations

import os
from pathlib import Path

import geopandas as gpd

from ..errors import InputDataError


def read_zones(zones_path: str | os.PathLike, name_field: str) -> gpd.GeoDataFrame:
    """Read district polygons (GeoPackage, GeoJSON, Shapefile, anything pyogrio reads).

    Returns a GeoDataFrame with a ``district`` column (the names, as text) and the geometry, in the file's
    CRS and order. Raises InputDataError naming the file when it cannot be read, is empty, has no CRS,
    lacks ``name_field`` (the message lists the fields it has), has empty names or duplicate names.
    """
    path = Path(zones_path)
    if not path.exists():
        raise InputDataError(f"{path}: district file not found; expected a GeoPackage, GeoJSON or Shapefile")
    try:
        zones = gpd.read_file(path, engine="pyogrio")
    except Exception as exc:  # pyogrio raises several types; all mean the same thing to the user
        raise InputDataError(f"{path}: cannot read the districts ({exc}); expected a polygon layer") from exc
    if len(zones) == 0:
        raise InputDataError(f"{path}: the district file holds no features; expected one polygon per district")
    if zones.crs is None:
        raise InputDataError(f"{path}: the districts have no CRS; expected a layer with a defined CRS")
    if name_field not in zones.columns:
        fields = ", ".join(str(c) for c in zones.columns if c != zones.geometry.name) or "(none)"
        raise InputDataError(
            f"{path}: no field {name_field!r} for the district names; the layer has the fields: {fields}"
        )
    names = zones[name_field]
    if names.isna().any() or (names.astype(str).str.strip() == "").any():
        raise InputDataError(f"{path}: field {name_field!r} has empty district names; expected a name per district")
    names = names.astype(str)
    duplicated = sorted(set(names[names.duplicated()]))
    if duplicated:
        raise InputDataError(
            f"{path}: field {name_field!r} has duplicate district names: {', '.join(duplicated)}; "
            "expected one polygon (or multipolygon) per name"
        )
    kinds = zones.geometry.geom_type
    wrong = ~kinds.isin(["Polygon", "MultiPolygon"])
    if wrong.any():
        examples = ", ".join(f"{n!r} ({k})" for n, k in list(zip(names[wrong], kinds[wrong].fillna("no geometry")))[:5])
        raise InputDataError(
            f"{path}: {int(wrong.sum())} district(s) are not polygons: {examples}; expected one polygon "
            "(or multipolygon) per district (points and lines have no area to summarise)"
        )
    return gpd.GeoDataFrame({"district": names.to_numpy()}, geometry=zones.geometry.to_numpy(), crs=zones.crs)


def inspect_districts(zones_path, name_field: str, grid=None):
    """What ``check`` reports about the district file: a :class:`~.inspection.LayerReport` named "districts"
    with its CRS, the name field and the number of districts (``time`` column), every problem that
    :func:`read_zones` would raise, and a note on districts off the grid."""
    from .inspection import LayerReport

    report = LayerReport(layer="districts", path=str(zones_path), canonical_units="-")
    try:
        zones = read_zones(zones_path, name_field)
    except InputDataError as exc:
        report.problems.append(str(exc).split(": ", 1)[-1] if str(exc).startswith(str(zones_path)) else str(exc))
        try:  # still say what the file is, when it can be opened at all
            raw = gpd.read_file(zones_path, engine="pyogrio", rows=1)
            report.crs = raw.crs.to_string() if raw.crs is not None else None
        except Exception:  # noqa: BLE001 - the problem above already says what is wrong
            pass
        return report
    report.driver = Path(zones_path).suffix.lstrip(".") or None
    report.crs = zones.crs.to_string()
    report.time = f"{len(zones)} districts, names from field {name_field!r}"
    if grid is not None:
        import shapely

        box = gpd.GeoSeries([shapely.box(*grid.bounds)], crs=grid.crs.to_wkt()).to_crs(zones.crs).iloc[0]
        touching = zones.geometry.intersects(box)
        report.overlap_share = float(touching.mean())
        if not touching.any():
            report.problems.append("no district overlaps the region's grid")
        elif not touching.all():
            outside = list(zones.loc[~touching, "district"])
            shown = ", ".join(outside[:5]) + (f" and {len(outside) - 5} more" if len(outside) > 5 else "")
            report.warnings.append(f"{len(outside)} district(s) lie off the grid and will have no results: {shown}")
    return report


__all__ = ["read_zones", "inspect_districts"]
