"""What ``suitability check`` reports about every input, without computing the model."""

from __future__ import annotations

import warnings
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ..errors import InputDataError
from ..grid import TargetGrid, align_to_grid
from ..variables import INPUT_VARIABLES, PENMAN_MONTEITH, pet_method
from .checks import SAMPLE_SIDE, cells_per_grid_cell, coverage_share, lost_cells
from .cf import one_handle_per_file
from .climate import load_mask, open_converted
from .periods import ShortPeriodWarning
from .raster import read_raster
from .readers import absolute, member_labels
from .units import units_differ


@dataclass
class LayerReport:
    """What :func:`inspect_inputs` found about one input layer (no model computed).

    layer: config layer name; output_name: the name it is returned under (``par``, ``water_availability``).
    scenario: None for the baseline climate, else the scenario whose override this is.
    path: the file (pattern as written for ``{month}`` paths); driver: "GTiff", "netCDF", "Zarr", ...
    crs: CRS as text; native_resolution: (x, y) cell size in CRS units.
    declared_units: the config's units, else the file's; file_units: the file's units attribute;
    canonical_units: the units it is converted to. overlap_share: share of the region inside the layer's
    extent [0-1]; nodata_share / out_of_range_share: shares of a sample of the layer within the region
    (see :func:`.checks.read_sample`) that are nodata / outside the valid range after conversion. time: for a
    monthly layer, its time axis: calendar, period and years of the climatology (or "12 months").
    problems: errors that
    stop a run; warnings: notes.
    """

    layer: str
    path: str
    scenario: str | None = None
    output_name: str | None = None
    driver: str | None = None
    crs: str | None = None
    native_resolution: tuple[float, float] | None = None
    declared_units: str | None = None
    file_units: str | None = None
    canonical_units: str | None = None
    overlap_share: float | None = None
    nodata_share: float | None = None
    out_of_range_share: float | None = None
    time: str | None = None
    variable: str | None = None
    problems: list[str] = field(default_factory=list)
    warnings: list[str] = field(default_factory=list)


def inspect_inputs(config: Any) -> list[LayerReport]:
    """Open every input of ``config`` (baseline climate, scenario overrides, region mask) and report on it.

    Reads only metadata and samples of at most 256 x 256 cells per time step; never computes the model.
    Problems that would stop a run are listed per layer in ``problems`` rather than raised, so one check
    shows all of them. Each NetCDF file is opened once (:func:`.cf.one_handle_per_file`).
    """
    with one_handle_per_file():
        return _inspect_inputs(config)


def _inspect_inputs(config: Any) -> list[LayerReport]:
    reports: list[LayerReport] = []
    try:
        grid = TargetGrid.from_region(config.region, config.config_dir)
    except (InputDataError, ValueError) as exc:
        grid = None
        reports.append(LayerReport(layer="region", path=str(getattr(config.region, "like", "") or ""), problems=[str(exc)]))
    entries: list[tuple[str | None, str, Any]] = [(None, n, s) for n, s in config.climate.items()]
    for scenario in config.scenarios:
        entries += [(scenario.name, n, s) for n, s in (scenario.climate.items() if scenario.climate else ())]
    members_of = {s.name: _members(s, config.config_dir) for s in config.scenarios if s.climate}
    scenarios = {s.name: s for s in config.scenarios}
    for scenario, name, spec in entries:
        members = members_of.get(scenario) if scenario else None
        if not members:
            reports.append(_inspect_layer(name, spec, config.config_dir, grid, scenario))
            continue
        # an ensemble: every member is opened; one line per layer, problems named by member
        each = {m: _inspect_layer(name, scenarios[scenario].member_climate(m)[name], config.config_dir, grid, scenario, m)
                for m in members}
        report = next(iter(each.values()))
        report.path = str(spec.path[0]) + f" ... ({len(spec.path)} files)" if isinstance(spec.path, list) else str(spec.path)
        report.problems = [f"member {m}: {p}" for m, r in each.items() for p in r.problems]
        report.warnings = sorted({w for r in each.values() for w in r.warnings})
        opened = {m: r for m, r in each.items() if not r.problems}
        kinds = {r.time for r in opened.values()}
        first = next(iter(opened.values()), report)
        steps = {m: next((k for k in ("daily", "monthly") if (r.time or "").startswith(k)), "12 months")
                 for m, r in opened.items()}
        if len(set(steps.values())) > 1:
            report.problems.append("members mix time steps (" + "; ".join(f"{m}: {r.time}" for m, r in opened.items())
                                   + "); expected the same (all monthly or all daily)")
        variables = {m: r.variable for m, r in opened.items() if r.variable}
        if len(set(variables.values())) > 1:
            report.problems.append("members are read from different variables (" + ", ".join(
                f"{m}: {v}" for m, v in variables.items()) + "); expected the same variable in every member")
        report.time = (f"{len(members)} members ({', '.join(members)}); {first.time}" if len(kinds) <= 1
                       else f"{len(members)} members, time axes differ: " + "; ".join(f"{m}: {r.time}" for m, r in opened.items()))
        reports.append(report)
    if getattr(config.region, "mask", None) is not None and grid is not None:
        reports.append(_inspect_mask(config.region, grid, config.config_dir))
    reports += _derived_water(config)
    if getattr(config, "brief", None) is not None:
        from .districts import inspect_districts

        reports.append(inspect_districts(config.brief.zones, config.brief.name_field, grid))
    return reports


