"""Open the climate layers of a config: GeoTIFF, NetCDF and Zarr, lazily, in canonical units.

The package, along its seams:

- :mod:`.readers`: the registry of input formats (how to recognise a path, open it lazily, list its files),
  the ``{month}`` pattern; the formats themselves in :mod:`.raster` (GeoTIFF) and :mod:`.cf` (NetCDF, Zarr);
- :mod:`.units`: unit strings, conversion to canonical units, the name a layer is returned under;
- :mod:`.checks`: plausibility of the declared units on a sample, coverage of the region;
- :mod:`.climate`: one layer in canonical units (:func:`open_layer`), a climate section aligned on the grid
  (:func:`load_climate`), the region mask (:func:`load_mask`);
- :mod:`.inspection`: what ``suitability check`` reports (:func:`inspect_inputs`).
"""

from .checks import coverage_share
from .climate import InputCoverageWarning, load_climate, load_mask, open_layer
from .inspection import LayerReport, inspect_inputs
from .native import MONTHS
from .periods import ShortPeriodWarning, TimeInfo
from .readers import READERS, Reader, layer_files, month_path, reader_for
from .units import linear_conversion, output_name, parse_units

__all__ = [
    "open_layer", "load_climate", "load_mask", "inspect_inputs", "layer_files", "LayerReport",
    "InputCoverageWarning", "ShortPeriodWarning", "TimeInfo", "parse_units", "linear_conversion", "output_name", "coverage_share",
    "month_path", "READERS", "Reader", "reader_for", "MONTHS",
]
