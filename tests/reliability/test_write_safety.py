"""Issue 13, classes 1, 2 and 10: writers that never follow a planted link, cleanup that removes only the
tool's own marked temporaries, and the smaller contract breaks (CSV formula injection, non-polygon
districts, an empty brief/ folder, the wording of a nearly full disk).

What is checked against: the issue's own statement of each failure and of the expected behaviour; for CSV
cells the OWASP "CSV Injection" guidance (a leading apostrophe before = + - @, tab, carriage return);
O_NOFOLLOW / O_EXCL semantics from POSIX open(2). Runs use the invented demo region (demo_region/README.md).
"""

from __future__ import annotations

import errno
import json
import os
import shutil
import socket
import stat
import subprocess
import sys
from pathlib import Path

import geopandas as gpd
import pandas as pd
import pytest
import shapely

from suitability.atomic import (
    TEMPORARY_PREFIX,
    atomic_write,
    byte_size_text,
    disk_full_hint,
    make_private_folder,
    marked_prefix,
    write_text_atomic,
)
from suitability.errors import InputDataError, OutputError
from suitability.outputs import check_output_folder, remove_leftovers, spreadsheet_safe, write_csv, write_manifest
from suitability.reports.zones import read_zones
from suitability.runlock import LOCK_NAME, RunLock

from .conftest import DEMO_DATA, EXIT_INPUT, EXIT_OUTPUT, assert_clean_error, cli, demo_config, write_config

VICTIM_TEXT = "the user's own file, which no write of the tool may change\n"


def _victim(tmp_path) -> Path:
    victim = tmp_path / "elsewhere" / "victim.txt"
    victim.parent.mkdir(exist_ok=True)
    victim.write_text(VICTIM_TEXT)
    return victim


def _dead_pid() -> int:
    child = subprocess.Popen([sys.executable, "-c", "pass"])
    child.wait()
    return child.pid


# ------------------------------------------------------------------------------- class 1: planted links


@pytest.mark.parametrize("name", ["manifest.json", "class_summary.csv", "kessarine_basin_baseline.html"])
def test_a_link_at_the_final_name_is_replaced_not_followed(tmp_path, name):
    victim = _victim(tmp_path)
    folder = tmp_path / "out"
    folder.mkdir()
    (folder / name).symlink_to(victim)
    write_text_atomic(folder / name, "new content\n")
    assert victim.read_text() == VICTIM_TEXT
    assert not (folder / name).is_symlink() and (folder / name).read_text() == "new content\n"


def test_a_link_at_a_category_sidecar_is_replaced_not_followed(tmp_path):
    # The PAM sidecar of a class layer (<name>.tif.aux.xml) is renamed into place like the raster itself.
    import numpy as np
    import rioxarray  # noqa: F401
    import xarray as xr

    from suitability.outputs import pam_sidecar_path, write_layers

    victim = _victim(tmp_path)
    folder = tmp_path / "out"
    folder.mkdir()
    sidecar = folder / "pathway_class.tif.aux.xml"
    sidecar.symlink_to(victim)
    codes = np.resize(np.array([1, 2, 3, 4, 255], np.uint8), (40, 50))
    coords = {"y": 7459500.0 - 1000 * np.arange(40), "x": 300500.0 + 1000 * np.arange(50)}
    layer = xr.DataArray(codes, dims=("y", "x"), coords=coords).rio.write_crs("EPSG:32740")
    written = write_layers({"pathway_class": layer}, folder, cog_options={"overviews": False})
    assert pam_sidecar_path(written["pathway_class"]) == sidecar
    assert victim.read_text() == VICTIM_TEXT
    assert not sidecar.is_symlink() and "<CategoryNames>" in sidecar.read_text()


@pytest.mark.parametrize("planted", [
    ".kessarine_basin_baseline.html.tmp-{pid}.html",  # the old fixed temporary name, with this pid
    ".kessarine_basin_baseline.tmp.html",             # the fixed name the issue reports for briefs
    ".kessarine_basin_baseline.html.tmp",
])
def test_links_at_predictable_temporary_names_are_never_written_through(tmp_path, planted):
    victim = _victim(tmp_path)
    folder = tmp_path / "out"
    folder.mkdir()
    link = folder / planted.format(pid=os.getpid())
    link.symlink_to(victim)
    write_text_atomic(folder / "kessarine_basin_baseline.html", "<html>brief</html>")
    assert victim.read_text() == VICTIM_TEXT
    assert link.is_symlink()  # not ours: left as it is
    final = folder / "kessarine_basin_baseline.html"
    assert not final.is_symlink() and final.read_text() == "<html>brief</html>"


