"""Ensembles end to end: a three-member, two-period scenario set on a small invented grid (tmp_path).

Everything here is invented (a fictional patch of ocean at about 21 deg S 55 deg E only fixes day length).
The checks compare the ensemble layers with the same members run as single scenarios in the same run
(derived here: median, share and sign agreement of those single runs), and the agreement classes with the
rule of IPCC AR6 WGI Cross-Chapter Box Atlas.1, simple approach, as AR6 figure captions state it (e.g.
Chapter 9, Figure 9.3): "high model agreement, where >=80% of models agree on sign of change", low agreement
below 80 %.
"""

from __future__ import annotations

import json
import shutil
from pathlib import Path

import numpy as np
import pytest
import rasterio
import xarray as xr
import yaml

import suitability
from suitability import indicators
from suitability.errors import InputDataError

NY, NX = 8, 10
LAT = -20.8 - 0.02 * (np.arange(NY) + 0.5)  # descending
LON = 55.0 + 0.02 * (np.arange(NX) + 0.5)
MEMBERS = {"alpha": 1.0, "beta": 2.5, "gamma": 4.0}  # invented warming of each member [K]


def _coords(time=None):
    coords = {"lat": ("lat", LAT, {"units": "degrees_north", "standard_name": "latitude"}),
              "lon": ("lon", LON, {"units": "degrees_east", "standard_name": "longitude"})}
    if time is not None:
        coords["time"] = time
    return coords


def _season(months):
    return 4.0 * np.cos(2 * np.pi * (np.asarray(months) - 1) / 12.0)


def _field():  # a west-east temperature gradient so the map has C3 and C4 parts
    return np.linspace(-6.0, 6.0, NX)[None, :] * np.ones((NY, 1))


def write_inputs(folder):
    months = np.arange(1, 13)
    time = xr.date_range("2000-01-01", periods=12, freq="MS", calendar="noleap", use_cftime=True)
    tmean = 273.15 + 20.0 + _season(months)[:, None, None] + _field()[None]
    base = xr.Dataset({"tmin": (("time", "lat", "lon"), (tmean - 5).astype("f4"), {"units": "K"}),
                       "tmax": (("time", "lat", "lon"), (tmean + 5).astype("f4"), {"units": "K"}),
                       "rsds": (("time", "lat", "lon"), np.full((12, NY, NX), 220.0, "f4"), {"units": "W m-2"}),
                       "wa": (("time", "lat", "lon"), np.full((12, NY, NX), 0.9, "f4"), {"units": "1"})},
                      coords=_coords(time))
    base.to_netcdf(folder / "baseline.nc")
    series = xr.date_range("2031-01-01", periods=12 * 30, freq="MS", calendar="noleap", use_cftime=True)
    m = np.array([t.month for t in series])
    years = np.array([t.year for t in series])
    stacked = []
    for member, warming in MEMBERS.items():
        trend = warming * (years - 2031) / 29.0  # reaches the member's warming by 2060
        tm = 273.15 + 20.0 + _season(m)[:, None, None] + trend[:, None, None] + _field()[None]
        ds = xr.Dataset({"tasmin": (("time", "lat", "lon"), (tm - 5).astype("f4"), {"units": "K"}),
                         "tasmax": (("time", "lat", "lon"), (tm + 5).astype("f4"), {"units": "K"})},
                        coords=_coords(series))
        ds.to_netcdf(folder / f"tas_{member}.nc", encoding={"time": {"units": "days since 2000-01-01", "calendar": "noleap"}})
        stacked.append(ds)
    ensemble = xr.concat(stacked, dim="realization").assign_coords(realization=list(MEMBERS))
    ensemble.to_netcdf(folder / "tas_ensemble.nc", encoding={"time": {"units": "days since 2000-01-01", "calendar": "noleap"}})


