#!/usr/bin/env python
"""Generate the demo data of the Kessarine Basin, an INVENTED region.

ALL DATA WRITTEN BY THIS SCRIPT ARE FICTIONAL, FOR DEMONSTRATION ONLY. The basin is placed in open ocean at
about 24° S 56° E only so that day length and sun angles are realistic; nothing here describes a real place.

Usage: ``python demo_region/generate.py [--out DIR]`` (default: ``data/`` next to this script). Fixed seeds
make every run produce the same values (and the same bytes, given the same library versions). Terrain,
temperature, cloud and water are smooth analytic functions of the target-grid coordinates (EPSG:32740, m),
so each file samples the same invented landscape on its own grid. The script deliberately does not import
the ``suitability`` package: the demo inputs must stay independent of the code they exercise.
"""

from __future__ import annotations

import argparse
import calendar
from pathlib import Path

import geopandas as gpd
import netCDF4
import numpy as np
import pyogrio
import rasterio
import shapely
from pyproj import Transformer
from rasterio.transform import from_origin

NOTE = ("Kessarine Basin: INVENTED region. All data are fictional, for demonstration only; made by "
        "demo_region/generate.py. Placed in open ocean near 24 S 56 E only for realistic sun angles.")
SEED = 4217
TARGET_CRS = "EPSG:32740"
XMIN, YMIN, XMAX, YMAX = 300_000.0, 7_300_000.0, 500_000.0, 7_460_000.0
NODATA = -9999.0
LAPSE_RATE_K_PER_M = 0.0065  # ICAO standard atmosphere, troposphere (ISO 2533:1975)
YEAR_DAYS = [calendar.monthrange(2001, m)[1] for m in range(1, 13)]  # a 365-day year for the radiation
MONTH = np.arange(1, 13)
DISTRICTS = [  # invented names, seeded around a 4 x 2 layout (x, y in km of EPSG:32740)
    ("Aldrevan Flats", 330, 7425), ("Myrrhasel", 380, 7428), ("Quillenbrae", 432, 7425),
    ("Zorreline", 475, 7420), ("Cindrevale", 328, 7342), ("Thessomar", 378, 7345),
    ("Pelvaris Ridge", 428, 7340), ("Varneth Uplands", 474, 7335),
]
# Valley centrelines, drawn from the south-east highland down towards the north-west plain (m).
VALLEYS = [np.array([(492e3, 7302e3), (468e3, 7318e3), (450e3, 7342e3), (424e3, 7360e3), (400e3, 7385e3),
                     (368e3, 7402e3), (340e3, 7440e3)]),
           np.array([(499e3, 7386e3), (478e3, 7398e3), (452e3, 7408e3), (433e3, 7428e3), (408e3, 7444e3),
                     (390e3, 7466e3)])]
LAKE = (401e3, 7384e3, 5500.0, 3000.0, np.deg2rad(-42.0))  # centre x, y, semi-axes, orientation (m, rad)


def smooth_noise(x, y, seed, n_modes=24, wavelengths=(12e3, 80e3)):
    """Smooth random field of unit variance: a sum of plane waves with seeded wavelengths, directions and
    phases. Longer waves get larger amplitudes (red spectrum, as in real terrain). Var(sum a cos) = sum a²/2.
    Legacy RandomState is used because NumPy freezes its stream, so the field never changes with NumPy."""
    rng = np.random.RandomState(seed)
    lam = rng.uniform(*wavelengths, n_modes)
    theta, phase = rng.uniform(0, 2 * np.pi, (2, n_modes))
    amp = lam / lam.sum()
    xr, yr = np.asarray(x) - XMIN, np.asarray(y) - YMIN  # small numbers keep the phases precise
    field = sum(a * np.cos(2 * np.pi / w * (np.cos(t) * xr + np.sin(t) * yr) + p)
                for a, w, t, p in zip(amp, lam, theta, phase))
    return field / np.sqrt(0.5 * np.sum(amp ** 2))


