"""Issue 13, class 3: unbounded work from small inputs. Everything a user controls is bounded: config
size, alias expansion, nesting, the kind of file read as a config; the grid against a cell limit and the
disk, with the arithmetic in the message; labels and charts that scale; a deadline on the connection to
an existing scheduler.

Checked against the issue's statement of each case. The bounds are the documented ones
(suitability.config.loading.MAX_CONFIG_BYTES / MAX_CONFIG_NODES, suitability.config.schema.MAX_GRID_CELLS,
suitability.reports.figures.MAX_MAP_LABELS / MAX_CHART_DISTRICTS, suitability.reports.brief.MAX_DISTRICT_BRIEFS);
every run that could hang is a child process with a generous timeout that only prevents a hang.
"""

from __future__ import annotations

import os
import shutil
import socket
import threading
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import pytest
import rasterio
import shapely
import yaml
from affine import Affine

from suitability.config.loading import MAX_CONFIG_BYTES, MAX_CONFIG_NODES
from suitability.errors import InputDataError
from suitability.grid import TargetGrid
from suitability.reports import figures
from suitability.reports.brief import largest_districts

from .conftest import (
    EXIT_CONFIG,
    EXIT_OUTPUT,
    assert_clean_error,
    cli,
    demo_config,
    run_subprocess,
    snapshot,
    write_config,
)


def _yaml_with(tmp_path, extra: str) -> Path:
    path = write_config(tmp_path, demo_config())
    path.write_text(path.read_text() + extra)
    return path


# ------------------------------------------------------------------------------------------- the config


def _alias_bomb(levels: int, fan: int = 10) -> str:
    lines = ["bomb0: &b0 [x, x, x, x, x, x, x, x, x, x]"]
    for i in range(1, levels):
        lines.append(f"bomb{i}: &b{i} [{', '.join([f'*b{i - 1}'] * fan)}]")
    return "\n".join(lines) + "\n"


@pytest.mark.parametrize("command", ["check", "run"])
def test_alias_expansion_bomb_is_refused_quickly_with_the_limit(tmp_path, command):
    path = tmp_path / "bomb.yaml"
    path.write_text(_alias_bomb(9))  # 10**9 values from 9 short lines
    assert path.stat().st_size < 1000
    result = run_subprocess(command, path, timeout=120)
    assert result.returncode == EXIT_CONFIG, result.stderr
    assert f"more than {MAX_CONFIG_NODES:,} values" in " ".join(result.stderr.split())


def test_alias_bomb_hidden_below_a_valid_section_is_refused(tmp_path):
    config = yaml.safe_dump(demo_config(), sort_keys=False)
    assert "\n  folder: out\n" in config
    text = _alias_bomb(7) + config.replace("\n  folder: out\n", "\n  folder: out\n  notes: *b6\n", 1)
    path = tmp_path / "config.yaml"
    path.write_text(text)
    assert_clean_error(cli("check", path), EXIT_CONFIG, f"more than {MAX_CONFIG_NODES:,} values")


def test_an_alias_inside_itself_is_refused(tmp_path):
    path = tmp_path / "loop.yaml"
    path.write_text("region: &r\n  name: x\n  again: *r\n")
    assert_clean_error(cli("check", path), EXIT_CONFIG, "refers to the value that contains it")