def config(folder, extra_scenarios=(), member_outputs=False):
    climate = {"tmin": {"path": "baseline.nc", "variable": "tmin"}, "tmax": {"path": "baseline.nc", "variable": "tmax"},
               "shortwave": {"path": "baseline.nc", "variable": "rsds"},
               "water_availability": {"path": "baseline.nc", "variable": "wa"}}
    own = {"tmin": {"path": "tas_{member}.nc", "variable": "tasmin"}, "tmax": {"path": "tas_{member}.nc", "variable": "tasmax"}}
    scenarios = [
        {"name": "baseline", "co2_ppm": 420},
        {"name": "mid", "co2_ppm": 480, "period": [2031, 2040], "members": list(MEMBERS), "climate": own},
        {"name": "late", "co2_ppm": 560, "period": [2051, 2060],
         "climate": {"tmin": {"path": "tas_ensemble.nc", "variable": "tasmin"},
                     "tmax": {"path": "tas_ensemble.nc", "variable": "tasmax"}}},
        *extra_scenarios,
    ]
    cfg = {"region": {"name": "Invented ensemble patch",
                      "grid": {"crs": "EPSG:4326", "resolution": 0.02, "bounds": [55.0, -20.96, 55.2, -20.8]}},
           "climate": climate, "scenarios": scenarios,
           "output": {"folder": "out", "member_outputs": member_outputs, "cog": {"overviews": False}},
           "compute": {"scheduler": "threads", "workers": 1}}
    path = folder / "ensemble.yaml"
    path.write_text(yaml.safe_dump(cfg, sort_keys=False))
    return path


def _single(member, period, co2):
    return {"name": f"late_{member}" if period[0] == 2051 else f"mid_{member}", "co2_ppm": co2, "period": period,
            "climate": {"tmin": {"path": f"tas_{member}.nc", "variable": "tasmin"},
                        "tmax": {"path": f"tas_{member}.nc", "variable": "tasmax"}}}


def _read(path):
    with rasterio.open(path) as src:
        return src.read(1)


@pytest.fixture(scope="module")
def ensemble_run(tmp_path_factory):
    folder = tmp_path_factory.mktemp("ensemble")
    write_inputs(folder)
    singles = [_single(m, [2051, 2060], 560) for m in MEMBERS]
    listed = {"name": "late_list", "co2_ppm": 560, "period": [2051, 2060],  # the third form: a list of files
              "climate": {"tmin": {"path": [f"tas_{m}.nc" for m in MEMBERS], "variable": "tasmin"},
                          "tmax": {"path": [f"tas_{m}.nc" for m in MEMBERS], "variable": "tasmax"}}}
    result = suitability.run(config(folder, [*singles, listed], member_outputs=True))
    return folder, result


def test_ensemble_layers_are_written_for_ensembles_only(ensemble_run):
    _, result = ensemble_run
    for name in ("mid", "late"):
        assert {"ensemble_median_advantage", "c4_favoured_share", "change_agreement"} <= set(result.layers[name])
    assert not {"ensemble_median_advantage", "c4_favoured_share", "change_agreement"} & set(result.layers["baseline"])
    assert "ensemble_median_advantage" not in result.layers["late_alpha"]
    assert result.manifest["ensembles"] == {"mid": list(MEMBERS), "late": list(MEMBERS), "late_list": list(MEMBERS)}


def test_members_as_a_list_of_files_equal_the_member_dimension(ensemble_run):
    _, result = ensemble_run  # member names taken from the file names tas_alpha.nc, ... (the part that differs)
    for layer in ("ensemble_median_advantage", "c4_favoured_share", "change_agreement", "pathway_class"):
        np.testing.assert_array_equal(_read(result.layers["late_list"][layer]), _read(result.layers["late"][layer]))


@pytest.mark.slow  # starts a local cluster of two worker processes
def test_members_read_from_series_on_a_local_cluster_give_the_pixels_of_threads(ensemble_run, tmp_path):
    # The members' series are read lazily (xarray backend arrays, shipped to the worker processes); the
    # run on two worker processes must write the pixels the threaded run of the fixture wrote.
    folder, result = ensemble_run
    for path in folder.glob("*.nc"):
        shutil.copy(path, tmp_path / path.name)
    settings = yaml.safe_load(config(tmp_path).read_text())
    settings["scenarios"] = settings["scenarios"][:2]  # baseline and the ensemble of member files
    settings["compute"] = {"scheduler": "local-cluster", "workers": 2}
    (tmp_path / "cluster.yaml").write_text(yaml.safe_dump(settings, sort_keys=False))
    on_cluster = suitability.run(tmp_path / "cluster.yaml")
    for layer in ("ensemble_median_advantage", "c4_favoured_share", "pathway_advantage", "c3_assimilation"):
        np.testing.assert_array_equal(_read(on_cluster.layers["mid"][layer]), _read(result.layers["mid"][layer]))