def distance_to_polyline(x, y, points):
    """Distance (m) from each (x, y) to the nearest segment of a polyline."""
    distance = np.full(np.broadcast(x, y).shape, np.inf)
    for (x0, y0), (x1, y1) in zip(points[:-1], points[1:]):
        dx, dy = x1 - x0, y1 - y0
        t = np.clip(((x - x0) * dx + (y - y0) * dy) / (dx * dx + dy * dy), 0.0, 1.0)
        distance = np.minimum(distance, np.hypot(x - x0 - t * dx, y - y0 - t * dy))
    return distance


def highland_share(x, y):
    """0 on the north-west plain, rising through a smooth escarpment to 1 on the south-east plateau."""
    u = 0.55 * (x - XMIN) / (XMAX - XMIN) + 0.45 * (YMAX - y) / (YMAX - YMIN)
    s = np.clip((u - 0.2) / 0.7, 0.0, 1.0)
    return s * s * (3 - 2 * s)  # smoothstep: flat plain, slope, flat plateau


def elevation_m(x, y):
    """Invented terrain (m): plain at ~140 m, plateau at ~2790 m, relief noise growing with height, and
    Gaussian valleys (5 km wide) cut up to 600 m deep into the slope and fading out on the plain."""
    rise = highland_share(x, y)
    z = 140.0 + 2650.0 * rise + (45.0 + 180.0 * rise) * smooth_noise(x, y, SEED)
    for line in VALLEYS:
        z -= 600.0 * rise * np.exp(-((distance_to_polyline(x, y, line) / 5000.0) ** 2))
    return np.maximum(z, 20.0)


def in_lake(x, y):
    """True inside the invented lake, an ellipse lying in the main valley at mid elevation."""
    cx, cy, a, b, angle = LAKE
    along = (x - cx) * np.cos(angle) + (y - cy) * np.sin(angle)
    across = -(x - cx) * np.sin(angle) + (y - cy) * np.cos(angle)
    return (along / a) ** 2 + (across / b) ** 2 <= 1.0


def air_temperature_c(z, month):
    """Monthly mean daily (tmin, tmax) in °C at elevation z (m). Southern-hemisphere cycle
    s = cos(2π(month − 1)/12): +1 in January, −1 in July. Sea-level Tmax 29.4 + 4.4 s, diurnal range
    7.3 + 0.8 s (cloudy wet summer nights stay warm); both fall by 6.5 K per km (ISO 2533:1975)."""
    season = np.cos(2 * np.pi * (np.asarray(month)[:, None, None] - 1) / 12)
    tmax = 29.4 + 4.4 * season - LAPSE_RATE_K_PER_M * z
    return tmax - (7.3 + 0.8 * season), tmax


def extraterrestrial_radiation_mj(latitude_deg, day_of_year):
    """Daily extraterrestrial radiation Ra (MJ m-2 d-1), FAO-56 (Allen et al. 1998) eqs. 21-25:
    Ra = 24·60/π · Gsc · dr · [ωs sinφ sinδ + cosφ cosδ sin ωs], Gsc = 0.0820 MJ m-2 min-1 (eq. 21),
    φ = π/180 · latitude (eq. 22), dr = 1 + 0.033 cos(2πJ/365) (eq. 23), δ = 0.409 sin(2πJ/365 − 1.39)
    (eq. 24), ωs = arccos(−tanφ tanδ) (eq. 25, clipped for polar day and night)."""
    phi = np.pi / 180.0 * np.asarray(latitude_deg)
    angle = 2 * np.pi * np.asarray(day_of_year) / 365.0
    dr, delta = 1 + 0.033 * np.cos(angle), 0.409 * np.sin(angle - 1.39)
    omega_s = np.arccos(np.clip(-np.tan(phi) * np.tan(delta), -1.0, 1.0))
    return (24 * 60 / np.pi * 0.0820 * dr
            * (omega_s * np.sin(phi) * np.sin(delta) + np.cos(phi) * np.cos(delta) * np.sin(omega_s)))


def daylight_hours(latitude_deg, day_of_year):
    """Day length N = 24/π · ωs (h), FAO-56 eq. 34 with ωs from eqs. 22, 24, 25."""
    phi = np.pi / 180.0 * np.asarray(latitude_deg)
    delta = 0.409 * np.sin(2 * np.pi * np.asarray(day_of_year) / 365.0 - 1.39)
    return 24 / np.pi * np.arccos(np.clip(-np.tan(phi) * np.tan(delta), -1.0, 1.0))


