"""Units of the input layers: reading unit strings as climate files write them, converting to the
canonical units of :mod:`suitability.variables`, and the name a layer is returned under.

Decisions
- The config's ``units`` win; without them the file's ``units`` attribute is used; neither is an error.
  Conversion by pint with the cf_xarray registry (affine conversions only, applied lazily). Unit strings
  common in climate files ("C", "degrees C", "fraction", "%") are read as meant. Per-month totals
  ("MJ m-2 month-1") are refused rather than divided by a mean month length.
- A radiation layer declared as a photon flux (mol m-2 d-1, µmol m-2 s-1) is returned as ``par``; one in
  energy units as ``shortwave``. A ``water_stress`` layer is returned as ``water_availability`` = 1 - stress.
"""

from __future__ import annotations

import math
import re

_UNIT_ALIASES = {
    **dict.fromkeys(["c", "°c", "degc", "deg c", "deg_c", "degree_c", "degrees_c", "degree c", "degrees c",
                     "celsius", "degree celsius", "degrees celsius", "degree_celsius", "degrees_celsius"], "degC"),
    **dict.fromkeys(["k", "kelvin", "degk", "deg_k", "degrees_k"], "K"),
    **dict.fromkeys(["1", "-", "fraction", "frac", "dimensionless", "unitless", "0-1"], "1"),
    **dict.fromkeys(["%", "percent", "pct", "per cent"], "percent"),
}


def parse_units(text: str):
    """pint Unit of a units string, accepting the common climate-file spellings (see module docstring)."""
    from cf_xarray.units import units as registry

    alias = _UNIT_ALIASES.get(str(text).strip().lower(), str(text).strip())
    if re.search(r"\bmonth|\bmon\b|\byr\b|\byear", alias):
        raise ValueError(f"units {text!r} are per month or year; give a mean daily rate (e.g. MJ m-2 d-1) instead")
    try:
        return registry.Unit(alias)
    except Exception as exc:  # noqa: BLE001 - pint raises several types for unparseable strings
        raise ValueError(f"units {text!r} are not understood ({exc})") from None


def linear_conversion(from_units: str, to_units: str) -> tuple[float, float]:
    """(scale, offset) with value_in_to = scale * value_in_from + offset, from pint.

    Raises ValueError if the units are not of the same kind or the conversion is not affine.
    """
    from cf_xarray.units import units as registry

    source, target = parse_units(from_units), parse_units(to_units)
    try:
        at = [registry.Quantity(v, source).to(target).magnitude for v in (0.0, 1.0, 1000.0)]
    except Exception as exc:  # noqa: BLE001 - DimensionalityError and offset-unit errors alike
        raise ValueError(f"{from_units!r} cannot be converted to {to_units!r} ({exc})") from None
    offset, scale = float(at[0]), float(at[1] - at[0])
    if not math.isclose(at[2], offset + 1000.0 * scale, rel_tol=1e-9, abs_tol=1e-9):
        raise ValueError(f"conversion from {from_units!r} to {to_units!r} is not linear")
    return scale, offset


#: Layers that are depths (or mass per area) of water: 1 kg m-2 of liquid water is 1 mm deep (density
#: 1000 kg m-3), so a mass flux such as "kg m-2 s-1" converts to "mm d-1" (the CF way to write rainfall).
WATER_DEPTH_LAYERS = ("precipitation", "pet", "soil_water_capacity")


def layer_conversion(layer: str, from_units: str, to_units: str) -> tuple[float, float]:
    """:func:`linear_conversion`, with water given as mass per area (kg m-2 ...) read as depth (mm ...)."""
    if layer in WATER_DEPTH_LAYERS:
        source, mass = parse_units(from_units), parse_units("kg m-2")
        if (source / mass).dimensionality == parse_units(to_units).dimensionality / parse_units("mm").dimensionality:
            scale, offset = linear_conversion(from_units, str(parse_units(to_units) / parse_units("mm") * mass))
            return scale, offset
    return linear_conversion(from_units, to_units)


def output_name(layer: str, units: str) -> str:
    """The name a layer is returned under: photon-flux radiation -> ``par``; ``water_stress`` -> ``water_availability``."""
    if layer == "water_stress":
        return "water_availability"
    if layer in ("shortwave", "par"):
        unit = parse_units(units)
        photon = unit.dimensionality == parse_units("mol m-2 d-1").dimensionality
        energy = unit.dimensionality == parse_units("W m-2").dimensionality
        if photon:
            return "par"
        if energy and layer == "shortwave":
            return "shortwave"
        raise ValueError(
            f"units {units!r} of layer {layer!r}: expected an energy flux for shortwave (W m-2, MJ m-2 d-1) "
            "or a photon flux for PAR (mol m-2 d-1, µmol m-2 s-1)"
        )
    return layer



def units_differ(a: str, b: str) -> bool:
    """True if two unit strings mean different units (compared as text when pint cannot read one)."""
    try:
        return parse_units(a) != parse_units(b)
    except ValueError:
        return a.strip() != b.strip()