def test_member_outputs_are_in_the_manifest_and_resume_keeps_or_redoes_them(ensemble_run):
    folder, result = ensemble_run
    manifest = result.manifest  # as written by the fixture's run (a later resumed run replaces the file)
    members = manifest["member_outputs"]["late"]
    assert set(members) == set(MEMBERS)
    recorded = manifest["outputs"]["late"]["members/beta/pathway_advantage"]
    assert recorded["path"] == members["beta"]["pathway_advantage"]
    assert recorded["path"].endswith("late/members/beta/pathway_advantage.tif") and len(recorded["sha256"]) == 64
    config_file = manifest["config_file"]
    again = _run_apart(config_file)
    assert set(again["resumed_scenarios"]) == set(result.layers)  # nothing changed: every scenario kept, members too
    assert again["member_outputs"] == manifest["member_outputs"]
    Path(members["gamma"]["pathway_class"]).unlink()  # a member's output lost: its scenario is computed again
    redone = _run_apart(config_file)
    assert "late" not in redone["resumed_scenarios"] and "mid" in redone["resumed_scenarios"]
    assert Path(members["gamma"]["pathway_class"]).exists()
    assert redone["outputs"]["late"]["members/gamma/pathway_class"]["sha256"] == \
        manifest["outputs"]["late"]["members/gamma/pathway_class"]["sha256"]


def _run_apart(config_file) -> dict:
    """``run(resume=True)`` in a fresh interpreter, as a second CLI call would be; returns its manifest.

    In this test process a further run that reopens the ensemble file (string member labels) while the
    earlier runs' handles are still open crashes inside netCDF-C/HDF5 (segmentation fault in
    H5T__vlen_disk_isnull, seen with gdb); a second run in a fresh process does not."""
    import subprocess
    import sys

    code = "import sys, suitability; print(suitability.run(sys.argv[1], resume=True).manifest_path)"
    done = subprocess.run([sys.executable, "-c", code, str(config_file)], capture_output=True, text=True, check=True)
    return json.loads(Path(done.stdout.strip().splitlines()[-1]).read_text())


def test_ensemble_layers_equal_the_members_run_alone(ensemble_run):
    folder, result = ensemble_run
    singles = np.stack([_read(result.layers[f"late_{m}"]["pathway_advantage"]) for m in MEMBERS])
    median = _read(result.layers["late"]["ensemble_median_advantage"])
    np.testing.assert_allclose(median, np.median(singles, axis=0), atol=1e-6)  # derived here: median of the single runs
    np.testing.assert_allclose(_read(result.layers["late"]["pathway_advantage"]), median)
    share = _read(result.layers["late"]["c4_favoured_share"])
    np.testing.assert_allclose(share, (singles > 0.05).mean(axis=0), atol=1e-6)  # 0.05 = default contested margin
    assert set(np.unique(np.round(share * 3)).tolist()) <= {0.0, 1.0, 2.0, 3.0}
    # per-member outputs on request, identical to the single runs
    member_file = folder / "out" / "late" / "members" / "beta" / "pathway_advantage.tif"
    np.testing.assert_allclose(_read(member_file), singles[1], atol=1e-6)


def test_change_agreement_follows_the_sign_rule(ensemble_run):
    _, result = ensemble_run
    baseline = _read(result.layers["baseline"]["pathway_advantage"])
    singles = np.stack([_read(result.layers[f"late_{m}"]["pathway_advantage"]) for m in MEMBERS])
    change = singles - baseline
    agreement = _read(result.layers["late"]["change_agreement"])
    # AR6 Atlas.1 simple approach with 3 members: 80 % agreement needs all three of the same sign
    expected = np.where((change > 0).all(axis=0), 3, np.where((change < 0).all(axis=0), 1, 2))
    np.testing.assert_array_equal(agreement, expected)
    # the invented members all warm by 1-4 K and CO2 rises to 560 ppm: both directions occur or one does,
    # but every code is one of the legend's
    assert set(np.unique(agreement).tolist()) <= {1, 2, 3}
    with rasterio.open(result.layers["late"]["change_agreement"]) as src:
        assert src.colormap(1)


def test_manifest_records_periods_and_members(ensemble_run):
    _, result = ensemble_run
    manifest = result.manifest  # as written by the fixture's run (a later resumed run replaces the file)
    mid = manifest["input_periods"]["mid"]
    assert set(mid) == set(MEMBERS)
    assert mid["beta"]["tmin"]["period"] == [2031, 2040] and mid["beta"]["tmin"]["calendar"] == "noleap"
    assert manifest["input_periods"]["late"]["gamma"]["tmax"]["years"] == 10
    # every scenario and member is computed in one pass (pipeline._compute_scenarios): one timing for them all
    timings = manifest["timings"]
    assert timings["scenarios_s"] > 0 and timings["total_s"] >= timings["scenarios_s"] + timings["open_inputs_s"]
    assert not [k for k in timings if k.startswith("scenario_")]