def test_a_large_config_is_refused_before_parsing(tmp_path):
    path = _yaml_with(tmp_path, "# padding\n" * (MAX_CONFIG_BYTES // 10 + 10))
    assert path.stat().st_size > MAX_CONFIG_BYTES
    assert_clean_error(cli("check", path), EXIT_CONFIG, f"larger than {MAX_CONFIG_BYTES // 1024} KiB")


def test_a_deeply_nested_config_is_refused(tmp_path):
    path = tmp_path / "deep.yaml"
    path.write_text("region: " + "[" * 100_000 + "]" * 100_000 + "\n")
    assert_clean_error(cli("check", path), EXIT_CONFIG, str(path))


@pytest.mark.parametrize("device", ["/dev/zero", "/dev/urandom"])
def test_a_device_is_not_read_as_a_config(device):
    if not os.path.exists(device):
        pytest.skip(f"{device} is not available")
    result = run_subprocess("run", device, timeout=120)
    assert result.returncode == EXIT_CONFIG, result.stderr
    assert "not a regular file" in result.stderr


def test_a_fifo_is_not_read_as_a_config(tmp_path):
    fifo = tmp_path / "config.yaml"
    os.mkfifo(fifo)  # opening it for reading would block until a writer comes
    assert_clean_error(cli("check", fifo), EXIT_CONFIG, "not a regular file")


# ------------------------------------------------------------------------------------------- the grid


def test_a_huge_grid_is_refused_with_the_arithmetic(tmp_path):
    config = demo_config()
    # 300 km x 150 km at 1 m: 300000 x 150000 = 4.5e10 cells (derived here).
    config["region"]["grid"].update(resolution=1, bounds=[200000, 7300000, 500000, 7450000])
    assert_clean_error(cli("check", write_config(tmp_path, config)), EXIT_CONFIG, "region.grid",
                       "300000 x 150000 = 4.5e+10 cells", "168 GiB per float32 layer")  # 4.5e10 * 4 / 2**30


def test_a_huge_like_raster_is_refused_with_the_arithmetic(tmp_path):
    like = tmp_path / "like.tif"
    with rasterio.open(like, "w", driver="GTiff", width=50_000, height=50_000, count=1, dtype="uint8",
                       crs="EPSG:32740", transform=Affine(10, 0, 300000, 0, -10, 7460000), tiled=True,
                       SPARSE_OK=True) as dst:
        pass  # header only: the tiles are never written
    assert like.stat().st_size < 10_000_000
    with pytest.raises(InputDataError, match=r"50000 x 50000 = 2\.5e\+09 cells"):
        TargetGrid.from_raster(like)


def test_outputs_that_cannot_fit_on_the_disk_are_refused_before_computing(tmp_path, monkeypatch):
    real = shutil.disk_usage

    def nearly_full(path):
        usage = real(path)
        return type(usage)(usage.total, usage.total - 1000, 1000)  # 1000 bytes free

    monkeypatch.setattr(shutil, "disk_usage", nearly_full)
    folder = tmp_path / "out"
    folder.mkdir()
    output = assert_clean_error(cli("run", write_config(tmp_path, demo_config()), "--no-progress"), EXIT_OUTPUT,
                                "the outputs cannot fit", "200 x 160 = 32,000 cells", "1000 bytes free")
    assert "Traceback" not in output
    assert not (folder / "baseline" / "pathway_class.tif").exists()


# ------------------------------------------------------------------------------------------- districts


def _many_districts(count: int, crs="EPSG:32740") -> gpd.GeoDataFrame:
    side = int(np.ceil(np.sqrt(count)))
    size = 150_000 / side
    boxes = [shapely.box(310_000 + (i % side) * size, 7_305_000 + (i // side) * size,
                         310_000 + (i % side + 1) * size, 7_305_000 + (i // side + 1) * size) for i in range(count)]
    return gpd.GeoDataFrame({"district": [f"D{i:05d} (invented)" for i in range(count)]}, geometry=boxes, crs=crs)


def test_a_map_of_many_districts_draws_no_label_per_district(tmp_path, finished_run):
    zones = _many_districts(400)
    figure = figures.class_map_figure(finished_run / "out" / "baseline" / "pathway_class.tif", zones, title="t")
    texts = [t.get_text() for t in figure.axes[0].texts]
    assert not any(t.startswith("D0") for t in texts)
    highlighted = figures.class_map_figure(finished_run / "out" / "baseline" / "pathway_class.tif", zones,
                                           title="t", highlight="D00017 (invented)")
    assert [t.get_text() for t in highlighted.axes[0].texts if t.get_text().startswith("D0")] == ["D00017 (invented)"]


def test_a_share_chart_of_many_districts_shows_the_largest_only():
    count = 500
    table = pd.DataFrame({
        "district": [f"D{i}" for i in range(count) for _ in range(2)],
        "scenario": ["baseline", "co2_only"] * count,
        "district_area_ha": [float(i) for i in range(count) for _ in range(2)],
        "share_c3": 0.2, "share_contested": 0.3, "share_c4": 0.5,
    })
    figure = figures.class_share_figure(table, ["baseline", "co2_only"])
    labels = [t.get_text() for t in figure.axes[0].get_yticklabels()]
    assert len(labels) == 2 * figures.MAX_CHART_DISTRICTS
    assert {label.split("  ")[0] for label in labels} == {f"D{i}" for i in range(count - figures.MAX_CHART_DISTRICTS, count)}
    assert f"{count - figures.MAX_CHART_DISTRICTS} more in the table" in figure.axes[0].get_xlabel()
    assert largest_districts(table, 3) == ["D497", "D498", "D499"]


def test_one_brief_per_district_for_too_many_districts_is_refused_before_computing(tmp_path, output_folder):
    folder, before = output_folder
    zones = tmp_path / "many.gpkg"
    _many_districts(201).to_file(zones, engine="pyogrio")
    config = demo_config(brief=True)
    config["brief"].update(zones=str(zones), name_field="district", per_district=True)
    assert_clean_error(cli("run", write_config(tmp_path, config), "--no-progress"), EXIT_CONFIG,
                       "brief.per_district", "has 201 districts", "402 HTML and PDF files", "at most 200")
    assert snapshot(folder) == before


# ------------------------------------------------------------------------------------------- scheduler


@pytest.mark.slow  # a child process waits for the connection deadline
def test_a_scheduler_that_accepts_but_never_answers_meets_a_deadline(tmp_path):
    server = socket.socket()
    server.bind(("127.0.0.1", 0))
    server.listen(8)
    server.settimeout(1.0)
    held, stop = [], threading.Event()

    def accept():
        while not stop.is_set():
            try:
                held.append(server.accept()[0])  # accepted, never answered
            except OSError:
                pass

    thread = threading.Thread(target=accept, daemon=True)
    thread.start()
    try:
        address = f"tcp://127.0.0.1:{server.getsockname()[1]}"
        config = write_config(tmp_path, demo_config(scenarios=1))
        result = run_subprocess("run", config, "--no-progress", "--scheduler", address, timeout=240)
    finally:
        stop.set()
        thread.join(timeout=5)
        for connection in held:
            connection.close()
        server.close()
    assert result.returncode == EXIT_CONFIG, result.stderr
    assert f"cannot reach the dask scheduler at {address}" in " ".join(result.stderr.split())
    assert held, "the fake scheduler was never contacted"
