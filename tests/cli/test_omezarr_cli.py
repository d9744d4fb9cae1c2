"""The commands read OME-Zarr folders and write OME-Zarr when the output ends in .ome.zarr.

References: pixels compared with the TIFF they were converted from (tifffile via read_stack) and
with numpy's max along z (numpy documentation).
"""

from __future__ import annotations

import numpy as np
import pytest

from tests.cli._console import assert_one_line_error, run_cli
from viewer_plugin.cli import main
from viewer_plugin.io import read_stack, write_ome_tiff


@pytest.fixture(scope="module")
def zarr_stack(tmp_path_factory):
    folder = tmp_path_factory.mktemp("zarr")
    rng = np.random.default_rng(0)
    data = (100 + rng.poisson(5.0, (12, 48, 40))).astype(np.uint16)
    for z in range(12):
        data[z, 3 + 3 * z: 5 + 3 * z, 4:36] += 600
    tif = write_ome_tiff(folder / "bars.ome.tif", data, axes="ZYX", scale=(2.0, 0.4, 0.5))
    out = folder / "bars.ome.zarr"
    assert main(["convert", str(tif), str(out), "--chunks", "4", "16", "16"]) == 0
    return out, data


def test_convert_keeps_pixels_scale_and_chunks(zarr_stack):
    path, data = zarr_stack
    stack = read_stack(path)
    assert stack.axes == "ZYX" and stack.scale == pytest.approx((2.0, 0.4, 0.5))
    assert stack.data.chunksize == (4, 16, 16)
    np.testing.assert_array_equal(np.asarray(stack.data), data)


def test_project_reads_and_writes_ome_zarr(zarr_stack, tmp_path):
    path, data = zarr_stack
    out = tmp_path / "max.ome.zarr"
    assert main(["project", str(path), "-o", str(out), "--method", "max"]) == 0
    written = read_stack(out)
    assert written.axes == "YX" and written.scale == pytest.approx((0.4, 0.5))
    np.testing.assert_array_equal(np.asarray(written.data), data.max(axis=0))  # numpy reference
    rgb = tmp_path / "peak.ome.zarr"
    assert main(["project", str(path), "-o", str(rgb)]) == 0
    colour = read_stack(rgb)
    assert colour.axes == "CYX" and colour.channel_names == ["red", "green", "blue"]


def test_attenuation_writes_a_corrected_ome_zarr(zarr_stack, tmp_path):
    path, data = zarr_stack
    out = tmp_path / "flat.ome.zarr"
    assert main(["attenuation", str(path), "-o", str(out)]) == 0
    written = read_stack(out)
    assert written.data.shape == data.shape and written.data.dtype == np.float32
    assert written.scale == pytest.approx((2.0, 0.4, 0.5))


def test_local_cluster_gives_the_same_projection(zarr_stack, tmp_path):
    """--workers 2: a local dask.distributed cluster computes what the threads compute."""
    path, _ = zarr_stack
    a, b = tmp_path / "threads.ome.tif", tmp_path / "cluster.ome.tif"
    assert main(["project", str(path), "-o", str(a), "--method", "max"]) == 0
    assert main(["project", str(path), "-o", str(b), "--method", "max", "--workers", "2"]) == 0
    np.testing.assert_array_equal(read_stack(a).data, read_stack(b).data)


def test_bad_convert_and_cluster_options(zarr_stack, tmp_path):
    path, _ = zarr_stack
    tif = write_ome_tiff(tmp_path / "s.ome.tif", np.zeros((3, 8, 8), np.uint16), axes="ZYX",
                         scale=(1.0, 1.0, 1.0))
    assert_one_line_error(run_cli("convert", tif, tmp_path / "out.tif"), "OUTPUT", ".ome.zarr")
    assert_one_line_error(run_cli("convert", tif, path), "exists", "--overwrite")
    assert_one_line_error(run_cli("project", path, "-o", tmp_path / "o.ome.tif", "--workers", "0"),
                          "--workers")


def test_missing_chunk_is_one_line_naming_it(zarr_stack, tmp_path):
    import shutil

    path, _ = zarr_stack
    broken = tmp_path / "broken.ome.zarr"
    shutil.copytree(path, broken)
    chunk = next(p for p in sorted((broken / "0").rglob("*")) if p.is_file() and not p.name.startswith(".")
                 and p.name != "zarr.json")
    chunk.unlink()
    result = run_cli("project", broken, "-o", tmp_path / "o.ome.tif", "--method", "max")
    assert_one_line_error(result, "chunk")


def test_convert_of_a_compressed_tiff_under_a_local_cluster(tmp_path):
    """`convert --workers 1` reads a zlib-compressed TIFF in its own process (a worker could not
    open the file handle): the OME-Zarr equals the TIFF (tifffile reads it back)."""
    import subprocess
    import sys

    import tifffile

    data = np.random.default_rng(0).integers(0, 1000, (6, 40, 48), dtype=np.uint16)
    tifffile.imwrite(tmp_path / "z.tif", data, compression="zlib")
    out = tmp_path / "z.ome.zarr"
    run = subprocess.run([sys.executable, "-m", "viewer_plugin.cli", "convert", str(tmp_path / "z.tif"),
                          str(out), "--workers", "1"], capture_output=True, text=True, timeout=600)
    assert run.returncode == 0, run.stderr
    np.testing.assert_array_equal(np.asarray(read_stack(out).data), data)
