"""Runs on a real dask.distributed cluster give the same pixels as the threaded scheduler, and the chunk
size does not change any pixel either (the determinism the performance issue asks for).

A `dask scheduler` and two `dask worker` processes are started on 127.0.0.1 (free ports, always torn down)
and the CLI is pointed at them with ``--scheduler tcp://127.0.0.1:PORT``. The region is the invented
synthetic grid of benchmarks/synthetic.py, 1100 x 520 cells: three 512-cell chunks across and two down
(more than 1024 cells wide, so 512 and 1024 chunks differ), one season month to keep it quick.

The ensemble check runs a narrow strip of the same invented grid (600 x 60 cells: two 512-cell chunks across)
with an invented three-member scenario (benchmarks.synthetic.write_members: the region's climate warmed by
made-up amounts), each member's layers written and four parameter draws.
"""

from __future__ import annotations

import hashlib
import os
import socket
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest
import rasterio
import yaml

from suitability.variables import layer_names

REPO = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(REPO))
from benchmarks.synthetic import write_members, write_region  # noqa: E402  (the repository root holds benchmarks/)

BIN = Path(sys.executable).parent

pytestmark = pytest.mark.slow  # a dask cluster and CLI runs in new processes


def pixel_hashes(folder: Path) -> dict[str, str]:
    """sha256 of the pixel values (not the file bytes: compression and layout may differ) of every map."""
    hashes = {}
    for path in sorted(folder.rglob("*.tif")):
        with rasterio.open(path) as src:
            pixels = src.read()
        hashes[str(path.relative_to(folder))] = hashlib.sha256(np.ascontiguousarray(pixels).tobytes()).hexdigest()
    return hashes


def run_cli(config: Path, output: Path, *extra: str) -> None:
    settings = yaml.safe_load(config.read_text())
    settings["output"]["folder"] = str(output)
    run_config = config.with_name(f"{output.name}.yaml")
    run_config.write_text(yaml.safe_dump(settings))
    subprocess.run([str(BIN / "suitability"), "run", str(run_config), "--no-progress", *extra], check=True,
                   capture_output=True, text=True, timeout=300)


def free_port() -> int:
    with socket.socket() as sock:
        sock.bind(("127.0.0.1", 0))
        return sock.getsockname()[1]


@pytest.fixture(scope="module")
def region(tmp_path_factory):
    folder = tmp_path_factory.mktemp("distributed_region")
    return write_region(folder, 1100, rows=520, scenarios=2, months=[1])


@pytest.fixture(scope="module")
def region_on_target_grid(tmp_path_factory):
    # Inputs already on the target grid: GDAL's block-wise warping of coarser inputs rounds the last bit
    # differently for different block origins, which is a property of the input alignment, not of the
    # compute and write path this test is about.
    folder = tmp_path_factory.mktemp("chunking_region")
    return write_region(folder, 1100, rows=520, scenarios=1, months=[1], inputs_on_target_grid=True)


@pytest.fixture(scope="module")
def threaded_hashes(region):
    output = region.parent / "threads_512"
    run_cli(region, output, "--scheduler", "threads", "--workers", "2")
    hashes = pixel_hashes(output)
    seasonal = len(layer_names("seasonal"))
    # baseline layers, and the scenario's with its change layers (suitability.variables registry)
    assert len(hashes) == seasonal + seasonal + len(layer_names("change"))
    return hashes