def wet_season(month):
    """1 in mid January-February (wettest), 0 in mid July-August (driest)."""
    return 0.5 * (1 + np.cos(2 * np.pi * (np.asarray(month)[:, None, None] - 1.5) / 12))


def shortwave_w_m2(x, y, latitude_deg, month):
    """Monthly mean daily shortwave (W m-2) by the Angstrom relation Rs = (as + bs n/N) Ra, FAO-56 eq. 35,
    as = 0.25, bs = 0.50, Ra averaged over the days of the month. Relative sunshine n/N is invented:
    0.72 on the dry-season plain, minus 0.25 in the wet season and up to 0.18 over the highland clouds."""
    z = elevation_m(x, y)
    sunshine = (0.72 - 0.25 * wet_season(month) - 0.18 * np.clip(z / 3000.0, 0, 1)
                + 0.03 * smooth_noise(x, y, SEED + 1))
    first_day = np.cumsum([1] + YEAR_DAYS[:-1])
    ra = np.stack([extraterrestrial_radiation_mj(latitude_deg, np.arange(first_day[m - 1],
                   first_day[m - 1] + YEAR_DAYS[m - 1])[:, None, None]).mean(axis=0) for m in month])
    return (0.25 + 0.50 * np.clip(sunshine, 0, 1)) * ra * 1e6 / 86400.0  # MJ m-2 d-1 -> W m-2


def water_availability_percent(x, y, month):
    """Invented monthly water availability (%): a seasonal curve (wet Dec-Mar 97-100, dry Jun-Sep 46-58),
    lowered by up to 8 points in the wet and 14 in the dry season where the land is low and far east."""
    curve = np.array([99, 100, 98, 92, 76, 58, 50, 46, 52, 68, 88, 97], float)[np.asarray(month) - 1]
    dryness = (x - XMIN) / (XMAX - XMIN) * (1 - np.clip(elevation_m(x, y) / 2800.0, 0, 1))
    drop = 8.0 + 6.0 * (1 - wet_season(month))
    value = curve[:, None, None] - drop * dryness + 1.2 * smooth_noise(x, y, SEED + 2) - 1.2
    return np.clip(value, 0.0, 100.0)


def grid(bounds, resolution):
    """Cell-centre coordinate meshes (north-up, y descending) and the affine transform of a grid."""
    x = np.arange(bounds[0] + resolution / 2, bounds[2], resolution)
    y = np.arange(bounds[3] - resolution / 2, bounds[1], -resolution)
    return *np.meshgrid(x, y), from_origin(bounds[0], bounds[3], resolution, resolution)


def snapped_bounds(crs, margin, step):
    """Bounds in `crs` covering the target region plus `margin`, snapped outward to multiples of `step`."""
    left, bottom, right, top = Transformer.from_crs(TARGET_CRS, crs, always_xy=True).transform_bounds(
        XMIN, YMIN, XMAX, YMAX, densify_pts=21)
    return (np.floor((left - margin) / step) * step, np.floor((bottom - margin) / step) * step,
            np.ceil((right + margin) / step) * step, np.ceil((top + margin) / step) * step)


def write_geotiff(path, bands, crs, transform, descriptions, units):
    """Float32 GeoTIFF, DEFLATE with the floating-point predictor, NaN written as NODATA, note as tag."""
    profile = dict(driver="GTiff", dtype="float32", count=len(bands), height=bands[0].shape[0],
                   width=bands[0].shape[1], crs=crs, transform=transform, nodata=NODATA,
                   compress="deflate", predictor=3, zlevel=9)
    with rasterio.open(path, "w", **profile) as dst:
        dst.update_tags(note=NOTE, units=units)
        for i, (band, description) in enumerate(zip(bands, descriptions), start=1):
            dst.write(np.where(np.isnan(band), NODATA, band).astype("float32"), i)
            dst.set_band_description(i, description)
            dst.update_tags(i, units=units)
        dst.units = [units] * len(bands)