def test_temporaries_live_in_a_private_folder_that_only_this_user_may_enter(tmp_path):
    seen = {}

    def write(path: Path) -> None:
        seen["parent"] = path.parent
        seen["mode"] = stat.S_IMODE(os.lstat(path.parent).st_mode)
        seen["exists"] = path.exists()
        path.write_text("x")

    atomic_write(tmp_path / "table.csv", write)
    assert seen["parent"].name.startswith(marked_prefix(TEMPORARY_PREFIX))
    assert seen["mode"] == 0o700 and seen["exists"] is False
    assert not seen["parent"].exists()  # removed after the rename
    # Two temporaries for one target never share a name (unpredictable, made with mkdtemp).
    assert make_private_folder(tmp_path) != make_private_folder(tmp_path)


def test_a_failed_write_removes_its_private_folder_and_keeps_the_old_file(tmp_path):
    (tmp_path / "manifest.json").write_text("old")

    def fail(path: Path) -> None:
        path.write_text("half")
        raise RuntimeError("writer crashed")

    with pytest.raises(OutputError, match="writer crashed"):
        atomic_write(tmp_path / "manifest.json", fail, what="the manifest")
    assert (tmp_path / "manifest.json").read_text() == "old"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["manifest.json"]


def test_a_writer_that_leaves_a_link_instead_of_a_file_is_refused(tmp_path):
    victim = _victim(tmp_path)
    with pytest.raises(OutputError, match="did not produce a regular file"):
        atomic_write(tmp_path / "x.csv", lambda path: path.symlink_to(victim))
    assert not (tmp_path / "x.csv").exists() and victim.read_text() == VICTIM_TEXT


def test_a_link_at_the_lock_name_is_refused_and_not_followed(tmp_path):
    victim = _victim(tmp_path)
    (tmp_path / LOCK_NAME).symlink_to(victim)
    with pytest.raises(OutputError, match="symbolic link"):
        RunLock(tmp_path).acquire()
    assert victim.read_text() == VICTIM_TEXT


def test_a_dangling_link_at_the_lock_name_creates_nothing_at_its_target(tmp_path):
    target = tmp_path / "elsewhere" / "created-by-the-tool"
    target.parent.mkdir()
    (tmp_path / LOCK_NAME).symlink_to(target)
    with pytest.raises(OutputError, match="symbolic link"):
        RunLock(tmp_path).acquire()
    assert not target.exists()


def test_a_fifo_at_the_lock_name_is_refused_without_blocking(tmp_path):
    os.mkfifo(tmp_path / LOCK_NAME)
    with pytest.raises(OutputError, match="not a regular file"):
        RunLock(tmp_path).acquire()


def test_manifest_and_csv_writers_replace_links(tmp_path):
    victim = _victim(tmp_path)
    (tmp_path / "manifest.json").symlink_to(victim)
    (tmp_path / "table.csv").symlink_to(victim)
    write_manifest({"status": "done"}, tmp_path / "manifest.json")
    write_csv(pd.DataFrame({"a": [1]}), tmp_path / "table.csv")
    assert victim.read_text() == VICTIM_TEXT
    assert json.loads((tmp_path / "manifest.json").read_text()) == {"status": "done"}
    assert (tmp_path / "table.csv").read_text().splitlines() == ["a", "1"]


def test_init_replaces_a_dangling_link_instead_of_creating_its_target(tmp_path):
    target = tmp_path / "elsewhere" / "planted.yaml"
    target.parent.mkdir()
    link = tmp_path / "suitability.yaml"
    link.symlink_to(target)
    result = cli("init", link, "--force")
    assert result.exit_code == 0, result.output
    assert not target.exists()
    assert not link.is_symlink() and "region" in link.read_text()


