"""Issue 13, class 8: internal errors (exit 1) that should be clear refusals. Grids whose bounds leave the
domain of their CRS, polar grids with longitude/latitude layers, and alignment failures are refused with
the key or file named (and ``check`` says so too); user text is drawn as plain text, never parsed as
mathematics by the figure library.

Checked against the exit codes documented in suitability/cli.py; the coordinates are derived here from
the CRS definitions (UTM zone 40 S, EPSG:32740; Antarctic and Arctic polar stereographic, EPSG:3031 and
EPSG:3413). The demo region is invented (demo_region/README.md).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import rioxarray  # noqa: F401
import xarray as xr

from suitability.errors import InputDataError
from suitability.grid import TargetGrid, align_to_grid
from suitability.reports import figures

from .conftest import EXIT_CONFIG, EXIT_INPUT, assert_clean_error, cli, demo_config, write_config


@pytest.mark.parametrize("crs, bounds", [
    ("EPSG:32740", [300000, 7300000, 50_000_000, 50_000_000]),   # 5e7 m: far beyond any UTM zone
    ("EPSG:32740", [-40_000_000, 7300000, 500000, 7460000]),
    ("EPSG:32633", [0, 0, 90_000_000, 1_000_000]),                # 9e7 m east: twice round the Earth
])
def test_bounds_beyond_the_domain_of_the_crs_are_refused(tmp_path, crs, bounds):
    config = demo_config()
    config["region"]["grid"].update(crs=crs, bounds=bounds, resolution=max(1e5, (bounds[2] - bounds[0]) / 1000))
    path = write_config(tmp_path, config)
    assert_clean_error(cli("run", path, "--no-progress"), EXIT_CONFIG, "region.grid", "reach beyond the area where",
                       "has no longitude/latitude")
    assert_clean_error(cli("check", path), EXIT_INPUT, "reach beyond the area where")


def _global_lonlat() -> xr.DataArray:
    lon = np.arange(-179.5, 180, 1.0)
    lat = np.arange(89.5, -90, -1.0)
    values = np.full((lat.size, lon.size), 290.0, dtype="float32")
    da = xr.DataArray(values, dims=("y", "x"), coords={"y": lat, "x": lon}, name="tmean")
    da.attrs.update(source="/data/global_tmean.tif", source_layer="tmean")
    return da.rio.write_crs("EPSG:4326")


@pytest.mark.parametrize("crs, pole", [("EPSG:3031", "South Pole"), ("EPSG:3413", "North Pole")])
def test_a_polar_grid_with_a_lonlat_layer_is_a_clear_input_error(crs, pole):
    grid = TargetGrid.from_bounds(crs, 50_000, (-1e6, -1e6, 1e6, 1e6))
    assert grid.contains_pole() == pole
    with pytest.raises(InputDataError, match=rf"/data/global_tmean.tif: layer 'tmean': .* contains the {pole}"):
        align_to_grid(_global_lonlat(), grid, "bilinear")


def test_a_polar_grid_off_the_pole_still_aligns_lonlat_layers():
    # 1000-2000 km from the South Pole along x (EPSG:3031): the pole is outside (derived here).
    grid = TargetGrid.from_bounds("EPSG:3031", 50_000, (1e6, -5e5, 2e6, 5e5))
    assert grid.contains_pole() is None
    aligned = align_to_grid(_global_lonlat(), grid, "bilinear")
    assert aligned.shape == grid.shape
    assert float(aligned.mean().compute()) == pytest.approx(290.0)  # a constant field stays constant


def test_grids_inside_their_crs_domain_pass():
    for crs, resolution, bounds in [("EPSG:32740", 1000, (300000, 7300000, 500000, 7460000)),
                                    ("EPSG:4326", 1.0, (-180, -90, 180, 90)),
                                    ("EPSG:3857", 100_000, (-2e7, -2e7, 2e7, 2e7))]:
        TargetGrid.from_bounds(crs, resolution, bounds).check_projectable("region.grid")  # no error


@pytest.mark.parametrize("name", ["$x^2$ Flats", "Price $5 to $10", r"\frac{a}{b} Hills", "$\\undefinedcommand$"])
def test_district_names_are_drawn_as_plain_text(name, finished_run):
    table = pd.DataFrame({"district": [name, name], "scenario": ["baseline", "co2_only"],
                          "district_area_ha": [1.0, 1.0], "share_c3": 0.2, "share_contested": 0.3, "share_c4": 0.5})
    png = figures.class_share_png(table, ["baseline", "co2_only"])  # mathtext would fail on the last one
    assert png[:8] == b"\x89PNG\r\n\x1a\n"
    figure = figures.class_share_figure(table, ["baseline", "co2_only"])
    labels = figure.axes[0].get_yticklabels()
    assert all(not label.get_parse_math() for label in labels)
    assert labels[0].get_text().startswith(name)
    import geopandas as gpd
    import shapely

    zones = gpd.GeoDataFrame({"district": [name]}, geometry=[shapely.box(350_000, 7_350_000, 450_000, 7_420_000)],
                             crs="EPSG:32740")
    png = figures.class_map_png(finished_run / "out" / "baseline" / "pathway_class.tif", zones, title=f"t {name}")
    assert png[:8] == b"\x89PNG\r\n\x1a\n"