def write_elevation(out):
    """DEM on EPSG:3857 at 750 m (not the target grid, so alignment must reproject), 10 km margin."""
    bounds = snapped_bounds("EPSG:3857", 10_000, 750)
    mx, my, transform = grid(bounds, 750.0)
    x, y = Transformer.from_crs("EPSG:3857", TARGET_CRS, always_xy=True).transform(mx, my)
    z = np.where(in_lake(x, y), np.nan, np.round(elevation_m(x, y), 1))
    write_geotiff(out / "elevation.tif", [z], "EPSG:3857", transform, ["elevation above sea level"], "m")


def write_temperature(out):
    """tmin/tmax (K) on a 0.01° lat/lon grid (latitude descending), int16 packed, fill over the lake."""
    left, bottom, right, top = snapped_bounds("EPSG:4326", 0.05, 0.01)
    lon = np.round(np.arange(left + 0.005, right, 0.01), 4)
    lat = np.round(np.arange(top - 0.005, bottom, -0.01), 4)
    x, y = Transformer.from_crs("EPSG:4326", TARGET_CRS, always_xy=True).transform(*np.meshgrid(lon, lat))
    tmin_c, tmax_c = air_temperature_c(elevation_m(x, y), MONTH)
    month_start = np.cumsum([0] + [calendar.monthrange(2000, m)[1] for m in MONTH])  # days since 2000-01-01
    with netCDF4.Dataset(out / "temperature.nc", "w", format="NETCDF4") as nc:
        nc.setncatts({"title": "Kessarine Basin monthly air temperature (invented)", "note": NOTE,
                      "Conventions": "CF-1.8", "source": "demo_region/generate.py"})
        for name, size in [("time", 12), ("lat", lat.size), ("lon", lon.size), ("nv", 2)]:
            nc.createDimension(name, size)
        time = nc.createVariable("time", "f8", ("time",))
        time.setncatts({"units": "days since 2000-01-01 00:00:00", "calendar": "standard",
                        "standard_name": "time", "axis": "T", "bounds": "time_bnds"})
        time[:] = (month_start[:-1] + month_start[1:]) / 2.0
        nc.createVariable("time_bnds", "f8", ("time", "nv"))[:] = np.stack([month_start[:-1], month_start[1:]], 1)
        for name, values, axis, units in [("lat", lat, "Y", "degrees_north"), ("lon", lon, "X", "degrees_east")]:
            var = nc.createVariable(name, "f8", (name,))
            var.setncatts({"units": units, "standard_name": {"Y": "latitude", "X": "longitude"}[axis], "axis": axis})
            var[:] = values
        for name, celsius, what in [("tmin", tmin_c, "minimum"), ("tmax", tmax_c, "maximum")]:
            var = nc.createVariable(name, "i2", ("time", "lat", "lon"), zlib=True, complevel=6, shuffle=True,
                                    fill_value=np.int16(-32768))
            var.set_auto_maskandscale(False)  # pack by hand: K = packed * 0.01 + 273.15
            var.setncatts({"scale_factor": np.float64(0.01), "add_offset": np.float64(273.15), "units": "K",
                           "standard_name": "air_temperature", "cell_methods": "time: mean",
                           "long_name": f"monthly mean of daily {what} air temperature", "note": NOTE})
            packed = np.round(celsius / 0.01).astype("int16")  # (T_C + 273.15 - 273.15) / 0.01
            var[:] = np.where(in_lake(x, y)[None], np.int16(-32768), packed)


def write_shortwave(out):
    """shortwave_01..12.tif on the target CRS at 2000 m (coarser than the 1000 m target), 2 km margin."""
    x, y, transform = grid((XMIN - 2000, YMIN - 2000, XMAX + 2000, YMAX + 2000), 2000.0)
    _, latitude = Transformer.from_crs(TARGET_CRS, "EPSG:4326", always_xy=True).transform(x, y)
    for month, band in zip(MONTH, shortwave_w_m2(x, y, latitude, MONTH)):
        write_geotiff(out / f"shortwave_{month:02d}.tif", [np.round(band, 2)], TARGET_CRS, transform,
                      [f"mean daily global shortwave, month {month:02d}"], "W m-2")