def test_agreement_indicator_codes():
    # derived here from the AR6 Atlas.1 simple rule (>= 80 % on one sign), 5 members: 4 of 5 agree = 80 %
    base = xr.DataArray(np.zeros(4), dims="x")
    members = xr.DataArray(np.array([[1, 1, -1, np.nan], [1, 1, -1, 1], [1, -1, -1, 1], [1, 1, -1, 1], [-1, 1, 1, 1.0]]),
                           dims=("member", "x"))
    codes = indicators.change_agreement(base, members)
    assert codes.values.tolist() == [3, 3, 1, 255]
    assert indicators.change_agreement(base, members[:3]).values.tolist()[:3] == [3, 2, 1]  # 2 of 3 = 67 % < 80 %


def test_mixed_monthly_and_daily_members_are_refused(tmp_path):
    write_inputs(tmp_path)
    daily = xr.date_range("2031-01-01", "2040-12-31", freq="D", calendar="noleap", use_cftime=True)
    ds = xr.Dataset({name: (("time", "lat", "lon"), np.full((daily.size, NY, NX), 295.0, "f4"), {"units": "K"})
                     for name in ("tasmin", "tasmax")}, coords=_coords(daily))
    ds.to_netcdf(tmp_path / "tas_gamma.nc", encoding={"time": {"units": "days since 2000-01-01", "calendar": "noleap"}})
    with pytest.raises(InputDataError, match="mixes time steps between members") as info:
        suitability.run(config(tmp_path))
    assert str(tmp_path / "tas_gamma.nc") in str(info.value) and "'tmin'" in str(info.value)
    assert not (tmp_path / "out").exists() or not any((tmp_path / "out").rglob("*.tif"))  # nothing written


def test_members_with_different_variables_are_refused(tmp_path):
    write_inputs(tmp_path)
    with xr.open_dataset(tmp_path / "tas_beta.nc") as ds:
        renamed = ds.rename(tasmin="tn", tasmax="tx").load()
    renamed.to_netcdf(tmp_path / "tas_beta.nc", encoding={"time": {"units": "days since 2000-01-01", "calendar": "noleap"}})
    with pytest.raises(InputDataError) as info:  # the variable named in the config is missing in one member
        suitability.run(config(tmp_path))
    assert str(tmp_path / "tas_beta.nc") in str(info.value) and "'tmin'" in str(info.value)
    assert "no variable 'tasmin'" in str(info.value)
    assert not (tmp_path / "out").exists() or not any((tmp_path / "out").rglob("*.tif"))
    # without 'variable' each member file's only variable is read: a member giving another quantity is refused
    for member in MEMBERS:
        with xr.open_dataset(tmp_path / f"tas_{member}.nc") as ds:
            one = ds[["tn" if member == "beta" else "tasmin"]].rename({"tn": "tasmin"} if member == "beta" else {}).load()
        if member == "gamma":
            one = one.rename(tasmin="tas").assign(tas=lambda d: d["tas"].assign_attrs(standard_name="air_temperature"))
        one.to_netcdf(tmp_path / f"tmin_{member}.nc", encoding={"time": {"units": "days since 2000-01-01", "calendar": "noleap"}})
    path = config(tmp_path)
    cfg = yaml.safe_load(path.read_text())
    cfg["scenarios"][1]["climate"] = {"tmin": {"path": "tmin_{member}.nc"}}
    cfg["scenarios"] = cfg["scenarios"][:2]
    path.write_text(yaml.safe_dump(cfg, sort_keys=False))
    with pytest.raises(InputDataError, match="different variables between members") as info:
        suitability.run(path)
    assert str(tmp_path / "tmin_gamma.nc") in str(info.value) and "tas (air_temperature)" in str(info.value)
    assert not (tmp_path / "out").exists() or not any((tmp_path / "out").rglob("*.tif"))


