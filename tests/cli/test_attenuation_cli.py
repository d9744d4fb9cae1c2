"""``stackdepth attenuation``: report fields, outputs, and one-line errors with exit status 2.

The demo's true lengths come from viewer_plugin.demo (recorded in the file's metadata);
the check of the estimate itself against outside references is in tests/kernels.
"""

from __future__ import annotations

import json

import numpy as np
import pytest

from tests.cli._console import assert_one_line_error
from tests.cli._console import run_cli as _run
from viewer_plugin.cli import main
from viewer_plugin.demo import fibre_slab
from viewer_plugin.io import read_stack, write_ome_tiff


@pytest.fixture(scope="module")
def slab_file(tmp_path_factory):
    demo = fibre_slab(seed=0, shape=(40, 128, 128))
    path = tmp_path_factory.mktemp("in") / "slab.ome.tif"
    write_ome_tiff(path, demo.data, axes="ZYX", scale=demo.scale, metadata={"truth": demo.truth})
    return path, demo


def run_cli(*args: str):
    """`stackdepth attenuation ARGS` through the real console entry point."""
    return _run("attenuation", *args)


def test_report_plot_and_corrected_stack(slab_file, tmp_path, capsys):
    path, demo = slab_file
    out, report, plot = tmp_path / "c.ome.tif", tmp_path / "r.json", tmp_path / "p.png"
    status = main(["attenuation", str(path), "-o", str(out), "--report", str(report), "--plot", str(plot)])
    assert status == 0
    text = capsys.readouterr().out
    assert "attenuation length" in text and "relative, not calibrated" in text
    data = json.loads(report.read_text())
    for key in ("length_um", "length_interval_um", "model", "r_squared", "offset", "profile", "gain",
                "input", "parameters", "stackdepth_version", "caution", "depth_um"):
        assert key in data, key
    assert data["model"] == "exponential" and len(data["profile"]) == len(data["gain"]) == 40
    assert data["parameters"]["z_step_um"] == 1.0 and data["input"].endswith("slab.ome.tif")
    assert data["demo_truth"]["attenuation_length_um"] == demo.truth["attenuation_length_um"]
    low, high = data["length_interval_um"]
    high = float("inf") if high is None else high  # the report's "null_means": infinite
    assert low < data["length_um"] < high
    assert data["interval_method"].startswith("percentile bootstrap") and data["n_resamples"] == 1000
    assert 0.0 < data["field_fraction"] <= 1.0 and data["seed"] == 0
    corrected = read_stack(out)
    assert corrected.data.dtype == np.float32 and corrected.data.shape == demo.data.shape
    assert corrected.scale == pytest.approx(demo.scale)
    assert "attenuation_correction" in corrected.metadata
    assert plot.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    np.testing.assert_array_equal(read_stack(path).data, demo.data)  # input untouched


def test_options_model_axis_zstep_and_channels(tmp_path, capsys):
    demo = fibre_slab(seed=1, shape=(30, 96, 96))
    two = np.stack([demo.data, demo.data], axis=1)  # ZCYX
    path = tmp_path / "two.ome.tif"
    write_ome_tiff(path, two, axes="ZCYX", scale=(2.0, 1.0, 0.3, 0.3), channel_names=["a", "b"])
    report = tmp_path / "r.json"
    assert main(["attenuation", str(path), "--report", str(report), "--model", "smooth"]) == 0
    data = json.loads(report.read_text())
    assert [c["channel"] for c in data["channels"]] == [0, 1]
    assert data["channels"][0]["model"] == "smooth" and data["parameters"]["z_step_um"] == 2.0
    assert data["channels"][0]["length_um"] == pytest.approx(data["channels"][1]["length_um"])
    report1, report2 = tmp_path / "r1.json", tmp_path / "r2.json"
    assert main(["attenuation", str(path), "--report", str(report1), "--channel", "1"]) == 0
    assert main(["attenuation", str(path), "--report", str(report2), "--channel", "1",
                 "--z-step", "1", "--axis", "0"]) == 0
    file_step, one = json.loads(report1.read_text()), json.loads(report2.read_text())
    assert one["channel"] == 1 and one["parameters"]["z_step_from"] == "--z-step"
    # a 1 um step instead of 2 halves the length exactly (the same decay per slice)
    assert one["length_um"] == pytest.approx(file_step["length_um"] / 2, rel=1e-9)
    capsys.readouterr()


def test_existing_output_needs_overwrite(slab_file, tmp_path):
    path, _ = slab_file
    report = tmp_path / "r.json"
    report.write_text("keep me")
    result = run_cli(str(path), "--report", str(report))
    assert_one_line_error(result, "--report", "--overwrite")
    assert report.read_text() == "keep me"
    assert run_cli(str(path), "--report", str(report), "--overwrite").returncode == 0
    assert json.loads(report.read_text())["command"] == "attenuation"


def test_missing_file_bad_zstep_bad_axis_bad_channel(slab_file, tmp_path):
    path, _ = slab_file
    assert_one_line_error(run_cli(str(tmp_path / "missing.ome.tif")), "no such file")
    assert_one_line_error(run_cli(str(path), "--z-step", "0"), "--z-step")
    assert_one_line_error(run_cli(str(path), "--z-step", "-2"), "--z-step")
    assert_one_line_error(run_cli(str(path), "--axis", "t"), "--axis")
    assert_one_line_error(run_cli(str(path), "--channel", "3"), "--channel")
    assert_one_line_error(run_cli(str(path), "--max-gain", "0.5"), "--max-gain")


def test_time_series_is_refused_and_plots_per_channel(tmp_path, capsys):
    series = np.zeros((3, 8, 32, 32), np.uint16)
    path = tmp_path / "series.ome.tif"
    write_ome_tiff(path, series, axes="TZYX", scale=(30.0, 1.0, 0.3, 0.3))
    result = run_cli(str(path))
    assert_one_line_error(result, "time points", "bleaching")
    demo = fibre_slab(seed=0, shape=(30, 96, 96))
    two = tmp_path / "two.ome.tif"
    write_ome_tiff(two, np.stack([demo.data, demo.data], axis=0), axes="CZYX", scale=(1.0, 1.0, 0.3, 0.3))
    plot = tmp_path / "p.png"
    assert main(["attenuation", str(two), "--plot", str(plot), "--model", "quantile",
                 "-o", str(tmp_path / "c.ome.tif")]) == 0
    assert (tmp_path / "p_c0.png").exists() and (tmp_path / "p_c1.png").exists()
    out = read_stack(tmp_path / "c.ome.tif")
    assert out.axes == "CZYX" and out.data.dtype == np.float32
    capsys.readouterr()
    # the per-channel plots are not overwritten either
    result = run_cli(str(two), "--plot", str(plot))
    assert_one_line_error(result, "--plot", "--overwrite")