def _derived_water(config: Any) -> list[LayerReport]:
    """A line per climate (baseline and scenarios with their own rainfall) whose water comes from rainfall."""
    reports = []
    for scenario, text in derived_methods(config).items():
        report = LayerReport(layer="water_availability", path="(derived from precipitation)",
                             scenario=None if scenario == "baseline" else scenario, crs="-",
                             output_name="water_availability", canonical_units="1")
        report.time = text
        reports.append(report)
    return reports


def derived_methods(config: Any) -> dict[str, str]:
    """"baseline" or scenario name -> how its water availability is derived from rainfall (the bucket, its
    capacity, the PET method), for every climate (the baseline's, a scenario's own) that gives
    ``precipitation``. ``check`` prints it; the manifest records it (``"derived"``)."""
    methods = {}
    physiology = getattr(config, "physiology", None)
    capacity = getattr(physiology, "soil_water_capacity_mm", 150.0)
    retention = getattr(physiology, "soil_water_retention", "exponential")
    sections = [("baseline", config.climate)] + [(s.name, s.climate) for s in config.scenarios if s.climate]
    for scenario, climate in sections:
        if "precipitation" not in climate:
            continue
        base = config.climate
        names = set(base.keys()) | set(climate.keys())
        if "par" in climate:  # a scenario's par replaces the baseline's shortwave
            names -= {"shortwave"}
        pet = "pet as given" if "pet" in names else f"PET by {pet_method(names)}" + (
            "" if pet_method(names) == PENMAN_MONTEITH else " from tmin/tmax (no wind_speed with humidity or vpd "
            "and shortwave for Penman-Monteith)")
        bucket = ("soil_water_capacity layer" if "soil_water_capacity" in climate or "soil_water_capacity" in base
                  else f"capacity {capacity:g} mm")
        methods[scenario] = (f"derived: AET/PET of a monthly soil-water balance (Thornthwaite & Mather, {retention} "
                             f"retention, {bucket}); {pet}")
    return methods


def _members(scenario: Any, config_dir) -> list[str] | None:
    """A scenario's members: its ``members`` list, else the labels of a member dimension of its files."""
    if scenario.members:
        return list(scenario.members)
    for name, spec in scenario.climate.items():
        if isinstance(spec.path, list):
            continue
        try:
            labels = member_labels(name, spec, absolute(spec.path, config_dir), INPUT_VARIABLES[name].monthly)
        except InputDataError:
            continue  # reported on the layer's own line
        if labels:
            return labels
    return None