def test_members_on_different_grids_are_aligned(tmp_path):
    write_inputs(tmp_path)
    with xr.open_dataset(tmp_path / "tas_beta.nc") as ds:  # beta on a coarser grid (every other cell)
        coarse = ds.isel(lat=slice(0, None, 2), lon=slice(0, None, 2)).load()
    coarse.to_netcdf(tmp_path / "tas_beta.nc", encoding={"time": {"units": "days since 2000-01-01", "calendar": "noleap"}})
    path = config(tmp_path)
    cfg = yaml.safe_load(path.read_text())
    cfg["scenarios"] = cfg["scenarios"][:2]
    path.write_text(yaml.safe_dump(cfg, sort_keys=False))
    result = suitability.run(path)
    share = _read(result.layers["mid"]["c4_favoured_share"])
    assert share.shape == (NY, NX) and np.isfinite(share[2:-2, 2:-2]).all()


def test_list_of_member_files_in_config():
    from suitability.config import load_config  # noqa: F401 - the schema is what is tested
    from suitability.config.schema import ScenarioConfig

    base = {"name": "s", "co2_ppm": 500, "climate": {"tmin": {"path": ["d/tasmin_cnrm.nc", "d/tasmin_ipsl.nc"]},
                                                     "tmax": {"path": ["d/tasmax_cnrm.nc", "d/tasmax_ipsl.nc"]}}}
    scenario = ScenarioConfig.model_validate(base)
    assert scenario.members == ["cnrm", "ipsl"]
    assert scenario.member_climate("ipsl")["tmax"].path.name == "tasmax_ipsl.nc"
    named = ScenarioConfig.model_validate({**base, "members": ["m1", "m2"]})
    assert named.member_climate("m2")["tmin"].path.name == "tasmin_ipsl.nc"
    with pytest.raises(ValueError, match="one name per file"):
        ScenarioConfig.model_validate({**base, "members": ["a", "b", "c"]})
    uneven = {**base, "climate": {**base["climate"], "tmax": {"path": ["a.nc", "b.nc", "c.nc"]}}}
    with pytest.raises(ValueError, match="one file per member"):
        ScenarioConfig.model_validate(uneven)
    mixed = {**base, "members": ["cnrm", "ipsl"], "climate": {**base["climate"], "tmax": {"path": "d/{member}.nc"}}}
    with pytest.raises(ValueError, match="one way"):
        ScenarioConfig.model_validate(mixed)


def _monthly_file(path, name, values, units):
    time = xr.date_range("2000-01-01", periods=12, freq="MS", calendar="noleap", use_cftime=True)
    data = np.broadcast_to(np.asarray(values, "f4")[:, None, None], (12, NY, NX))
    xr.Dataset({name: (("time", "lat", "lon"), data, {"units": units})}, coords=_coords(time)).to_netcdf(path)


def _bad_input(folder, case):
    """The ensemble config with one bad input; returns (config path, the file and layer the error must name)."""
    path = config(folder)
    cfg = yaml.safe_load(path.read_text())
    cfg["scenarios"] = cfg["scenarios"][:2]  # baseline and the three-member 'mid'
    if case == "period outside the file":
        cfg["scenarios"][1]["period"] = [2051, 2075]  # the member files hold 2031-2060
        named = (folder / "tas_alpha.nc", "tmin")
    elif case == "undecodable calendar":
        with xr.open_dataset(folder / "tas_beta.nc", decode_times=False) as ds:
            raw = ds.load()
        raw["time"].attrs["calendar"] = "martian_sols"
        raw.to_netcdf(folder / "tas_beta.nc")
        named = (folder / "tas_beta.nc", "tmin")
    else:
        rain = np.array([2.0, 3, 4, 5, 4, 3, 2, 1, 1, 1, 2, 2])
        if case == "negative rainfall":
            _monthly_file(folder / "pr.nc", "pr", rain - 3.0, "mm d-1")
            named = (folder / "pr.nc", "precipitation")
        else:  # PET in mm per month declared as mm per day (threshold: common practice, no source)
            _monthly_file(folder / "pr.nc", "pr", rain, "mm d-1")
            _monthly_file(folder / "pet.nc", "pet", 30.0 * np.array([3.0, 3, 4, 5, 6, 6, 6, 5, 4, 4, 3, 3]), "mm d-1")
            cfg["climate"]["pet"] = {"path": "pet.nc"}
            named = (folder / "pet.nc", "pet")
        del cfg["climate"]["water_availability"]
        cfg["climate"]["precipitation"] = {"path": "pr.nc"}
    path.write_text(yaml.safe_dump(cfg, sort_keys=False))
    return path, named


@pytest.mark.parametrize("case", ["period outside the file", "undecodable calendar", "negative rainfall",
                                  "PET totals declared per day"])