@pytest.mark.slow  # briefs (HTML and PDF) of a finished run
def test_brief_with_links_planted_at_its_names_writes_around_them(tmp_path, finished_run):
    shutil.copytree(finished_run / "out", tmp_path / "out")
    victim = _victim(tmp_path)
    brief = tmp_path / "out" / "brief"
    brief.mkdir()
    planted = [brief / ".kessarine_basin_co2_only.tmp.html", brief / "kessarine_basin_co2_only.html",
               brief / f".kessarine_basin_co2_only.html.tmp-{os.getpid()}.html", brief / "kessarine_basin_districts.csv"]
    for link in planted:
        link.symlink_to(victim)
    dead = _dead_pid()
    leftover = brief / f"{TEMPORARY_PREFIX}{socket.gethostname()}-{dead}-abc123"
    leftover.mkdir()
    (leftover / "kessarine_basin_co2_only.pdf").write_bytes(b"half a pdf")
    config = demo_config(brief=True)
    config["output"]["folder"] = str(tmp_path / "out")
    # Links at the final names count as existing briefs, which `brief` replaces only with --overwrite.
    result = cli("brief", write_config(tmp_path, config), "--overwrite")
    assert result.exit_code == 0, result.output
    assert victim.read_text() == VICTIM_TEXT
    for final in ("kessarine_basin_co2_only.html", "kessarine_basin_districts.csv"):
        assert not (brief / final).is_symlink() and (brief / final).stat().st_size > 0
    assert not leftover.exists()  # brief cleans up like run does
    assert (brief / ".kessarine_basin_co2_only.tmp.html").is_symlink()  # not the tool's: left alone


# ------------------------------------------------------------------------------- class 2: cleanup


def _marked(folder: Path, pid: int, host: str | None = None, prefix: str = TEMPORARY_PREFIX) -> Path:
    path = folder / f"{prefix}{host or socket.gethostname()}-{pid}-x1y2z3"
    path.mkdir(parents=True)
    (path / "c3_assimilation.tif").write_bytes(b"partial")
    return path


def test_cleanup_keeps_every_file_the_tool_did_not_create(tmp_path):
    out = tmp_path / "out"
    (out / "baseline").mkdir(parents=True)
    (out / "notes").mkdir()
    user_files = [out / ".notes.tmp", out / ".draft.tmp-123.tif", out / f".plan.tmp-{_dead_pid()}.html",
                  out / ".suitability-write-test-abc", out / "baseline" / ".mine.tmp.csv",
                  out / "notes" / ".cache.tmp-1", out / ".x.final-99999999"]
    for path in user_files:
        path.write_text("user data")
    # A user's folder that merely looks like ours, one level deeper than the tool ever writes.
    deep = _marked(out / "notes", _dead_pid())
    removed = remove_leftovers(out, ["baseline", "brief"])
    assert removed == []
    assert all(p.read_text() == "user data" for p in user_files)
    assert deep.exists()


def test_cleanup_removes_only_marked_folders_of_dead_processes_of_this_host(tmp_path):
    out = tmp_path / "out"
    (out / "co2_only").mkdir(parents=True)
    dead = _dead_pid()
    abandoned = [_marked(out, dead), _marked(out / "co2_only", dead, prefix=".suitability-staging-")]
    alive = _marked(out, os.getpid())
    other_host = _marked(out, dead, host="another-host.example")
    removed = remove_leftovers(out, ["co2_only", "brief"])
    assert sorted(removed) == sorted(abandoned)
    assert not any(p.exists() for p in abandoned)
    assert alive.exists() and other_host.exists()


def test_cleanup_never_follows_a_link_named_like_a_marked_folder(tmp_path):
    precious = tmp_path / "precious"
    precious.mkdir()
    (precious / "data.txt").write_text("keep")
    out = tmp_path / "out"
    out.mkdir()
    link = out / f"{TEMPORARY_PREFIX}{socket.gethostname()}-{_dead_pid()}-abc"
    link.symlink_to(precious, target_is_directory=True)
    assert remove_leftovers(out, ["brief"]) == []
    assert (precious / "data.txt").read_text() == "keep" and link.is_symlink()


def test_write_test_of_the_output_folder_leaves_nothing(tmp_path):
    check_output_folder(tmp_path / "out", ["baseline/pathway_class.tif"])
    assert [p.name for p in (tmp_path / "out").iterdir()] == ["baseline"]
    assert list((tmp_path / "out" / "baseline").iterdir()) == []


def test_run_keeps_the_users_hidden_files_and_warns_about_foreign_ones(tmp_path):
    out = tmp_path / "out"
    out.mkdir()
    (out / ".notes.tmp").write_text("user data")
    (out / "field_photos").mkdir()
    config = demo_config(scenarios=1)
    result = cli("run", write_config(tmp_path, config), "--no-progress")
    assert result.exit_code == 0, result.output
    assert (out / ".notes.tmp").read_text() == "user data"
    flat = " ".join(result.output.split())
    assert "also holds 2 file(s) or folder(s) the tool does not write (.notes.tmp, field_photos)" in flat