def _inspect_layer(name: str, spec: Any, config_dir, grid: TargetGrid | None, scenario: str | None,
                   member: str | None = None) -> LayerReport:
    report = LayerReport(layer=name, path=str(spec.path), scenario=scenario, declared_units=getattr(spec, "units", None))
    try:
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always", ShortPeriodWarning)
            opened = open_converted(name, spec, config_dir, SAMPLE_SIDE * 2, member)
            converted, native = opened.converted, opened.native
    except InputDataError as exc:
        report.problems.append(str(exc))
        return report
    for warning in caught:
        if issubclass(warning.category, ShortPeriodWarning):
            report.warnings.append(str(warning.message).split(": ", 1)[-1])
        else:
            warnings.warn_explicit(warning.message, warning.category, warning.filename, warning.lineno)
    if native.time is not None:
        report.time = native.time.describe()
    elif "month" in converted.dims:
        report.time = "12 months"
    report.output_name = converted.name
    report.variable = native.variable
    report.driver = native.driver
    report.warnings += [f"on reading: {t}" for t in native.transformations]
    report.file_units = native.file_units
    report.declared_units = report.declared_units or native.file_units
    report.canonical_units = converted.attrs["units"]
    crs = converted.rio.crs
    report.crs = crs.to_string() if crs is not None else None
    res_x, res_y = converted.rio.resolution(recalc=True)
    report.native_resolution = (abs(float(res_x)), abs(float(res_y)))
    if name == "wind_speed":
        height = getattr(spec, "height_m", None)
        report.warnings.append(f"wind at {height:g} m brought to 2 m (FAO-56 eq. 47)" if height not in (None, 2.0)
                               else "wind taken as measured at 2 m (set height_m, e.g. 10 for CMIP sfcWind)")
    if spec.units and native.file_units and units_differ(spec.units, native.file_units):
        report.warnings.append(f"declared units {spec.units!r} override the file's {native.file_units!r}")
    if grid is None:
        return report
    report.overlap_share = coverage_share(converted, grid)
    if report.overlap_share <= 0.0:
        report.problems.append("does not overlap the region")
        return report
    if report.overlap_share < 1.0 - 1e-6:
        report.warnings.append(f"covers {report.overlap_share:.1%} of the region; cells outside are NaN")
    resampling = getattr(spec, "resampling", None) or INPUT_VARIABLES[name].resampling
    try:
        align_to_grid(converted, grid, resampling, SAMPLE_SIDE * 2)  # lazy: only what a run would set up
    except InputDataError as exc:
        report.problems.append(str(exc))
        return report
    ratio = cells_per_grid_cell(converted, grid)
    if ratio is not None and ratio > 4.0 and resampling in ("nearest", "bilinear", "cubic"):
        report.warnings.append(f"about {ratio:.0f} layer cells per grid cell: '{resampling}' uses only the cells next to "
                               "each grid cell centre; resampling: average uses them all")
    where = f"{spec.path}: layer {name!r}"
    sample = opened.canonical_sample(grid, where)
    report.warnings += [w.removeprefix(f"{where}: ") for w in lost_cells(name, converted, sample, where)]
    valid = np.isfinite(sample)
    report.nodata_share = float(1.0 - valid.mean()) if sample.size else None
    low, high = INPUT_VARIABLES[converted.name].valid_range
    inside = (sample[valid] >= low) & (sample[valid] <= high)
    report.out_of_range_share = float(1.0 - inside.mean()) if inside.size else None
    if report.nodata_share == 1.0:
        report.problems.append("no valid value within the region (on a sample)")
    return report


def _inspect_mask(region: Any, grid: TargetGrid, config_dir) -> LayerReport:
    report = LayerReport(layer="mask", path=str(region.mask))
    try:
        native = read_raster("mask", absolute(region.mask, config_dir), chunk=SAMPLE_SIDE * 2)
    except InputDataError as exc:
        report.problems.append(str(exc))
        return report
    report.driver = native.driver
    report.crs = native.data.rio.crs.to_string()
    report.overlap_share = coverage_share(native.data, grid)
    if report.overlap_share <= 0.0:
        report.problems.append("does not overlap the region")
        return report
    try:
        load_mask(region, grid, config_dir, SAMPLE_SIDE * 2)  # the same check as a run makes
    except InputDataError as exc:
        report.problems.append(str(exc))
    return report