@pytest.fixture
def cluster(tmp_path):
    """A scheduler and two single-threaded workers on 127.0.0.1; yields the scheduler address."""
    port = free_port()
    address = f"tcp://127.0.0.1:{port}"
    env = dict(os.environ)
    processes = [subprocess.Popen([str(BIN / "dask"), "scheduler", "--host", "127.0.0.1", "--port", str(port),
                                   "--dashboard-address", ":0"], env=env, cwd=tmp_path,
                                  stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)]
    try:
        for name in ("worker_a", "worker_b"):
            processes.append(subprocess.Popen(
                [str(BIN / "dask"), "worker", address, "--nthreads", "1", "--dashboard-address", ":0",
                 "--local-directory", str(tmp_path / name), "--name", name],
                env=env, cwd=tmp_path, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL))
        from distributed import Client

        deadline = time.monotonic() + 60
        while True:  # the scheduler may need a moment before it accepts connections
            try:
                with Client(address, timeout=5, set_as_default=False) as client:
                    client.wait_for_workers(2, timeout=max(1.0, deadline - time.monotonic()))
                break
            except OSError:
                if time.monotonic() > deadline:
                    raise
                time.sleep(0.5)
        yield address
    finally:
        try:  # the quick way: the scheduler tells its workers to close, then closes itself
            from distributed import Client

            with Client(address, timeout=5, set_as_default=False) as client:
                client.shutdown()
        except Exception:  # noqa: BLE001 - fall back on signals below
            pass
        for process in processes:
            try:
                process.wait(timeout=10)
            except subprocess.TimeoutExpired:
                process.terminate()
                try:
                    process.wait(timeout=10)
                except subprocess.TimeoutExpired:
                    process.kill()
                    process.wait()


def test_two_worker_cluster_gives_the_threaded_pixels(region, threaded_hashes, cluster):
    # Derived here: every cell is computed alone and written whole, so where it runs cannot change it.
    output = region.parent / "cluster_512"
    run_cli(region, output, "--scheduler", cluster)
    assert pixel_hashes(output) == threaded_hashes


def test_chunk_size_does_not_change_any_pixel(region_on_target_grid):
    # Derived here: a cell's numbers do not depend on the block it is computed in.
    hashes = {}
    for chunk in (512, 1024):
        settings = yaml.safe_load(region_on_target_grid.read_text())
        settings["compute"]["chunk_size"] = chunk
        config = region_on_target_grid.with_name(f"chunks_{chunk}_config.yaml")
        config.write_text(yaml.safe_dump(settings))
        output = region_on_target_grid.parent / f"threads_{chunk}"
        run_cli(config, output, "--scheduler", "threads", "--workers", "2")
        hashes[chunk] = pixel_hashes(output)
    assert len(hashes[512]) == len(layer_names("seasonal"))
    assert hashes[1024] == hashes[512]


MEMBERS = ["m1", "m2", "m3"]  # invented members (benchmarks.synthetic.write_members)


@pytest.fixture(scope="module")
def ensemble_region(tmp_path_factory):
    folder = tmp_path_factory.mktemp("ensemble_region")
    config = write_members(write_region(folder, 600, rows=60, scenarios=1, months=[1]), MEMBERS)
    settings = yaml.safe_load(config.read_text())
    settings["uncertainty"] = {"draws": 4, "seed": 1}
    settings["output"]["member_outputs"] = True
    config.write_text(yaml.safe_dump(settings, sort_keys=False))
    return config


def test_two_worker_cluster_gives_the_threaded_pixels_of_an_ensemble(ensemble_region, cluster):
    # Derived here: the members, their draws and the ensemble's pooling are computed cell by cell, so the
    # scheduler that runs them cannot change a pixel of any layer (the scenario's, the ensemble's or a member's).
    threaded = ensemble_region.parent / "ensemble_threads"
    run_cli(ensemble_region, threaded, "--scheduler", "threads", "--workers", "2")
    on_cluster = ensemble_region.parent / "ensemble_cluster"
    run_cli(ensemble_region, on_cluster, "--scheduler", cluster)
    hashes = pixel_hashes(threaded)
    member_layers = layer_names("seasonal") + layer_names("uncertainty")
    for member in MEMBERS:  # every member's seasonal and draw layers were written (output.member_outputs)
        assert {f"warmer_ensemble/members/{member}/{name}.tif" for name in member_layers} <= set(hashes)
    assert {f"warmer_ensemble/{name}.tif" for name in layer_names("ensemble", "uncertainty")} <= set(hashes)
    assert pixel_hashes(on_cluster) == hashes