def write_water_availability(out):
    """12-band GeoTIFF in percent, exactly on the target grid, nodata over the lake."""
    x, y, transform = grid((XMIN, YMIN, XMAX, YMAX), 1000.0)
    bands = np.where(in_lake(x, y)[None], np.nan, np.round(water_availability_percent(x, y, MONTH), 1))
    write_geotiff(out / "water_availability.tif", list(bands), TARGET_CRS, transform,
                  [f"month {m:02d}" for m in MONTH], "percent")


def basin_outline():
    """The basin: the grid rectangle with an irregular inset of 1.5-5.5 km, plus one lobe (radius 14 km)
    reaching 14 km beyond the western edge, so exactly one district is only partly covered by the grid."""
    cx, cy, hx, hy = (XMIN + XMAX) / 2, (YMIN + YMAX) / 2, (XMAX - XMIN) / 2, (YMAX - YMIN) / 2
    theta = np.linspace(0, 2 * np.pi, 720, endpoint=False)
    to_edge = np.minimum(hx / np.maximum(np.abs(np.cos(theta)), 1e-12), hy / np.maximum(np.abs(np.sin(theta)), 1e-12))
    inset = 1500 + 2500 * (1 + np.sin(3 * theta + 0.7)) / 2 + 1500 * (1 + np.sin(7 * theta + 2.1)) / 2
    radius = to_edge - inset
    body = shapely.Polygon(np.column_stack([cx + radius * np.cos(theta), cy + radius * np.sin(theta)]))
    return body.union(shapely.Point(XMIN, 7_345_000).buffer(14_000, quad_segs=32))


def write_districts(out):
    """8 districts: Voronoi cells of jittered seed points, clipped to the basin outline."""
    rng = np.random.RandomState(SEED + 3)
    seeds = [shapely.Point(x * 1e3 + dx, y * 1e3 + dy)
             for (_, x, y), (dx, dy) in zip(DISTRICTS, rng.uniform(-14e3, 14e3, (len(DISTRICTS), 2)))]
    outline = basin_outline()
    cells = shapely.voronoi_polygons(shapely.MultiPoint(seeds), extend_to=outline.buffer(50e3)).geoms
    shapes = [shapely.normalize(shapely.set_precision(next(c for c in cells if c.contains(p))
                                                      .intersection(outline), 1.0)) for p in seeds]
    outside = [name for (name, _, _), s in zip(DISTRICTS, shapes)
               if not shapely.box(XMIN, YMIN, XMAX, YMAX).contains(s)]
    if outside != ["Cindrevale"]:
        raise RuntimeError(f"expected only Cindrevale to reach beyond the grid, got {outside}")
    frame = gpd.GeoDataFrame({"district": [d[0] for d in DISTRICTS], "code": np.arange(1, 9, dtype="int32")},
                             geometry=shapes, crs=TARGET_CRS)
    path = out / "districts.gpkg"
    path.unlink(missing_ok=True)
    pyogrio.set_gdal_config_options({"OGR_CURRENT_DATE": "2000-01-01T00:00:00.000Z"})  # fixed timestamp
    pyogrio.write_dataframe(frame, path, layer="districts", driver="GPKG", layer_metadata={"note": NOTE},
                            layer_options={"DESCRIPTION": NOTE})


def generate(out: Path) -> list[Path]:
    """Write every demo file into `out` and return their paths."""
    out.mkdir(parents=True, exist_ok=True)
    for writer in (write_elevation, write_temperature, write_shortwave, write_water_availability, write_districts):
        writer(out)
    names = ["elevation.tif", "temperature.nc", "water_availability.tif", "districts.gpkg"]
    return [out / n for n in names] + [out / f"shortwave_{m:02d}.tif" for m in MONTH]


if __name__ == "__main__":
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--out", type=Path, default=Path(__file__).resolve().parent / "data")
    for written in generate(parser.parse_args().out):
        print(f"{written}  {written.stat().st_size / 1024:.0f} KiB")