def test_bad_input_is_named_and_nothing_is_written(tmp_path, case):
    write_inputs(tmp_path)
    path, (file, layer) = _bad_input(tmp_path, case)
    with pytest.raises(InputDataError) as info:
        suitability.run(path)
    assert str(file) in str(info.value) and f"'{layer}'" in str(info.value), str(info.value)
    assert not (tmp_path / "out").exists() or not any(p.is_file() for p in (tmp_path / "out").rglob("*"))


def test_check_shows_calendar_period_years_members_and_the_derived_method(tmp_path):
    from suitability.config import load_config
    from suitability.inputs import inspect_inputs

    write_inputs(tmp_path)
    rain = np.array([2.0, 3, 4, 5, 4, 3, 2, 1, 1, 1, 2, 2])
    _monthly_file(tmp_path / "pr.nc", "pr", rain, "mm d-1")
    _monthly_file(tmp_path / "rh.nc", "hurs", np.full(12, 70.0), "percent")
    _monthly_file(tmp_path / "wind.nc", "sfcWind", np.full(12, 3.0), "m s-1")
    path = config(tmp_path)
    cfg = yaml.safe_load(path.read_text())
    del cfg["climate"]["water_availability"]
    cfg["climate"].update({"precipitation": {"path": "pr.nc"}, "humidity": {"path": "rh.nc"},
                           "wind_speed": {"path": "wind.nc", "height_m": 10}})
    cfg["scenarios"][2]["climate"] = {name: {"path": [f"tas_{m}.nc" for m in MEMBERS], "variable": f"tas{name[1:]}"}
                                      for name in ("tmin", "tmax")}
    path.write_text(yaml.safe_dump(cfg, sort_keys=False))
    reports = inspect_inputs(load_config(path))
    mid = next(r for r in reports if r.layer == "tmin" and r.scenario == "mid")
    assert mid.time.startswith("3 members (alpha, beta, gamma)") and "noleap calendar, 2031-2040 (10 years)" in mid.time
    late = next(r for r in reports if r.layer == "tmax" and r.scenario == "late")
    assert late.path.endswith("(3 files)") and "2051-2060 (10 years)" in late.time and not late.problems
    wind = next(r for r in reports if r.layer == "wind_speed")
    assert "wind at 10 m brought to 2 m (FAO-56 eq. 47)" in wind.warnings
    derived = next(r for r in reports if r.layer == "water_availability" and r.path.startswith("(derived"))
    assert "FAO-56 Penman-Monteith (eq. 6)" in derived.time and "Thornthwaite & Mather" in derived.time
    from suitability.inputs.inspection import derived_methods  # what the manifest records as "derived"

    assert derived_methods(load_config(path)) == {"baseline": derived.time}
    # a member with daily steps among monthly ones is a problem of that layer, as the run refuses it
    daily = xr.date_range("2031-01-01", "2040-12-31", freq="D", calendar="noleap", use_cftime=True)
    ds = xr.Dataset({name: (("time", "lat", "lon"), np.full((daily.size, NY, NX), 295.0, "f4"), {"units": "K"})
                     for name in ("tasmin", "tasmax")}, coords=_coords(daily))
    ds.to_netcdf(tmp_path / "d_gamma.nc", encoding={"time": {"units": "days since 2000-01-01", "calendar": "noleap"}})
    for member in ("alpha", "beta"):  # copies: the files opened above stay open in this process
        shutil.copy(tmp_path / f"tas_{member}.nc", tmp_path / f"d_{member}.nc")
    for name in ("tmin", "tmax"):
        cfg["scenarios"][1]["climate"][name]["path"] = "d_{member}.nc"
    path.write_text(yaml.safe_dump(cfg, sort_keys=False))
    reports = inspect_inputs(load_config(path))
    mid = next(r for r in reports if r.layer == "tmin" and r.scenario == "mid")
    assert any("members mix time steps" in p and "gamma: daily series" in p for p in mid.problems)


def test_the_baseline_climate_takes_one_path_per_layer():
    from pydantic import ValidationError

    from suitability.config import ClimateConfig

    layers = {"tmin": {"path": ["a.nc", "b.nc"]}, "tmax": {"path": "t.nc"}, "shortwave": {"path": "s.nc"},
              "water_availability": {"path": "w.nc"}}
    with pytest.raises(ValidationError, match="a list of files is for the ensemble members"):
        ClimateConfig.model_validate(layers)