def test_warning_when_the_output_folder_holds_inputs(tmp_path):
    import warnings

    from suitability.config import validate_config
    from suitability.pipeline import _warn_about_foreign_files

    data = tmp_path / "data"
    shutil.copytree(DEMO_DATA, data)
    config = demo_config(scenarios=1)
    for layer in config["climate"].values():
        layer["path"] = str(data / Path(layer["path"]).name)
    config["output"]["folder"] = str(data)
    cfg = validate_config(config, tmp_path)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        _warn_about_foreign_files(cfg, data)
    texts = [str(w.message) for w in caught]
    assert any("holds input files of this run" in t and str(data / "elevation.tif") in t for t in texts), texts


# ------------------------------------------------------------------------------- class 10: smaller breaks


@pytest.mark.parametrize("text", ['=HYPERLINK("http://127.0.0.1/x","click")', "+1+2", "-2+3", "@SUM(A1)",
                                  "\t=1"])
def test_csv_cells_that_a_spreadsheet_would_run_are_neutralised(tmp_path, text):
    write_csv(pd.DataFrame({"district": [text, "Plain Name"], "share": [-0.5, 0.25]}), tmp_path / "t.csv")
    back = pd.read_csv(tmp_path / "t.csv", keep_default_na=False)
    assert back["district"].tolist() == ["'" + text, "Plain Name"]
    assert back["share"].tolist() == [-0.5, 0.25]  # numbers stay numbers, negative ones too


def test_spreadsheet_safe_leaves_harmless_values():
    assert spreadsheet_safe("North East") == "North East"
    assert spreadsheet_safe(-3.5) == -3.5
    assert spreadsheet_safe("") == ""
    assert spreadsheet_safe("\r=1") == "'\r=1"  # a carriage return first (OWASP list)


@pytest.mark.parametrize("geometry", [shapely.Point(400_000, 7_380_000),
                                      shapely.LineString([(350_000, 7_350_000), (450_000, 7_420_000)]),
                                      shapely.MultiPoint([(400_000, 7_380_000), (410_000, 7_390_000)])])
def test_points_and_lines_are_refused_as_districts(tmp_path, geometry):
    districts = gpd.read_file(DEMO_DATA / "districts.gpkg", engine="pyogrio")
    extra = gpd.GeoDataFrame({"district": ["Stray Feature (invented)"]}, geometry=[geometry], crs=districts.crs)
    zones = tmp_path / "mixed.gpkg"
    pd.concat([districts, extra], ignore_index=True).to_file(zones, engine="pyogrio")
    with pytest.raises(InputDataError, match=r"1 district\(s\) are not polygons: 'Stray Feature \(invented\)'"):
        read_zones(zones, "district")


def test_a_refused_brief_leaves_no_brief_folder(tmp_path, finished_run):
    shutil.copytree(finished_run / "out", tmp_path / "out")
    (tmp_path / "out" / "co2_only" / "advantage_change.tif").unlink()  # the brief needs it
    config = demo_config(brief=True)
    config["output"]["folder"] = str(tmp_path / "out")
    assert_clean_error(cli("brief", write_config(tmp_path, config)), EXIT_INPUT, "advantage_change.tif")
    assert not (tmp_path / "out" / "brief").exists()


def test_a_nearly_full_disk_is_reported_in_readable_units(tmp_path):
    hint = disk_full_hint(OSError(errno.ENOSPC, "No space left on device"), tmp_path)
    assert "the disk is full or nearly full" in hint and " bytes free" not in hint
    assert byte_size_text(1052672) == "1.0 MiB"  # 1052672 / 1024**2 = 1.0039 (derived here)
    assert byte_size_text(512) == "512 bytes"
    assert byte_size_text(3 * 1024**3) == "3.0 GiB"


def test_a_scenario_folder_planted_as_a_link_is_refused(tmp_path):
    elsewhere = tmp_path / "elsewhere"
    elsewhere.mkdir()
    out = tmp_path / "out"
    out.mkdir()
    (out / "baseline").symlink_to(elsewhere, target_is_directory=True)
    with pytest.raises(OutputError, match="is a symbolic link"):
        check_output_folder(out, ["baseline/pathway_class.tif"])
    assert list(elsewhere.iterdir()) == []


def test_a_brief_folder_planted_as_a_link_is_refused(tmp_path, finished_run):
    shutil.copytree(finished_run / "out", tmp_path / "out")
    elsewhere = tmp_path / "elsewhere"
    elsewhere.mkdir()
    (tmp_path / "out" / "brief").symlink_to(elsewhere, target_is_directory=True)
    config = demo_config(brief=True)
    config["output"]["folder"] = str(tmp_path / "out")
    assert_clean_error(cli("brief", write_config(tmp_path, config)), EXIT_OUTPUT, "is a symbolic link")
    assert list(elsewhere.iterdir()) == []
