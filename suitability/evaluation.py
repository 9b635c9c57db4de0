"""``suitability.evaluate``: the model on an xarray Dataset as researchers have it.

This wrapper brings a dataset into the form :func:`suitability.model.evaluate` computes on, and labels
what comes back; it contains no physiology:

- dimensions in any order; the time axis called ``month`` (values 1..12) or ``time`` (12 time steps of a
  monthly climatology, one per calendar month; several years must be averaged first);
- horizontal dimensions ``y``/``x``, ``lat``/``lon`` or ``latitude``/``longitude``; each cell's latitude is
  taken from a ``latitude`` variable or coordinate if there is one, else from 1-D or 2-D ``lat`` /
  ``latitude`` coordinates, else computed from the ``x``/``y`` coordinates and the CRS (the ``crs``
  argument, or the CRS written on the dataset with rioxarray);
- variables in the units they declare (a ``units`` attribute is converted to the canonical units of
  :data:`suitability.variables.INPUT_VARIABLES`; without one, canonical units are assumed).

Anything it cannot use is an :class:`~suitability.errors.InputDataError` (a ``ValueError``) naming what is
missing and what was expected. The result's variables carry CF attributes (``units``, ``long_name``) from
the output-layer registry, the dataset carries the caution and the assumptions made, and the result has
the input's horizontal dimension names and coordinates.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import xarray as xr

from ._version import __version__
from .caution import CAUTION
from .errors import InputDataError
from .variables import INPUT_VARIABLES, OUTPUT_LAYERS

_MONTHLY = tuple(name for name, v in INPUT_VARIABLES.items() if v.monthly)
_STATIC = tuple(name for name, v in INPUT_VARIABLES.items() if not v.monthly)
_SPATIAL_NAMES = (("y", "x"), ("lat", "lon"), ("latitude", "longitude"))
_TIME_NAMES = ("month", "time")


def evaluate(dataset: xr.Dataset, scenario: Any = None, *, physiology: Any = None, season: Any = None,
             classes: Any = None, scenario_layers: xr.Dataset | None = None, engine: str | None = None,
             crs: Any = None, uncertainty: Any = None, baseline: Any = None,
             monthly_layers: bool = True) -> xr.Dataset:
    """Both pathways' potential assimilation and every per-scenario indicator for a monthly climate dataset.

    dataset: monthly ``tmin`` and ``tmax`` (or ``tmean``), ``shortwave`` (or ``par``), ``water_availability``,
        optional ``vpd`` or ``humidity``; static ``elevation`` and ``lai`` optional (see the module
        docstring for dimensions, coordinates and units). numpy or dask; dask stays lazy.
    scenario: a mapping (``co2_ppm``, ``o2_percent``, ``temperature_offset_c``, ``shortwave_factor``,
        ``water_availability_factor``), a config scenario or None (420 ppm, present climate).
    physiology, season, classes: config sections or mappings, as in the YAML config.
    scenario_layers: a dataset of layers replacing the baseline's (same rules as ``dataset``).
    engine: "compiled" (default) or "numpy". crs: the CRS of ``x``/``y`` when the dataset has none written
        and no latitude (e.g. "EPSG:32633").
    uncertainty: a mapping ``{"draws": n, "seed": s}`` (as the config's ``uncertainty``) adds the layers of
        the parameter draws (probability of C4 advantage, quantiles, confidence class); ``baseline``
        (a scenario mapping, on the same dataset) adds the paired change layers against it.
    monthly_layers: False leaves out the monthly layers and solves the canopy crossover for each cell's
        warmest season month only (the seasonal ``crossover_temperature``, about a twelfth of the search).

    Returns a Dataset: seasonal layers on the horizontal dims, monthly layers with a ``month`` dim, each with
    ``units`` and ``long_name``; attributes name the scenario, the caution and the assumptions.
    Results are potential, model-based estimates, not yield forecasts.
    """
    from . import model
    from .assumptions import layer_assumptions

    climate, spatial = _normalise(dataset, crs, what="dataset")
    own = _normalise(scenario_layers, crs, what="scenario_layers", need_latitude=False)[0] if scenario_layers is not None else None
    result = model.evaluate(climate, scenario, physiology=physiology, season=season, classes=classes,
                            scenario_layers=own, engine=engine, uncertainty=uncertainty, baseline=baseline,
                            monthly_layers=monthly_layers)
    for name, layer in result.data_vars.items():
        entry = OUTPUT_LAYERS.get(name)
        if entry is not None:
            layer.attrs.update(units=entry.units, long_name=entry.long_name)
            if entry.legend:
                layer.attrs.update(flag_values=list(entry.legend), flag_meanings=" ".join(
                    label.replace(" ", "_") for label in entry.legend.values()), comment="255: nodata")
    if "month" in result.coords:
        result["month"].attrs.update(long_name="calendar month", units="1")
    names = set(climate.data_vars)
    result.attrs.update(
        caution=CAUTION, tool=f"suitability {__version__}",
        assumptions="; ".join(layer_assumptions(names, diurnal_range_c=_get(physiology, "diurnal_range_c", 10.0),
                                                lai=_get(physiology, "lai", 3.0),
                                                c3_set=_set_of(physiology, "c3"), c4_set=_set_of(physiology, "c4"),
                                                key_prefix="the physiology mapping's ")),
    )
    if spatial != ("y", "x"):
        result = result.rename({"y": spatial[0], "x": spatial[1]})
    return result


def _normalise(dataset: Any, crs: Any, *, what: str, need_latitude: bool = True) -> tuple[xr.Dataset, tuple[str, str]]:
    """``dataset`` with dims (month, y, x) / (y, x), month 1..12, canonical units and a 2-D ``latitude``."""
    if isinstance(dataset, xr.DataArray):
        raise InputDataError(f"{what}: expected an xarray Dataset of named layers, got a DataArray; "
                             "use da.to_dataset(name=...) or xr.Dataset({...})")
    if not isinstance(dataset, xr.Dataset):
        raise InputDataError(f"{what}: expected an xarray Dataset, got {type(dataset).__name__}")
    spatial = next((pair for pair in _SPATIAL_NAMES if set(pair) <= set(dataset.dims)), None)
    if spatial is None:
        raise InputDataError(f"{what}: no horizontal dimensions; expected y and x, lat and lon, or latitude and "
                             f"longitude, got dims {sorted(map(str, dataset.dims))}")
    data = dataset.rename({spatial[0]: "y", spatial[1]: "x"}) if spatial != ("y", "x") else dataset
    data = _month_axis(data, what)
    known = set(_MONTHLY) | set(_STATIC) | {"latitude"}
    layers = {}
    for name, layer in data.data_vars.items():
        if name not in known:
            continue
        expected = ("month", "y", "x") if name in _MONTHLY else ("y", "x")
        extra = [d for d in layer.dims if d not in expected]
        missing = [d for d in expected if d not in layer.dims]
        if extra or missing:
            raise InputDataError(f"{what}: variable {name!r} has dims {tuple(map(str, layer.dims))}; expected "
                                 f"{_dims_text(expected, spatial)}" + (f" (without {', '.join(map(str, extra))})" if extra else ""))
        layer = layer.transpose(*expected)
        layers[name] = layer if name == "latitude" else _canonical(name, layer, what)
    if not layers:
        raise InputDataError(f"{what}: none of its variables is a climate layer; variables: "
                             f"{', '.join(map(str, data.data_vars)) or 'none'}; expected {', '.join(known - {'latitude'})}")
    if need_latitude:
        _require_layers(layers, what)
    out = xr.Dataset(layers, coords={c: data.coords[c] for c in ("y", "x", "month") if c in data.coords})
    if need_latitude and "latitude" not in out:
        out["latitude"] = _latitude(dataset, data, spatial, crs, what)
    return out, spatial


def _month_axis(data: xr.Dataset, what: str) -> xr.Dataset:
    if "month" in data.dims:
        months = np.asarray(data["month"].values) if "month" in data.coords else np.arange(1, data.sizes["month"] + 1)
        if data.sizes["month"] != 12 or sorted(months.tolist()) != list(range(1, 13)):
            raise InputDataError(f"{what}: the month dimension must hold months 1..12 once each, got {months.tolist()}")
        return data.assign_coords(month=months).sortby("month")
    if "time" in data.dims:
        steps = data.sizes["time"]
        if steps != 12:
            raise InputDataError(
                f"{what}: the time dimension has {steps} steps; expected a monthly climatology of 12 (one per calendar "
                "month). Average several years first, e.g. ds.groupby('time.month').mean('time')")
        try:
            months = data["time"].dt.month.values
        except (AttributeError, TypeError):
            months = np.asarray(data["time"].values)
        if sorted(np.asarray(months).tolist()) != list(range(1, 13)):
            raise InputDataError(f"{what}: the 12 time steps must be the 12 calendar months once each, got months "
                                 f"{np.asarray(months).tolist()}")
        data = data.assign_coords(time=np.asarray(months, dtype=int)).rename(time="month")
        return data.sortby("month")
    monthly = [n for n in data.data_vars if n in _MONTHLY]
    if monthly:
        raise InputDataError(f"{what}: monthly layers ({', '.join(monthly)}) need a 'month' (1..12) or 'time' "
                             f"(12 steps) dimension; got dims {sorted(map(str, data.dims))}")
    return data


def _canonical(name: str, layer: xr.DataArray, what: str) -> xr.DataArray:
    """The layer in canonical units: converted from its ``units`` attribute, else taken as canonical."""
    from .inputs.units import linear_conversion

    units = layer.attrs.get("units")
    canonical = INPUT_VARIABLES[name].units
    if units is None or str(units).strip() in ("", canonical):
        return layer
    try:
        scale, offset = linear_conversion(str(units), canonical)
    except ValueError as exc:
        raise InputDataError(f"{what}: variable {name!r} has units {units!r}, which cannot be converted to "
                             f"{canonical!r} ({exc}); fix its 'units' attribute") from None
    if (scale, offset) == (1.0, 0.0):
        return layer
    converted = layer * scale + offset
    converted.attrs = {**layer.attrs, "units": canonical}
    return converted


def _require_layers(layers: dict, what: str) -> None:
    names = set(layers)
    missing = []
    if not ({"tmin", "tmax"} <= names or "tmean" in names):
        missing.append("tmin and tmax (or tmean) [degC]")
    if not names & {"shortwave", "par"}:
        missing.append("shortwave [MJ m-2 d-1] (or par [mol m-2 d-1])")
    if not names & {"water_availability", "water_stress", "precipitation"}:
        missing.append("water_availability [0-1] (or precipitation [mm d-1])")
    if missing:
        raise InputDataError(f"{what}: missing {', '.join(missing)}; has {', '.join(sorted(names))}")


def _latitude(original: xr.Dataset, data: xr.Dataset, spatial: tuple[str, str], crs: Any, what: str) -> xr.DataArray:
    """Each cell's latitude [degrees north] as a (y, x) DataArray."""
    template = xr.DataArray(np.zeros((data.sizes["y"], data.sizes["x"])), dims=("y", "x"),
                            coords={"y": data["y"], "x": data["x"]})
    for name in ("latitude", "lat"):
        if name in data.coords and name not in data.dims and set(data[name].dims) <= {"y", "x"}:
            lat = xr.DataArray(np.asarray(data[name].values, float), dims=data[name].dims)
            return (template + lat.assign_coords({d: data[d] for d in lat.dims})).rename("latitude")
    if spatial in (("lat", "lon"), ("latitude", "longitude")):
        return (template + data["y"].astype(float)).rename("latitude")
    from pyproj import CRS, Transformer

    if crs is None:
        try:
            import rioxarray  # noqa: F401 - the .rio accessor

            crs = original.rio.crs
        except Exception:  # noqa: BLE001 - no rioxarray or no CRS: reported below
            crs = None
    if crs is None:
        raise InputDataError(
            f"{what}: cannot tell each cell's latitude: give a 'latitude' variable or coordinate (degrees north, "
            "(y, x)), use lat/lon dimensions, or pass crs=... (or write one with ds.rio.write_crs) for the x/y coordinates")
    try:
        source = CRS.from_user_input(crs.to_wkt() if hasattr(crs, "to_wkt") else crs)
    except Exception as exc:  # noqa: BLE001 - pyproj CRSError
        raise InputDataError(f"{what}: unknown CRS {crs!r} ({exc})") from None
    xs, ys = np.meshgrid(np.asarray(data["x"].values, float), np.asarray(data["y"].values, float))
    _, lat = Transformer.from_crs(source, CRS.from_epsg(4326), always_xy=True).transform(xs, ys)
    if not np.isfinite(lat).all():
        raise InputDataError(f"{what}: some x/y coordinates cannot be transformed from {source.to_string()} to latitude")
    return xr.DataArray(lat, dims=("y", "x"), coords={"y": data["y"], "x": data["x"]}, name="latitude")


def _dims_text(expected: tuple[str, ...], spatial: tuple[str, str]) -> str:
    names = {"y": spatial[0], "x": spatial[1], "month": "month (or time)"}
    return "(" + ", ".join(names[d] for d in expected) + ") in any order"


def _get(section: Any, key: str, default: Any) -> Any:
    if section is None:
        return default
    value = section.get(key, default) if isinstance(section, dict) else getattr(section, key, default)
    return default if value is None else value


def _set_of(physiology: Any, pathway: str) -> str | None:
    section = _get(physiology, pathway, None)
    if section is None:
        return None
    if isinstance(section, str):
        return section
    return _get(section, "parameter_set", None)


__all__ = ["evaluate"]
